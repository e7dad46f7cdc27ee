"""The answers the README shows are the answers the service gives today: each request
of the README followed by the answer it shows is replayed on the app (embedded defaults,
as ``uvdose serve`` runs) and every figure shown is held to the answer
(``tests/service/readme_figures.py`` says how). A model change that moves a shown figure
fails here until the README is rerun: ``python -m tests.service.readme_figures``.
"""
import pytest

from tests.service.readme_examples import shown_answers
from tests.service.readme_figures import answer_of, csv_differences, json_differences, rewritten_csv, rewritten_json

SHOWN = shown_answers()


def test_the_readme_shows_answers():
    assert len(SHOWN) >= 5
    assert {kind for _, kind, _ in SHOWN} == {"json", "csv"}


@pytest.mark.parametrize("example, kind, shown", SHOWN, ids=[f"shown-{i}" for i in range(len(SHOWN))])
def test_each_shown_answer_is_today_s_answer(client, example, kind, shown):
    response = answer_of(client, example)
    if kind == "csv":
        differences = csv_differences(shown, response.get_data(as_text=True))
    else:
        differences = json_differences(shown, response.get_json())
    assert not differences, f"{example.path}: the README's figures are stale:\n" + "\n".join(differences) \
        + "\nrerun: python -m tests.service.readme_figures"


def test_the_checker_catches_a_stale_figure():
    answer = {"results": [{"id": "a", "uv_index": 7.04, "effective_w_m2": {"erythema": 0.176}, "zenith": 1.0}]}
    assert json_differences('{"results": [{"id": "a", "uv_index": 7.04, "...": "..."}]}', answer) == []
    assert json_differences('{"id": "a", "uv_index": 7.0, "effective_w_m2": {"erythema": 0.18}}', answer) == []
    assert json_differences('{"id": "a", "uv_index": 7.06}', answer) != []
    assert csv_differences("id,x,y\na,60.11...,2.5\n", "id,x,y\na,60.1138,2.54\n") == []
    assert csv_differences("id,x,y\na,60.12...,2.5\n", "id,x,y\na,60.1138,2.56\n") != []


def test_a_rewritten_answer_shows_today_s_figures():
    answer = {"results": [{"id": "a", "uv_index": 7.04, "effective_w_m2": {"erythema": 0.176}}]}
    shown = '{"results": [{"id": "a", "uv_index": 6.1,\n  "effective_w_m2": {"erythema": 0.1212}, "...": "..."}]}'
    assert rewritten_json(shown, answer) == ('{"results": [{"id": "a", "uv_index": 7.0,\n'
                                             '  "effective_w_m2": {"erythema": 0.1760}, "...": "..."}]}')
    assert rewritten_csv("id,x,y\na,60.1...,2.5\n", "id,x,y\na,61.2345,2.54\n") == "id,x,y\na,61.2...,2.5\n"
