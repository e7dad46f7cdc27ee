"""The README's API examples run as written: each curl command is replayed on the app."""
import re
import shlex

import pytest

from tests.service.conftest import REPO


def _examples():
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("## API examples", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```sh\n(.*?)```", section, flags=re.S)
    commands = []
    for block in blocks:
        joined = block.replace("\\\n", " ")
        heredoc = re.search(r"<<'CSV'\n(.*?)\nCSV", joined, flags=re.S)
        for line in joined.splitlines():
            if line.startswith("curl "):
                commands.append((line.split(" <<'CSV'")[0], heredoc.group(1) + "\n" if heredoc else None))
    return commands


EXAMPLES = _examples()


def test_the_readme_has_its_examples():
    assert len(EXAMPLES) >= 6


@pytest.mark.parametrize("command, stdin", EXAMPLES, ids=[f"example-{i}" for i in range(len(EXAMPLES))])
def test_each_readme_example_runs_as_written(client, command, stdin):
    words = shlex.split(command)
    url = next(word for word in words if word.startswith("http"))
    path = url.removeprefix("http://127.0.0.1:8080")
    headers = dict(words[i + 1].split(": ", 1) for i, word in enumerate(words) if word == "-H")
    data = words[words.index("-d") + 1] if "-d" in words else stdin
    if data is None:
        response = client.get(path, headers=headers)
    else:
        response = client.post(path, data=data.encode(), headers=headers)
    expected = 422 if '"lat": 145.76' in (data or "") else 200
    assert response.status_code == expected, response.get_data(as_text=True)[:500]
