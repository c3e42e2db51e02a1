"""The package's folders follow the pipeline, and imports only go down it.

circuits → network → plan → execution → queries → cli: a module may import
modules of its own stage or of a stage before it, never of a later one, and
no group of modules imports itself in a circle (imports inside functions
count: a deferred import still ties the layers together).
"""

from __future__ import annotations

import ast
import pathlib

import pytest

PACKAGE = pathlib.Path(__file__).resolve().parent.parent / "tnsim"

#: Rank of each stage; a module may import modules of equal or lower rank.
STAGES = {
    "errors": 0,
    "fileio": 0,
    "fitted": 0,
    "units": 0,
    "validate": 0,
    "version": 0,
    "circuits": 1,
    "network": 2,
    "plan": 3,
    "execution": 4,
    "queries": 5,
    "cli": 6,
    "service": 6,
    "testing": 7,
    "__init__": 7,
    "__main__": 7,
}


def module_name(path: pathlib.Path, root: pathlib.Path = PACKAGE) -> str:
    """Dotted name of a module file under the package folder ``root``."""
    parts = list(path.relative_to(root.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def stage_of(module: str) -> int:
    """Rank of the stage a dotted module name belongs to."""
    parts = module.split(".")
    return STAGES["__init__"] if len(parts) == 1 else STAGES[parts[1]]


def imports_of(path: pathlib.Path, modules: set[str], root: pathlib.Path = PACKAGE) -> set[str]:
    """tnsim modules imported anywhere in a file (function bodies included)."""
    name = module_name(path, root)
    package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            subs = {f"{target}.{a.name}" for a in node.names} & modules
            found |= subs
            if len(subs) < len(node.names) and target in modules:
                found.add(target)
        elif isinstance(node, ast.Import):
            found |= {a.name for a in node.names if a.name in modules}
    return found - {name}


def import_graph(root: pathlib.Path = PACKAGE) -> dict[str, set[str]]:
    """Map every module of the package to the package modules it imports."""
    files = sorted(root.rglob("*.py"))
    modules = {module_name(p, root) for p in files}
    return {module_name(p, root): imports_of(p, modules, root) for p in files}


def upward_imports(graph: dict[str, set[str]]) -> list[str]:
    """Imports that go from a stage to a later one (``'a -> b'`` each)."""
    out = []
    for mod, deps in graph.items():
        for dep in deps:
            if stage_of(dep) > stage_of(mod) and not mod.startswith(dep + "."):
                out.append(f"{mod} -> {dep}")
    return sorted(out)


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected groups of more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                out.append(sorted(group))

    for v in graph:
        if v not in index:
            visit(v)
    return out


def test_every_module_belongs_to_a_stage():
    for mod in import_graph():
        assert stage_of(mod) >= 0


def test_imports_only_go_down_the_pipeline():
    assert upward_imports(import_graph()) == []


def test_no_import_cycles():
    # a package's __init__ importing its own submodules is not a cycle worth naming
    graph = {
        m: {d for d in deps if not d.startswith(m + ".")} for m, deps in import_graph().items()
    }
    assert cycles(graph) == []


def test_check_catches_an_upward_import(tmp_path):
    """A planner module that imports a query module is reported."""
    root = tmp_path / "tnsim"
    (root / "plan").mkdir(parents=True)
    (root / "queries").mkdir()
    for d in (root, root / "plan", root / "queries"):
        (d / "__init__.py").write_text("")
    (root / "queries" / "amplitudes.py").write_text("X = 1\n")
    (root / "plan" / "driver.py").write_text(
        "def f():\n    from tnsim.queries.amplitudes import X\n    return X\n"
    )
    graph = import_graph(root)
    assert upward_imports(graph) == ["tnsim.plan.driver -> tnsim.queries.amplitudes"]


def test_check_catches_a_cycle(tmp_path):
    root = tmp_path / "tnsim"
    (root / "network").mkdir(parents=True)
    (root / "__init__.py").write_text("")
    (root / "network" / "__init__.py").write_text("")
    (root / "network" / "a.py").write_text("from tnsim.network import b\n")
    (root / "network" / "b.py").write_text("from tnsim.network.a import x\n")
    assert cycles(import_graph(root)) == [["tnsim.network.a", "tnsim.network.b"]]


@pytest.mark.parametrize("name", ["circuits", "network", "plan", "execution", "queries", "cli"])
def test_stage_folders_exist(name):
    assert (PACKAGE / name / "__init__.py").is_file()
