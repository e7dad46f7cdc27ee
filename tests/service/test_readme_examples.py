"""The README's API examples run as written: each curl command, and each ``POST`` body
shown in a json block, is replayed on the app and gets the status it shows."""
import pytest

from tests.service.readme_examples import all_examples, curl_examples

EXAMPLES = all_examples()


def test_the_readme_has_its_examples():
    assert len(curl_examples()) >= 6
    assert {example.path for example in EXAMPLES} >= {"/v1/doses/fields", "/v1/doses/routes"}


@pytest.mark.parametrize("example", EXAMPLES, ids=[f"example-{i}" for i in range(len(EXAMPLES))])
def test_each_readme_example_runs_as_written(client, example):
    if example.body is None:
        response = client.get(example.path, headers=example.headers)
    else:
        response = client.post(example.path, data=example.body, headers=example.headers)
    assert response.status_code == example.expected_status, response.get_data(as_text=True)[:500]
