"""The layout the code promises (DEVELOPERS.md): blueprints never import each other, the
service's modules and the models' modules each import one another without a circle, and
models/ is physics only (no web, cache or wire-format library, nothing of the service).

Imports are read from the source (every ``import``/``from … import`` anywhere in a module,
function-level ones included, and ``importlib.import_module("uvdose.…")`` calls), so a
lazy import inside a function cannot hide a dependency.
"""
from __future__ import annotations

import ast
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
FORBIDDEN_IN_MODELS = ("flask", "redis", "marshmallow", "orjson", "uvdose.service")
"""What models/ never imports (its own sub-modules included)."""


def imported_names(path: Path) -> set[str]:
    """Every dotted name the file at ``path`` imports (``from a import b`` gives ``a`` and ``a.b``)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
        elif (isinstance(node, ast.Call) and getattr(node.func, "attr", getattr(node.func, "id", None)) == "import_module"
              and node.args and isinstance(node.args[0], ast.Constant) and isinstance(node.args[0].value, str)):
            names.add(node.args[0].value)
    return names


def imported_modules(path: Path, package: str) -> set[str]:
    """Modules of ``package`` (dotted, e.g. ``uvdose.service``) that the file at ``path`` imports."""
    names = imported_names(path)
    modules = {path.stem for path in path.parent.glob("*.py")} | \
              {folder.name for folder in path.parent.iterdir() if (folder / "__init__.py").is_file()}
    found = set()
    for name in names:
        if name.startswith(package + "."):
            first = name[len(package) + 1:].split(".")[0]
            if first in modules and first != "__init__":
                found.add(first)
    return found


def import_graph(folder: Path, package: str) -> dict[str, set[str]]:
    """Module name -> the package's modules it imports, for every module directly in ``folder``
    (a subpackage counts as one module, its own files' imports merged)."""
    graph: dict[str, set[str]] = {}
    for path in sorted(folder.glob("*.py")):
        if path.stem != "__init__":
            graph[path.stem] = imported_modules(path, package) - {path.stem}
    for sub in sorted(p for p in folder.iterdir() if (p / "__init__.py").is_file()):
        graph[sub.name] = set().union(*(imported_modules(f, package) - {sub.name}
                                        for f in sub.rglob("*.py")))
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Every import circle in ``graph`` (one list of modules per circle found)."""
    found, state = [], {}

    def visit(node: str, trail: list[str]) -> None:
        state[node] = "open"
        for target in sorted(graph.get(node, ())):
            if state.get(target) == "open":
                found.append(trail[trail.index(target):] + [target])
            elif target not in state:
                visit(target, trail + [target])
        state[node] = "done"

    for node in sorted(graph):
        if node not in state:
            visit(node, [node])
    return found


def test_blueprints_import_no_other_blueprint():
    graph = import_graph(REPO / "service", "uvdose.service")
    blueprints = {name for name in graph if name.startswith("routes_")}
    assert len(blueprints) >= 5
    crossing = {name: sorted(graph[name] & blueprints) for name in blueprints if graph[name] & blueprints}
    assert crossing == {}


def test_the_service_has_no_import_circle():
    graph = import_graph(REPO / "service", "uvdose.service")
    assert graph["app"] >= {"engine_gateway", "routes_irradiance"}  # the reader sees every kind of import
    assert cycles(graph) == []


def test_the_circle_finder_finds_a_circle():
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c", "a"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_the_models_have_no_import_circle():
    graph = import_graph(REPO / "models", "uvdose.models")
    assert "clear_sky" in graph["engine"]
    assert "ozone_climatology" in graph["dose"]  # imported inside a function only
    assert cycles(graph) == []


def test_the_models_import_no_web_cache_or_wire_format_library():
    offending = {}
    for path in sorted((REPO / "models").rglob("*.py")):
        bad = sorted(name for name in imported_names(path)
                     if any(name == f or name.startswith(f + ".") for f in FORBIDDEN_IN_MODELS))
        if bad:
            offending[str(path.relative_to(REPO))] = bad
    assert len(list((REPO / "models").rglob("*.py"))) > 20  # the walk sees the package
    assert offending == {}


def test_no_models_module_reads_the_environment():
    # models/ takes its configuration as arguments (DEVELOPERS.md); the service's settings
    # (service/config.py) read the environment.
    readers = sorted(str(path.relative_to(REPO)) for path in (REPO / "models").rglob("*.py")
                     if "os.environ" in (text := path.read_text(encoding="utf-8")) or "getenv" in text)
    assert readers == []


def test_the_client_stands_alone():
    """uvdose.client talks HTTP to the service and imports none of its modules (nor the
    models), so integrators get the client without the server's code paths."""
    for path in sorted((REPO / "service" / "client").glob("*.py")):
        names = imported_names(path)
        assert not {n for n in names if n.startswith(("uvdose.service", "uvdose.models", "flask"))}, path.name
        assert all(n.startswith("uvdose.client") for n in names if n.startswith("uvdose")), path.name
