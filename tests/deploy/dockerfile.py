"""Reading a Dockerfile without Docker: instructions, build stages, ENV, exec-form arguments."""
from __future__ import annotations

import re
import shlex
from pathlib import Path

import yaml


def dockerfile_instructions(path: Path) -> list[tuple[str, str]]:
    """(INSTRUCTION, arguments) pairs, continuation lines joined, comments dropped."""
    instructions, pending = [], ""
    for raw in path.read_text().splitlines():
        line = raw.strip()
        if not pending and (not line or line.startswith("#")):
            continue
        if pending and line.startswith("#"):
            continue
        if line.endswith("\\"):
            pending += line[:-1] + " "
            continue
        line = pending + line
        pending = ""
        keyword, _, rest = line.partition(" ")
        instructions.append((keyword.upper(), rest.strip()))
    assert not pending, "Dockerfile ends inside a continued line"
    return instructions


def stages(instructions):
    """Instructions grouped by build stage: list of (stage name, [(kw, args), ...])."""
    grouped = []
    for keyword, args in instructions:
        if keyword == "FROM":
            match = re.fullmatch(r"(\S+)(?:\s+AS\s+(\S+))?", args, re.IGNORECASE)
            assert match, f"unreadable FROM {args!r}"
            grouped.append((match.group(2), []))
        elif grouped:
            grouped[-1][1].append((keyword, args))
    return grouped


def env_of(stage_instructions) -> dict[str, str]:
    env = {}
    for keyword, args in stage_instructions:
        if keyword == "ENV":
            for item in shlex.split(args):
                name, _, value = item.partition("=")
                env[name] = value
    return env


def exec_form(args: str) -> list[str]:
    return yaml.safe_load(args)  # a JSON array is valid YAML
