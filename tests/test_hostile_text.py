"""Hostile names in every file the tool writes: spreadsheet formulas, XML markup, quotes.

No physics here and no outside source beyond the rule being kept: a text cell that begins with
``=``, ``+``, ``-``, ``@``, a tab or a carriage return is prefixed with an apostrophe (common
practice, no published standard: the OWASP "CSV injection" advice); numbers stay numbers.
"""

import csv
import io
import json
import pathlib
import xml.etree.ElementTree as ET

import pytest

from mwreach.coverage import cli
from mwreach.coverage.safefiles import csv_cell

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"

HOSTILE = {  # demo neighbour → a name a spreadsheet would run
    "Varnholt Radio": '=HYPERLINK("http://x","y")',
    "Sennick Coast AM": "@SUM(A1)",
    "Ambermoor Sound": "+cmd|' /C calc'!A0",
    "Lowrie Fen Radio": "-2+3",
    "Kestrel Point Radio": 'Kestrel <Point> & "Co" </name>',
}
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def test_csv_cell_rule():
    assert csv_cell("=1+1") == "'=1+1"
    assert csv_cell("@SUM(A1)") == "'@SUM(A1)"
    assert csv_cell("\tx") == "'\tx" and csv_cell("\rx") == "'\rx"
    assert csv_cell("-2+3") == "'-2+3" and csv_cell("+x") == "'+x"
    # numbers stay numbers, whether written as text or not
    assert csv_cell("-46.20000") == "-46.20000" and csv_cell("+1e3") == "+1e3"
    assert csv_cell(-3) == -3 and csv_cell("Radio") == "Radio" and csv_cell("") == ""


def _hostile_demo(folder: pathlib.Path) -> pathlib.Path:
    for f in DEMO.parent.iterdir():
        if f.suffix in (".geojson", ".csv", ".toml"):
            (folder / f.name).write_bytes(f.read_bytes())
    study = (folder / "quellmoor.toml").read_text(encoding="utf-8")
    rows = (folder / "neighbours.csv").read_text(encoding="utf-8")
    for old, new in HOSTILE.items():
        quoted = json.dumps(new)  # a TOML basic string is a JSON string for these characters
        study = study.replace(f'name = "{old}"', f"name = {quoted}")
        cell = '"' + new.replace('"', '""') + '"'
        rows = rows.replace(old + ",", cell + ",")
    study = study.replace('name = "Radio Quellmoor"', 'name = "=cmd()"')
    study = study.replace('title = "Radio Quellmoor', 'title = "<b>&amp; Radio Quellmoor')
    (folder / "quellmoor.toml").write_text(study, encoding="utf-8")
    (folder / "neighbours.csv").write_text(rows, encoding="utf-8")
    meas = (folder / "measurements.csv").read_text(encoding="utf-8")
    meas = meas.replace(",south,", ",=south(),").replace("beside a parked truck", "@truck")
    (folder / "measurements.csv").write_text(meas, encoding="utf-8")
    return folder / "quellmoor.toml"


def _text_cells(path: pathlib.Path):
    with path.open(newline="", encoding="utf-8") as fh:
        for row in csv.reader(fh):
            for cell in row:
                yield cell


def _assert_no_formula(path: pathlib.Path, expect_some: tuple[str, ...]) -> None:
    cells = list(_text_cells(path))
    for cell in cells:
        if cell.startswith(FORMULA_START):
            float(cell)  # only a number may start so; anything else fails here
    for name in expect_some:  # the hostile names are there, escaped, not dropped
        assert "'" + name in cells, (name, path.name)


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile")
    study = _hostile_demo(folder)
    out = folder / "out"
    assert cli.main(["run", str(study), "-o", str(out)]) == 0
    return study, out


def test_run_csvs_escape_formulas(hostile):
    study, out = hostile
    csvs = sorted(out.glob("*.csv"))
    assert {p.name for p in csvs} == {"radials.csv", "interference.csv", "patterns.csv"}
    _assert_no_formula(out / "interference.csv",
                       (HOSTILE["Varnholt Radio"], HOSTILE["Lowrie Fen Radio"]))
    _assert_no_formula(out / "radials.csv", ())
    _assert_no_formula(out / "patterns.csv", ())


def test_kml_and_geojson_carry_hostile_names_intact(hostile):
    study, out = hostile
    root = ET.parse(out / "contours.kml").getroot()  # well-formed XML despite < > & "
    ns = {"k": "http://www.opengis.net/kml/2.2"}
    assert root.find("k:Document/k:name", ns).text.startswith("<b>&amp; Radio Quellmoor")
    gj = json.loads((out / "contours.geojson").read_text(encoding="utf-8"))
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["station"]["name"] == "=cmd()"  # JSON keeps text as text, unescaped
    assert gj["type"] == "FeatureCollection"


@pytest.mark.gui
def test_search_and_fit_csvs_escape_formulas(hostile, tmp_path):
    study, _ = hostile
    out = tmp_path / "search"
    assert cli.main(["search", str(study), "--radius-km", "10", "--step-km", "6", "-o", str(out),
                     "--workers", "1"]) == 0
    limited = {row["night_limited_by"] for row in
               csv.DictReader(io.StringIO((out / "candidates.csv").read_text(encoding="utf-8")))}
    assert any(v.startswith("'=HYPERLINK") for v in limited), limited  # the hostile one limits
    _assert_no_formula(out / "candidates.csv", ())
    fit = tmp_path / "fit"
    assert cli.main(["fit", str(study), str(study.parent / "measurements.csv"),
                     "-o", str(fit)]) == 0
    _assert_no_formula(fit / "fit.csv", ("=south()", "@truck"))


@pytest.mark.parametrize("name", ["a\x00b", "tab\there", "bell\x07", "x" * 201])
def test_control_characters_and_overlong_names_are_refused(tmp_path, name):
    study = _hostile_demo(tmp_path)
    text = study.read_text(encoding="utf-8").replace('name = "=cmd()"',
                                                    f"name = {json.dumps(name)}")
    study.write_text(text, encoding="utf-8")
    err = io.StringIO()
    import contextlib

    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        assert cli.main(["run", str(study), "-o", str(tmp_path / "o")]) == 2
    assert err.getvalue().count("\n") == 1 and "name" in err.getvalue()
    assert not (tmp_path / "o").exists()
