"""docs/methods.md stays true: its constants table equals the code, it covers every module of
coverage/, and nothing in the repository cites a methods file outside it."""

import importlib
import pathlib
import re

import pytest

ROOT = pathlib.Path(__file__).parents[1]
DOC = ROOT / "docs" / "methods.md"


def _constant_rows():
    text = DOC.read_text(encoding="utf-8")
    block = text.split("<!-- constants:begin -->")[1].split("<!-- constants:end -->")[0]
    rows = []
    for line in block.strip().splitlines()[2:]:  # skip header and rule
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        rows.append(cells)
    return rows


def _resolve(expr: str):
    module, _, rest = expr.partition(".")
    ns = {module: importlib.import_module(f"mwreach.coverage.{module}")}
    return eval(expr, {"__builtins__": {}}, ns)  # the doc's own table, not user input


ROWS = _constant_rows()


def test_the_table_is_there_and_tagged():
    assert len(ROWS) >= 40
    for name, value, code, tag in ROWS:
        assert tag in ("pub", "lib", "calc", "mem"), name


@pytest.mark.parametrize("name, value, code, tag", ROWS, ids=[r[0] for r in ROWS])
def test_code_constant_equals_the_documented_value(name, value, code, tag):
    got = _resolve(code)
    assert float(got) == pytest.approx(float(value), rel=1e-12, abs=0.0), (name, code)


def test_every_module_of_the_core_is_covered():
    text = DOC.read_text(encoding="utf-8")
    for f in sorted((ROOT / "coverage").rglob("*.py")):
        if f.name != "__init__.py":
            assert f.name in text, f"docs/methods.md does not mention {f.relative_to(ROOT)}"


def test_nothing_cites_a_methods_file_outside_the_repository():
    bad = re.compile(r"shared/methods\.md|\.\./shared|(?<![\w/])methods\.md §")
    hits = []
    for folder in ("coverage", "gui", "tests", "benchmarks", "data"):
        for f in (ROOT / folder).rglob("*"):
            if f.suffix in (".py", ".md", ".toml") and f.is_file():
                for i, line in enumerate(f.read_text(encoding="utf-8").splitlines(), 1):
                    if bad.search(line) and f.name != "test_methods_doc.py":
                        hits.append(f"{f.relative_to(ROOT)}:{i}")
    for f in ("README.md", "DEVELOPERS.md"):
        for i, line in enumerate((ROOT / f).read_text(encoding="utf-8").splitlines(), 1):
            if bad.search(line):
                hits.append(f"{f}:{i}")
    assert hits == []
