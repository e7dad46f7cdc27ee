"""The docs page in process: problem types held to the code and the contract, the page's own
files served and self-contained, every example of the contract on the page.

The page in a real browser: tests/service/test_docs_browser.py.
"""
from __future__ import annotations

import json
import re
from html import unescape
from pathlib import Path

from tests.service.conftest import REPO
from uvdose.service.problems import PROBLEM_TYPES, TYPE_PREFIX


def _slugs_raised_in_code() -> set[str]:
    text = "\n".join(path.read_text(encoding="utf-8") for path in (REPO / "service").glob("*.py"))
    found = set(re.findall(r'Problem\(\s*\d{3},\s*"([a-z-]+)"', text))
    found |= set(re.findall(r'TYPE_PREFIX \+ "([a-z-]+)"', text))
    return found


def test_every_problem_type_is_registered_and_in_the_contract(openapi_spec):
    registered = {p.slug for p in PROBLEM_TYPES}
    assert _slugs_raised_in_code() <= registered
    description = openapi_spec["info"]["description"]
    for problem in PROBLEM_TYPES:
        assert problem.uri in description, problem.uri
        assert problem.meaning and problem.remedy


def test_the_page_and_its_files_are_served_and_self_contained(client):
    page = client.get("/docs").get_data(as_text=True)
    assert '<link rel="stylesheet" href="/docs/style.css">' in page
    for path, media_type in (("/docs/style.css", "text/css"), ("/docs/page.js", "text/javascript")):
        response = client.get(path)
        assert response.status_code == 200 and response.mimetype == media_type
        text = response.get_data(as_text=True)
        assert "http" not in text and "@import" not in text and "url(" not in text
        assert text == (Path(REPO / "service" / "static" / ("docs.css" if path.endswith("css") else "docs.js"))
                        .read_text(encoding="utf-8"))


def test_every_contract_example_is_on_the_page(client, openapi_spec):
    page = unescape(client.get("/docs").get_data(as_text=True))
    for item in openapi_spec["paths"].values():
        for operation in item.values():
            for media in (operation.get("requestBody") or {}).get("content", {}).values():
                for example in (media.get("examples") or {}).values():
                    assert json.dumps(example["value"], indent=2, ensure_ascii=False) in page
                    assert json.dumps(example["value"], ensure_ascii=False) in page  # in the curl line
                if "example" in media:
                    assert media["example"].rstrip("\n") in page
            for parameter in operation.get("parameters", ()):
                if "example" in parameter:
                    assert f'name="{parameter["name"]}" value="{parameter["example"]}"' in page


def test_the_page_explains_each_problem_type(client):
    page = client.get("/docs").get_data(as_text=True)
    for problem in PROBLEM_TYPES:
        assert f'data-problem="{problem.uri}"' in page
    assert TYPE_PREFIX + "invalid-records" in page
