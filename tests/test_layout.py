"""The package layout is the architecture: these tests keep it so.

The rules are the project's own (DEVELOPERS.md, "Layout"): rooms depend only on the rooms
before them in the pipeline, no module imports another that imports it back (imports
inside functions count; ``if TYPE_CHECKING:`` blocks, which never run, do not), no
private name crosses from one room to another, no module grows past 500 lines, and only
the command line prints, exits or parses arguments. The import graph is read from the
source with :mod:`ast`, so a lazy import cannot hide a cycle.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "heat2d"
MAX_LINES = 500
"""No module over about 500 lines (the layout issue's limit)."""

ROOMS = {
    "version": set(),
    "errors": set(),
    "model": {"errors"},
    "fem": {"errors", "model"},
    "post": {"errors", "version", "model", "fem"},
    "pipeline": {"errors", "model", "fem", "post"},
    "transient": {"errors", "version", "model", "fem", "post", "pipeline"},
    "sweep": {"errors", "version", "model", "fem", "post", "pipeline", "transient"},
    "verify": {"errors", "version", "model", "fem", "post", "pipeline"},
    "compare": {"errors", "version", "model", "fem", "post", "pipeline"},
    "report": {"errors", "version", "model", "fem", "post", "pipeline", "transient", "sweep",
               "compare"},
    "cli": {"errors", "version", "model", "fem", "post", "pipeline", "transient", "sweep",
            "verify", "compare", "report"},
    "__main__": {"cli"},
}
"""What each room may import: the pipeline's order (model text -> Model -> geometry ->
mesh -> system -> solution -> results -> files), studies above it, the CLI on top. The
package root (``heat2d/__init__.py``) is the public facade and may import any room."""


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted(ROOT.rglob("*.py")):
        parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _is_package(name: str) -> bool:
    return MODULES[name].name == "__init__.py"


def _type_checking_only(node: ast.AST, parents: dict[ast.AST, ast.AST]) -> bool:
    while node in parents:
        node = parents[node]
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            return True
    return False


def _imports(name: str) -> list[tuple[str, list[str], int]]:
    """(imported module, names taken from it, line) for every import that can run."""
    tree = ast.parse(MODULES[name].read_text(encoding="utf-8"))
    parents = {child: node for node in ast.walk(tree) for child in ast.iter_child_nodes(node)}
    package = name if _is_package(name) else name.rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        if _type_checking_only(node, parents):
            continue
        if isinstance(node, ast.Import):
            found += [(a.name, [], node.lineno) for a in node.names
                      if a.name.split(".")[0] == "heat2d"]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.split(".")[0] != "heat2d":
                continue
            names = [a.name for a in node.names]
            submodules = [f"{target}.{n}" for n in names if f"{target}.{n}" in MODULES]
            if submodules:
                found += [(s, [], node.lineno) for s in submodules]
                names = [n for n in names if f"{target}.{n}" not in MODULES]
            if names:
                found.append((target, names, node.lineno))
    return found


def _room(name: str) -> str:
    parts = name.split(".")
    return parts[1] if len(parts) > 1 else "heat2d"


GRAPH = {name: sorted({target for target, _, _ in _imports(name) if target in MODULES})
         for name in MODULES}


@pytest.mark.parametrize("name", sorted(MODULES))
def test_no_module_over_the_line_limit(name):
    lines = len(MODULES[name].read_text(encoding="utf-8").splitlines())
    assert lines <= MAX_LINES, f"{MODULES[name]} has {lines} lines (limit {MAX_LINES})"


def test_every_import_names_a_module_of_the_package():
    missing = [(n, t, line) for n in MODULES for t, _, line in _imports(n)
               if t not in MODULES]
    assert not missing


def test_no_import_cycle_between_modules():
    # Depth-first search for a back edge (Tarjan's reasoning, iteratively).
    state: dict[str, int] = {}
    cycles = []

    def visit(start: str) -> None:
        stack = [(start, iter(GRAPH[start]))]
        path = [start]
        state[start] = 1
        while stack:
            node, children = stack[-1]
            child = next(children, None)
            if child is None:
                state[node] = 2
                stack.pop()
                path.pop()
            elif state.get(child) == 1:
                cycles.append(path[path.index(child):] + [child])
            elif child not in state:
                state[child] = 1
                stack.append((child, iter(GRAPH[child])))
                path.append(child)

    for name in MODULES:
        if name not in state:
            visit(name)
    assert not cycles, " ; ".join(" -> ".join(c) for c in cycles)


def test_rooms_depend_only_on_earlier_rooms():
    wrong = []
    for name in MODULES:
        room = _room(name)
        if room == "heat2d":
            continue
        for target in GRAPH[name]:
            other = _room(target)
            if other != room and other not in ROOMS[room]:
                wrong.append(f"{name} imports {target}")
    assert not wrong


def test_the_package_root_is_imported_by_no_room():
    # The root is the public facade; a room importing it would reach back over the layers.
    assert [n for n in MODULES if "heat2d" in GRAPH[n]] == []


def test_no_private_name_crosses_rooms():
    crossing = []
    for name in MODULES:
        for target, names, line in _imports(name):
            if _room(target) == _room(name) or target not in MODULES:
                continue
            private = [n for n in names if n.startswith("_") and not n.startswith("__")]
            private += [p for p in target.split(".") if p.startswith("_") and p != "__main__"]
            if private:
                crossing.append(f"{name}:{line} takes {private} from {target}")
    assert not crossing


def _calls(name: str) -> list[str]:
    tree = ast.parse(MODULES[name].read_text(encoding="utf-8"))
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            text = ast.unparse(node.func)
            if text in ("print", "sys.exit", "exit", "input", "argparse.ArgumentParser"):
                out.append(f"{text} at line {node.lineno}")
    return out


@pytest.mark.parametrize("name", sorted(n for n in MODULES
                                        if _room(n) not in ("cli", "__main__")))
def test_only_the_command_line_prints_exits_or_parses_arguments(name):
    assert _calls(name) == []


def test_the_rules_see_real_imports():
    # Guard against a reader that finds nothing: known edges of the pipeline must be there.
    assert "heat2d.fem.mesh" in GRAPH["heat2d.fem.assembly"]
    assert "heat2d.model.expr" in {t for t, _, _ in _imports("heat2d.model.reader")} | \
        {t for n in MODULES if n.startswith("heat2d.model.") for t in GRAPH[n]}
    assert "heat2d.post.writers" in {t for n in MODULES if n.startswith("heat2d.cli")
                                     for t in GRAPH[n]}
    assert any(_calls(n) for n in MODULES if _room(n) == "cli")
