"""The README's request examples, read once for every test that replays them.

Two shapes appear in the README: ``curl`` commands in ``sh`` blocks (the "API examples"
section; a CSV body comes as a here-document) and ``json`` blocks whose first line is
``POST /v1/...`` followed by the body (the "Doses" section). Each becomes one
:class:`Example`: method, path with its query string, headers and body bytes.
"""
from __future__ import annotations

import re
import shlex
from dataclasses import dataclass, field
from pathlib import Path

README = Path(__file__).resolve().parents[2] / "README.md"
SERVER = "http://127.0.0.1:8080"


@dataclass(frozen=True)
class Example:
    method: str
    path: str  # with the query string, if any
    headers: dict[str, str] = field(default_factory=dict)
    body: bytes | None = None

    @property
    def expected_status(self) -> int:
        # The one example that shows a rejected batch (README, "A batch with mistakes").
        return 422 if self.body is not None and b'"lat": 145.76' in self.body else 200


def _curl(command: str, stdin: str | None) -> Example:
    words = shlex.split(command)
    url = next(word for word in words if word.startswith("http"))
    headers = dict(words[i + 1].split(": ", 1) for i, word in enumerate(words) if word == "-H")
    data = words[words.index("-d") + 1] if "-d" in words else stdin
    body = data.encode() if data is not None else None
    return Example("POST" if body is not None else "GET", url.removeprefix(SERVER), headers, body)


def _sh_examples(block: str) -> list[Example]:
    joined = block.replace("\\\n", " ")
    heredoc = re.search(r"<<'CSV'\n(.*?)\nCSV", joined, flags=re.S)
    return [_curl(line.split(" <<'CSV'")[0], heredoc.group(1) + "\n" if heredoc else None)
            for line in joined.splitlines() if line.startswith("curl ")]


def curl_examples(text: str | None = None) -> list[Example]:
    """Every curl command of the "API examples" section, as written."""
    text = README.read_text(encoding="utf-8") if text is None else text
    section = text.split("## API examples", 1)[1].split("\n## ", 1)[0]
    return [example for block in re.findall(r"```sh\n(.*?)```", section, flags=re.S)
            for example in _sh_examples(block)]


def _posted(block: str) -> Example:
    first, body = block.split("\n", 1)
    return Example("POST", first.split()[1], {"Content-Type": "application/json"}, body.encode())


def shown_answers(text: str | None = None) -> list[tuple[Example, str, str]]:
    """Every request of the README followed at once by the answer it shows:
    ``(example, "json" or "csv", the answer as shown)``."""
    text = README.read_text(encoding="utf-8") if text is None else text
    blocks = re.findall(r"```(\w*)\n(.*?)```", text, flags=re.S)
    pairs = []
    for (lang, body), (next_lang, shown) in zip(blocks, blocks[1:]):
        if next_lang not in ("json", "") or shown.startswith("POST "):
            continue
        if lang == "sh" and body.count("curl ") == 1:
            example, = _sh_examples(body)
        elif lang == "json" and body.startswith("POST /v1/"):
            example = _posted(body)
        else:
            continue
        pairs.append((example, next_lang or "csv", shown))
    return pairs


def posted_json_examples(text: str | None = None) -> list[Example]:
    """Every ``json`` block of the README that starts with a ``POST /v1/...`` line."""
    text = README.read_text(encoding="utf-8") if text is None else text
    return [_posted(block) for block in re.findall(r"```json\n(POST /v1/.*?)```", text, flags=re.S)]


def all_examples() -> list[Example]:
    return curl_examples() + posted_json_examples()
