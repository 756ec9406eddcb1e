"""The layers of DEVELOPERS.md, read off the code's own imports: no import runs up a layer,
no two modules import each other (directly or round a circle), the pure core
uses no I/O library, and no module grows past about 400 lines."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("receiver", "dashboard")

# Which layers each layer may import (its own included). "base" is
# receiver/__init__.py and receiver/errors.py, which every layer may use.
ALLOWED = {
    "base": {"base"},
    "odometry": {"base", "odometry"},
    "formats": {"base", "odometry", "formats"},
    "sim": {"base", "odometry", "formats", "sim"},
    "analysis": {"base", "odometry", "analysis"},
    "live": {"base", "odometry", "formats", "live"},
    "dashboard": {"base", "odometry", "formats", "analysis", "live", "dashboard"},
    "cli": {"base", "odometry", "formats", "sim", "analysis", "live", "dashboard", "cli"},
    "senders": set(),  # copied into robot code: standalone
}
# The one exception the rules name: the demo streams the simulated robot.
EXCEPTIONS = {("receiver.live.demo", "sim")}
# Outside libraries the pure layers may import (the standard library's
# pure modules are always fine; these lists are of what is not).
IO_MODULES = {"socket", "threading", "asyncio", "subprocess", "multiprocessing", "select", "selectors", "signal",
              "http", "urllib", "mmap", "gzip", "tomllib", "json", "time", "datetime"}
# threadpoolctl: diagnosis runs its fits on one BLAS thread (receiver/analysis/diagnose.py).
THIRD_PARTY_ALLOWED = {"odometry": {"numpy"}, "analysis": {"numpy", "scipy", "threadpoolctl"}}
MAX_LINES = 450  # "about 400"


def modules() -> dict[str, Path]:
    found = {}
    for package in PACKAGES:
        for path in sorted((ROOT / package).rglob("*.py")):
            parts = path.relative_to(ROOT).with_suffix("").parts
            name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
            found[name] = path
    return found


def layer(module: str) -> str:
    parts = module.split(".")
    if parts[0] == "dashboard":
        return "dashboard"
    if len(parts) == 1 or parts[1] == "errors":
        return "base"
    return parts[1]


def imports(path: Path, module: str, known: set[str]) -> set[str]:
    """Every receiver/dashboard module ``module`` imports, at the top or inside a function."""
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = ".".join(package.split(".")[: len(package.split(".")) - node.level + 1] + ([base] if base else []))
            names = [base] + [f"{base}.{alias.name}" for alias in node.names]
        else:
            continue
        found.update(name for name in names if name in known)
    found.discard(module)
    return found


def outside_imports(path: Path) -> set[str]:
    """Top-level names of every module imported that is not ours."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            found.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and not node.level and node.module:
            found.add(node.module.split(".")[0])
    return found - set(PACKAGES) - {"__future__"}


GRAPH = {name: imports(path, name, set(modules())) for name, path in modules().items()}


def test_the_graph_is_read():
    # A reader that found nothing would pass every rule below.
    assert "receiver.odometry.columns" in GRAPH["receiver.formats.block_decoder"]
    assert sum(len(v) for v in GRAPH.values()) > 100


@pytest.mark.parametrize("module", sorted(GRAPH))
def test_no_import_runs_up_a_layer(module):
    mine = layer(module)
    wrong = sorted(
        target for target in GRAPH[module]
        if layer(target) not in ALLOWED[mine] and (module, layer(target)) not in EXCEPTIONS
    )
    assert not wrong, f"{module} ({mine}) imports {wrong}: the {mine} layer may use only {sorted(ALLOWED[mine])}"


def test_nothing_imports_the_command_line():
    users = sorted(m for m, targets in GRAPH.items() if layer(m) != "cli" and any(layer(t) == "cli" for t in targets))
    assert not users


def strongly_connected(graph: dict[str, set[str]]) -> list[list[str]]:
    """Tarjan's algorithm: the groups of modules that reach each other."""
    index, low, stack, on_stack, groups = {}, {}, [], set(), []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            groups.append(sorted(group))

    for v in graph:
        if v not in index:
            visit(v)
    return groups


def test_no_import_circles():
    # A package's __init__ that hands on a name from its own module is not a circle of code.
    graph = {m: {t for t in targets if not (m.startswith(t + ".") and modules()[t].name == "__init__.py")}
             for m, targets in GRAPH.items()}
    circles = [group for group in strongly_connected(graph) if len(group) > 1]
    assert not circles


def test_the_circle_finder_finds_a_circle():
    assert strongly_connected({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"], ["d"]]


@pytest.mark.parametrize("pure", ["odometry", "analysis"])
def test_the_pure_core_uses_no_io(pure):
    for name, path in modules().items():
        if layer(name) != pure:
            continue
        outside = outside_imports(path)
        io = outside & IO_MODULES
        assert not io, f"{name} imports {sorted(io)}: the {pure} layer does no I/O"
        third_party = {m for m in outside if m not in _STDLIB} - THIRD_PARTY_ALLOWED[pure]
        assert not third_party, f"{name} imports {sorted(third_party)}"


_STDLIB = __import__("sys").stdlib_module_names


def test_no_module_is_much_over_400_lines():
    long = {name: n for name, path in modules().items() if (n := len(path.read_text().splitlines())) > MAX_LINES}
    assert not long, f"split these: {long}"
