"""The core's layers: no import cycle anywhere in coverage/, and the core never imports Qt."""

import ast
import pathlib

import pytest

CORE = pathlib.Path(__file__).parents[1] / "coverage"


def _module_name(path: pathlib.Path) -> str:
    rel = path.relative_to(CORE).with_suffix("")
    parts = [p for p in rel.parts if p != "__init__"]
    return ".".join(["coverage", *parts])


def _resolve(current: str, is_package: bool, level: int, module: str | None) -> str:
    base = current.split(".") if is_package else current.split(".")[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join(base + ([module] if module else []))


def import_graph() -> dict[str, set[str]]:
    """Every module of coverage/ → the coverage modules it imports, at any depth of the code
    (imports inside functions count: a cycle there is still a cycle)."""
    files = sorted(CORE.rglob("*.py"))
    names = {_module_name(f) for f in files}
    graph = {}
    for f in files:
        me = _module_name(f)
        deps = set()
        for node in ast.walk(ast.parse(f.read_text())):
            if isinstance(node, ast.ImportFrom) and node.level:
                target = _resolve(me, f.name == "__init__.py", node.level, node.module)
                for a in node.names:  # "from . import x" may name a submodule
                    sub = f"{target}.{a.name}"
                    deps.add(sub if sub in names else target)
        graph[me] = {d for d in deps if d in names and d != me}
    return graph


def test_no_import_cycle_in_the_core():
    graph = import_graph()
    assert "coverage.interference.checks" in graph and "coverage.spec" in graph
    state, stack = {}, []

    def visit(m):
        state[m] = "open"
        stack.append(m)
        for d in sorted(graph[m]):
            # a package's __init__ importing its own submodules is how a package is built
            if d.startswith(m + "."):
                continue
            if state.get(d) == "open":
                cycle = stack[stack.index(d):] + [d]
                pytest.fail("import cycle: " + " → ".join(cycle))
            if d not in state:
                visit(d)
        stack.pop()
        state[m] = "done"

    for m in sorted(graph):
        if m not in state:
            visit(m)


def test_the_core_never_imports_qt_and_modules_stay_readable():
    for f in CORE.rglob("*.py"):
        text = f.read_text()
        assert "PySide6" not in text and "pyqtgraph" not in text, f
    # one mechanism per module in the interference package, each under about 400 lines
    for f in (CORE / "interference").glob("*.py"):
        assert len(f.read_text().splitlines()) <= 420, f
