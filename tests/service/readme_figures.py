"""Compare the answers the README shows with the service's answers, and rewrite them.

Shown answers are abbreviated: ``"..."`` stands for left-out keys or text, and
``60.1138...`` in a CSV cell for left-out digits; an excerpt that is not the whole answer
(one day of a field, say) is found in the answer by its text values. A number matches
to the digits it is printed with (one unit in its last place). ``rewritten`` puts
today's figures into a shown answer at the precision and layout it was shown with, so
``python -m tests.service.readme_figures`` reruns every shown answer of the README in
place.
"""
from __future__ import annotations

import csv
import io
import json
import re
import sys
from decimal import Decimal

from tests.service.readme_examples import README, shown_answers

ELIDED = "..."


def _printed_number_tolerance(shown: Decimal) -> float:
    # One unit in the last printed place.
    return float(Decimal(1).scaleb(shown.as_tuple().exponent))


def _differences(shown, actual, path: str) -> list[str]:
    if isinstance(shown, str) and ELIDED in shown:
        head = shown.split(ELIDED, 1)[0]
        return [] if isinstance(actual, str) and actual.startswith(head) else [f"{path}: shown {shown!r}, now {actual!r}"]
    if isinstance(shown, dict):
        if not isinstance(actual, dict):
            return [f"{path}: shown an object, now {actual!r}"]
        return [d for key, value in shown.items() if key != ELIDED
                for d in (_differences(value, actual[key], f"{path}.{key}") if key in actual
                          else [f"{path}.{key}: shown, now absent"])]
    if isinstance(shown, list):
        if not isinstance(actual, list) or len(actual) < len(shown):
            return [f"{path}: shown {len(shown)} items, now {actual!r}"[:300]]
        return [d for i, value in enumerate(shown) for d in _differences(value, actual[i], f"{path}[{i}]")]
    if isinstance(shown, Decimal):
        if isinstance(actual, bool) or not isinstance(actual, (int, float)):
            return [f"{path}: shown {shown}, now {actual!r}"]
        if abs(float(actual) - float(shown)) > _printed_number_tolerance(shown) * 1.0001:
            return [f"{path}: shown {shown}, now {actual!r}"]
        return []
    if isinstance(shown, int) and not isinstance(shown, bool) and isinstance(actual, float):
        return [] if abs(actual - shown) <= 1.0 else [f"{path}: shown {shown}, now {actual!r}"]
    return [] if shown == actual else [f"{path}: shown {shown!r}, now {actual!r}"]


def _text_leaves(shown: dict) -> dict:
    return {k: v for k, v in shown.items() if isinstance(v, str) and ELIDED not in v and k != ELIDED}


def _excerpt_candidates(actual):
    """Every object in the answer, outermost first."""
    stack = [actual]
    while stack:
        node = stack.pop(0)
        if isinstance(node, dict):
            yield node
            stack.extend(node.values())
        elif isinstance(node, list):
            stack.extend(node)


def json_differences(shown_text: str, actual) -> list[str]:
    shown = json.loads(shown_text, parse_float=Decimal)
    keys = _text_leaves(shown)
    for candidate in _excerpt_candidates(actual):
        if all(candidate.get(k) == v for k, v in keys.items()) and set(shown) - {ELIDED} <= set(candidate):
            return _differences(shown, candidate, "answer")
    return [f"no object in the answer has the shown keys and text values {keys}"]


def _cell_differences(shown: str, actual: str, where: str) -> list[str]:
    if shown.endswith(ELIDED):
        return [] if actual.startswith(shown[:-len(ELIDED)]) else [f"{where}: shown {shown}, now {actual}"]
    try:
        number = Decimal(shown)
    except ArithmeticError:
        return [] if shown == actual else [f"{where}: shown {shown!r}, now {actual!r}"]
    ok = actual and abs(float(actual) - float(number)) <= _printed_number_tolerance(number) * 1.0001
    return [] if ok else [f"{where}: shown {shown}, now {actual}"]


def csv_differences(shown_text: str, actual_text: str) -> list[str]:
    shown = list(csv.DictReader(io.StringIO(shown_text)))
    actual = list(csv.DictReader(io.StringIO(actual_text)))
    header = next(csv.reader(io.StringIO(shown_text)))
    out = [f"column {name}: shown, now absent" for name in header if name not in (actual[0] if actual else {})]
    for i, row in enumerate(shown):
        if i >= len(actual):
            return out + [f"row {i}: shown, now absent"]
        out += [d for name in header if name in actual[i]
                for d in _cell_differences(row[name], actual[i][name], f"row {i} {name}")]
    return out



_TOKENS = re.compile(r'"(?:[^"\\]|\\.)*"|-?\d+(?:\.\d+)?(?:[eE][+-]?\d+)?')


def _numeric_leaves(shown, actual):
    """(shown number, today's value) in the order the shown text prints them."""
    if isinstance(shown, dict):
        for key, value in shown.items():
            yield from _numeric_leaves(value, actual.get(key) if isinstance(actual, dict) else None)
    elif isinstance(shown, list):
        for i, value in enumerate(shown):
            yield from _numeric_leaves(value, actual[i] if isinstance(actual, list) and i < len(actual) else None)
    elif isinstance(shown, (Decimal, int)) and not isinstance(shown, bool):
        yield shown, actual


def _formatted_like(token: str, value) -> str:
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        return token
    if "." not in token and "e" not in token.lower():
        return str(int(round(value)))
    decimals = len(token.split(".", 1)[1]) if "." in token else 0
    return f"{value:.{decimals}f}"


def _excerpt_of(shown, actual):
    keys = _text_leaves(shown)
    return next((candidate for candidate in _excerpt_candidates(actual)
                 if all(candidate.get(k) == v for k, v in keys.items())
                 and set(shown) - {ELIDED} <= set(candidate)), None)


def rewritten_json(shown_text: str, actual) -> str:
    shown = json.loads(shown_text, parse_float=Decimal)
    excerpt = _excerpt_of(shown, actual)
    if excerpt is None:
        return shown_text
    leaves = iter(_numeric_leaves(shown, excerpt))

    def replace(match):
        token = match.group(0)
        return token if token.startswith('"') else _formatted_like(token, next(leaves)[1])
    return _TOKENS.sub(replace, shown_text)


def rewritten_csv(shown_text: str, actual_text: str) -> str:
    actual = list(csv.DictReader(io.StringIO(actual_text)))
    lines = shown_text.splitlines(keepends=True)
    header = next(csv.reader(io.StringIO(lines[0])))
    out = [lines[0]]
    for i, line in enumerate(lines[1:]):
        cells = next(csv.reader(io.StringIO(line)))
        new = []
        for name, cell in zip(header, cells):
            now = actual[i].get(name, cell) if i < len(actual) else cell
            digits = cell[:-len(ELIDED)] if cell.endswith(ELIDED) else cell
            try:
                Decimal(digits)
                value = float(now)
            except (ArithmeticError, ValueError):
                new.append(cell)
                continue
            if cell.endswith(ELIDED):  # left-out digits: the shown ones are a prefix
                decimals = len(digits.split(".", 1)[1]) if "." in digits else 0
                new.append(f"{value:.{decimals + 6}f}"[:-6] + ELIDED)
            else:
                new.append(_formatted_like(digits, value))
        out.append(",".join(new) + "\n")
    return "".join(out)


def answer_of(client, example):
    return client.post(example.path, data=example.body, headers=example.headers)


def main() -> None:
    """Rerun every shown answer of the README on the app with its embedded defaults."""
    from uvdose.service.app import create_app

    client = create_app({"UVDOSE_REQUEST_LOG": False}).test_client()
    text = README.read_text(encoding="utf-8")
    for example, kind, shown in shown_answers(text):
        response = answer_of(client, example)
        now = (rewritten_csv(shown, response.get_data(as_text=True)) if kind == "csv"
               else rewritten_json(shown, response.get_json()))
        text = text.replace(shown, now, 1)
    README.write_text(text, encoding="utf-8")
    print(f"rewrote the shown answers of {README}", file=sys.stderr)


if __name__ == "__main__":
    main()
