"""Bad and unusual input: one clear line, exit status 2, and nothing the user gave is lost.

Every check here is about the tool's handling of input and files, not about physics, so no
outside source is involved; the expected texts are the tool's own messages.
"""

import contextlib
import errno
import hashlib
import io
import json
import os
import pathlib
import shutil
import subprocess
import sys

import pytest

from mwreach.coverage import cli, safefiles
from mwreach.coverage.inputs import load_study, read_neighbours_csv

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
DEMO_TEXT = DEMO.read_text(encoding="utf-8")


def run_cli(*argv):
    """(exit status, stdout, stderr) of one CLI call in this process."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            rc = cli.main([str(a) for a in argv])
        except SystemExit as exc:  # argparse errors
            rc = exc.code
    return rc, out.getvalue(), err.getvalue()


def one_line_error(err: str, *needles):
    """The error is exactly one line and holds every needle."""
    assert err.count("\n") == 1 and "Traceback" not in err, err
    for n in needles:
        assert n in err, (n, err)


def digest(folder: pathlib.Path) -> dict:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def small_study(folder: pathlib.Path, **replace) -> pathlib.Path:
    """The demo without night work, 10° radials and a short range: fast to run."""
    text = DEMO_TEXT
    text = text[: text.index("[night]")]
    text = text.replace("bearing_step_deg = 1.0", "bearing_step_deg = 10.0")
    text = text.replace("step_km = 0.25", "step_km = 1.0\nmax_km = 60")
    for a, b in replace.items():
        assert a in text, a
        text = text.replace(a, b)
    f = folder / "study.toml"
    f.write_text(text, encoding="utf-8")
    return f


# --- data loss --------------------------------------------------------------------------------

def test_out_equal_to_study_folder_never_touches_inputs(demo_copy):
    study = small_study(demo_copy)
    # an input whose name is also an output: the run must refuse before writing anything
    shutil.copy(demo_copy / "zones.geojson", demo_copy / "contours.geojson")
    study.write_text(study.read_text().replace('zones = "zones.geojson"',
                                               'zones = "contours.geojson"'))
    before = digest(demo_copy)
    rc, _, err = run_cli("run", study, "--out", demo_copy)
    assert rc == 2
    one_line_error(err, "refusing to write", "contours.geojson", "reads that file")
    assert digest(demo_copy) == before


def test_out_equal_to_study_folder_without_clash_keeps_inputs_byte_for_byte(demo_copy):
    study = small_study(demo_copy)
    before = digest(demo_copy)
    rc, _, _ = run_cli("run", study, "-o", demo_copy)
    assert rc == 0
    after = digest(demo_copy)
    assert {k: v for k, v in after.items() if k in before} == before
    assert {"summary.json", "radials.csv", "contours.geojson"} <= set(after)


def test_failure_inside_the_writer_keeps_the_old_set(demo_copy, monkeypatch):
    study = small_study(demo_copy)
    out = demo_copy / "out"
    assert run_cli("run", study, "--out", out)[0] == 0
    os.chmod(out / "radials.csv", 0o640)
    old = digest(out)
    calls = {"n": 0}
    real = safefiles._write_bytes

    def disk_full_on_third(path, data, mode):
        calls["n"] += 1
        if calls["n"] == 3:
            raise OSError(errno.ENOSPC, "No space left on device", str(path))
        real(path, data, mode)

    monkeypatch.setattr(safefiles, "_write_bytes", disk_full_on_third)
    rc, _, err = run_cli("run", study.parent / "study.toml", "--out", out)
    assert rc == 2
    one_line_error(err, "outputs not written, the previous ones are kept", "No space left")
    assert digest(out) == old
    leftovers = [p.name for p in demo_copy.iterdir() if p.name.startswith(safefiles.TMP_PREFIX)]
    assert leftovers == [] and not any(p.name.startswith(".") for p in out.iterdir())
    monkeypatch.setattr(safefiles, "_write_bytes", real)
    # a failure in the middle of the swap itself rolls back too
    real_replace = os.replace
    moved = {"n": 0}

    def fail_on_second_new_file(src, dst):
        if ".new." in str(src):
            moved["n"] += 1
            if moved["n"] == 2:
                raise OSError(errno.EIO, "Input/output error", str(dst))
        real_replace(src, dst)

    monkeypatch.setattr(safefiles.os, "replace", fail_on_second_new_file)
    assert run_cli("run", study, "--out", out)[0] == 2
    assert digest(out) == old
    monkeypatch.setattr(safefiles.os, "replace", real_replace)
    # the next good run keeps the file's permissions
    assert run_cli("run", study, "--out", out)[0] == 0
    assert (os.stat(out / "radials.csv").st_mode & 0o777) == 0o640


def test_interrupt_keeps_the_old_set(demo_copy, monkeypatch):
    study = small_study(demo_copy)
    out = demo_copy / "out"
    assert run_cli("run", study, "--out", out)[0] == 0
    old = digest(out)

    def interrupted(path, data, mode):
        raise KeyboardInterrupt

    monkeypatch.setattr(safefiles, "_write_bytes", interrupted)
    rc, _, err = run_cli("run", study, "--out", out)
    assert rc == 130 and "nothing was replaced" in err
    assert digest(out) == old


def test_outputs_of_an_earlier_run_do_not_linger(demo_copy):
    out = demo_copy / "out"
    full = demo_copy / "full.toml"
    full.write_text(DEMO_TEXT.replace("bearing_step_deg = 1.0", "bearing_step_deg = 15.0"))
    assert run_cli("run", full, "--out", out)[0] == 0
    assert (out / "night.json").exists()
    assert run_cli("run", small_study(demo_copy), "--out", out)[0] == 0
    assert not (out / "night.json").exists() and not (out / "interference.csv").exists()


@pytest.mark.parametrize("kind", ["file", "under-file"])
def test_out_that_is_not_a_folder(demo_copy, kind):
    study = small_study(demo_copy)
    blocker = demo_copy / "afile"
    blocker.write_text("keep me")
    target = blocker if kind == "file" else blocker / "sub"
    rc, _, err = run_cli("run", study, "--out", target)
    assert rc == 2
    one_line_error(err, "afile")
    assert blocker.read_text() == "keep me"


# --- silent wrong input -----------------------------------------------------------------------

@pytest.mark.parametrize(
    "old, new, needle",
    [
        ("lat = 38.40", "lat = true", "lat must be a number (got true) in [station]"),
        ("power_day_kw = 1.0", "power_day_kw = true", "power_day_kw must be a number (got true)"),
        ("freq_khz = 1390", 'freq_khz = "1390"',
         "freq_khz must be a number (got '1390': write it without quotes) in [station]"),
        ("lat = 38.40", "lat = 1979-05-27", "lat must be a number (got the date/time 1979-05-27)"),
        ('name = "Radio Quellmoor"', "name = 5", "name must be text in quotes (got 5)"),
        ('title = "Radio', 'title = 1979-05-27\nx = "Radio', "unknown key 'x'"),
        ('label = "5 mV/m community"', "label = true", "label must be text in quotes (got true)"),
        ("percent = 10 ", "percent = true ", "percent must be one of 10, 50 (got true)"),
        ("exclusion_percent = 50", "exclusion_percent = false",
         "exclusion_percent must be one of 0, 25, 50 (got false)"),
        ('class = "B"', 'class = "B"\nprotected_day_mv_m = 0',
         "protected_day_mv_m must be >= 0.01 and <= 100 (got 0) in [[neighbour]] 1"),
        ('class = "B"', 'class = "B"\nprotected_night_mv_m = 0',
         "protected_night_mv_m must be >= 0.01"),
        ('class = "B"', 'class = "Q"', "class must be one of 'A', 'B', 'C', 'D' (got 'Q')"),
        ('zones = "zones.geojson"', "zones = 5", "zones must be a file name in quotes (got 5)"),
        ('boundary = "community.geojson"', 'boundary = ["community.geojson"]',
         "boundary must be a file name in quotes"),
        ('zones = "zones.geojson"', 'zones = "."', "is a folder; expected a zones file"),
    ],
)
def test_wrong_types_are_refused_with_key_section_and_file(demo_copy, old, new, needle):
    f = demo_copy / "bad.toml"
    assert old in DEMO_TEXT
    f.write_text(DEMO_TEXT.replace(old, new, 1))
    with pytest.raises(ValueError) as exc:
        load_study(f)
    msg = str(exc.value)
    assert needle in msg and "\n" not in msg
    assert "bad.toml" in msg


def test_zone_with_boolean_conductivity_is_refused(demo_copy):
    z = json.loads((demo_copy / "zones.geojson").read_text())
    z["features"][0]["properties"]["conductivity_ms_m"] = True
    (demo_copy / "zones.geojson").write_text(json.dumps(z))
    with pytest.raises(ValueError, match=r"conductivity_ms_m must be a number \(got true\) in "
                                         r"properties of feature 1 of .*zones.geojson"):
        load_study(small_study(demo_copy))


def test_csv_numbers_and_zero_protection(tmp_path):
    f = tmp_path / "n.csv"
    f.write_text("name,lat,lon,freq_khz,power_day_kw,height_deg,protected_day_mv_m\n"
                 "X,40,0,1390,1,90,0\n")
    with pytest.raises(ValueError, match=r"protected_day_mv_m must be >= 0.01 .* line 2 of"):
        read_neighbours_csv(f)


def test_daytime_only_neighbour_and_station_run(demo_copy):
    # night power 0: the station (or neighbour) does not operate at night
    text = DEMO_TEXT.replace("bearing_step_deg = 1.0", "bearing_step_deg = 15.0")
    f = demo_copy / "day.toml"
    f.write_text(text.replace("power_night_kw = 2.5", "power_night_kw = 0"))
    rc, out, err = run_cli("run", f, "--out", demo_copy / "o1")
    assert rc == 0, err
    assert "Varnholt Radio has no night power (daytime only): no night checks" in out
    f.write_text(text.replace("power_night_kw = 0.5\n", "power_night_kw = 0\n"))
    rc, out, err = run_cli("run", f, "--out", demo_copy / "o2")
    assert rc == 0, err
    assert "has no night power (daytime only): no night service contour" in out
    night = json.loads((demo_copy / "o2" / "night.json").read_text())
    assert night["bearings"] == [] and night["power_night_kw"] == 0.0


@pytest.mark.parametrize(
    "argv, needle",
    [
        (["sky", "--freq-khz", "1000", "--from", "40", "400", "--to", "41", "-90"],
         "--from LON must be >= -180 and <= 360 (got 400.0)"),
        (["sky", "--freq-khz", "0", "--from", "40", "-90", "--to", "41", "-90"],
         "--freq-khz must be >= 535 and <= 1705 (got 0.0)"),
        (["sky", "--freq-khz", "nan", "--from", "40", "-90", "--to", "41", "-90"],
         "--freq-khz must be a finite number"),
        (["sky", "--freq-khz", "30000", "--from", "40", "-90", "--to", "45", "-90"],
         "--freq-khz must be >= 535 and <= 1705"),
        (["sky", "--freq-khz", "1000", "--from", "95", "-90", "--to", "41", "-90"],
         "--from LAT must be >= -90 and <= 90 (got 95.0)"),
        (["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "41", "-90",
          "--height-km", "5"], "--height-km must be >= 50"),
        (["antenna", "--freq-khz", "-5", "--height-deg", "90"],
         "--freq-khz must be >= 10 and <= 30000 (got -5.0)"),
        (["antenna", "--freq-khz", "1000", "--height-deg", "90", "--power-kw", "0"],
         "--power-kw must be > 0"),
        (["antenna", "--freq-khz", "1000", "--height-deg", "90", "--efficiency", "1.5"],
         "--efficiency must be > 0 and <= 1"),
        # one wavelength at 1000 kHz is c/f = 0.299792 km: the method's shortest distance
        (["field", "--freq-khz", "1000", "--ground", "land", "--km", "-3"],
         "--km must be >= 0.299792 and <= 9006.8 (got -3.0)"),
        (["field", "--freq-khz", "1000", "--ground", "land", "--km", "20000"],
         "--km must be >= 0.299792 and <= 9006.8 (got 20000.0)"),
        (["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "45", "-80",
          "--hops", "100000000"], "--hops must be 1–20 (got 100000000)"),
        (["field", "--freq-khz", "1000", "--ground", "LAND", "--km", "3", "--earth-k", "0"],
         "--earth-k must be >= 0.5"),
        (["field", "--freq-khz", "1000", "--km", "3"], "--ground NAME or both --sigma-ms-m"),
        (["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "41", "-90",
          "--method", "guess"], "invalid choice 'guess' (choose from cfr, itu)"),
        (["run"], "the following arguments are required: study"),
    ],
)
def test_cli_refuses_bad_values_in_one_line(argv, needle):
    rc, out, err = run_cli(*argv)
    assert rc == 2
    one_line_error(err, needle)


def test_self_intersecting_zone_is_repaired_and_said(demo_copy):
    z = json.loads((demo_copy / "zones.geojson").read_text())
    bow = [[-46.0, 38.0], [-45.5, 38.5], [-45.5, 38.0], [-46.0, 38.5], [-46.0, 38.0]]
    z["features"].append({"type": "Feature", "properties": {"name": "bow tie",
                          "conductivity_ms_m": 2.0, "permittivity": 10.0},
                          "geometry": {"type": "Polygon", "coordinates": [bow]}})
    (demo_copy / "zones.geojson").write_text(json.dumps(z))
    rc, out, err = run_cli("run", small_study(demo_copy), "--out", demo_copy / "o")
    assert rc == 0, err
    assert "note: feature 6 of" in out and "Self-intersection" in out and "was repaired" in out
    summary = json.loads((demo_copy / "o" / "summary.json").read_text())
    assert any("was repaired" in n for n in summary["input_notes"])


@pytest.mark.parametrize(
    "geometry, needle",
    [
        ({"type": "Polygon", "coordinates": [[[0, 0], [1, 1], [2, 2], [0, 0]]]},
         "the polygon is empty (no area)"),
        ({"type": "Polygon", "coordinates": []}, "the polygon is empty"),
        ({"type": "Polygon", "coordinates": [[[0, 0], [1, float("nan")], [1, 1], [0, 0]]]},
         "coordinates must be finite numbers"),
        ({"type": "Point", "coordinates": [0, 0]}, "geometry must be a Polygon or MultiPolygon"),
        ({"type": "Polygon", "coordinates": [[["a", 0], [1, 0], [1, 1], ["a", 0]]]},
         "coordinates must be numbers (got 'a')"),
        ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1], [0, 0]]]},
         "malformed coordinates"),
    ],
)
def test_bad_boundaries_and_zones(demo_copy, geometry, needle):
    (demo_copy / "community.geojson").write_text(json.dumps(geometry))
    with pytest.raises(ValueError) as exc:
        load_study(small_study(demo_copy))
    assert needle in str(exc.value) and "community.geojson" in str(exc.value)
    z = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"conductivity_ms_m": 3, "permittivity": 10},
         "geometry": geometry}]}
    (demo_copy / "zones.geojson").write_text(json.dumps(z))
    with pytest.raises(ValueError) as exc:
        load_study(demo_copy / "study.toml")
    assert "feature 1 of" in str(exc.value) and "zones.geojson" in str(exc.value)


def test_night_and_interference_without_neighbours(demo_copy):
    text = DEMO_TEXT.replace('neighbours = "neighbours.csv"\n', "")
    text = text[: text.index("[[neighbour]]")].replace("bearing_step_deg = 1.0",
                                                       "bearing_step_deg = 15.0")
    f = demo_copy / "alone.toml"
    f.write_text(text)
    rc, out, err = run_cli("run", f, "--out", demo_copy / "o")
    assert rc == 0, err
    assert "no checks" in out
    night = json.loads((demo_copy / "o" / "night.json").read_text())
    # no interferer: a class B station's night limit is its class level everywhere, 2.5 mV/m
    # (47 CFR 73.182, from memory), not the [night] floor of 0.5 mV/m
    assert {round(b["night_limit_mv_m"], 6) for b in night["bearings"]} == {2.5}


# --- files from other programs ----------------------------------------------------------------

def test_byte_order_marks_are_accepted(demo_copy):
    bom = "\ufeff"
    for name in ("zones.geojson", "community.geojson", "neighbours.csv"):
        p = demo_copy / name
        p.write_text(bom + p.read_text(encoding="utf-8"), encoding="utf-8")
    f = demo_copy / "bom.toml"
    f.write_text(bom + DEMO_TEXT, encoding="utf-8")
    spec = load_study(f)
    assert len(spec.interference.neighbours) == 7 and spec.ground.zones


def test_semicolon_csv_gets_a_hint(tmp_path):
    f = tmp_path / "n.csv"
    f.write_text("name;lat;lon;freq_khz;power_day_kw;height_deg\nX;40;0;1390;1;90\n")
    with pytest.raises(ValueError, match="separated by semicolons; save the file with commas"):
        read_neighbours_csv(f)


def test_array_file_not_utf8_is_named(demo_copy):
    (demo_copy / "varnholt_array.toml").write_bytes(b"rotation_deg = 0\n# caf\xe9\n")
    with pytest.raises(ValueError, match=r"varnholt_array.toml: not UTF-8 text \(byte \d+\)"):
        load_study(_demo_in(demo_copy))


def _demo_in(folder):
    f = folder / "quellmoor.toml"
    f.write_text(DEMO_TEXT)
    return f


def test_folder_given_for_a_file(demo_copy):
    rc, _, err = run_cli("run", demo_copy, "--out", demo_copy / "o")
    assert rc == 2
    one_line_error(err, "is a folder; expected a study file")
    rc, _, err = run_cli("antenna", "--freq-khz", "1000", "--array", demo_copy)
    assert rc == 2
    one_line_error(err, "is a folder; expected an array file")


def test_neighbour_beyond_sky_wave_range_is_skipped_not_fatal(demo_copy):
    # an antipodal co-channel neighbour: no 47 CFR 73.190 path (0–4000 km) reaches it
    text = DEMO_TEXT.replace("bearing_step_deg = 1.0", "bearing_step_deg = 15.0")
    text += ('\n[[neighbour]]\nname = "Far Side"\nlat = -38.4\nlon = 133.8\nfreq_khz = 1390\n'
             'power_day_kw = 1\nheight_deg = 90\n')
    f = demo_copy / "far.toml"
    f.write_text(text)
    rc, out, err = run_cli("run", f, "--out", demo_copy / "o")
    assert rc == 0, err
    assert "Far Side: night caused skipped" in out
    night = json.loads((demo_copy / "o" / "night.json").read_text())
    assert {"neighbour": "Far Side", "check": "night received",
            "reason": "sky-wave path outside 0–4000 km"} in night["skipped"]


@pytest.mark.parametrize("lat, lon", [(89.9, -46.2), (38.4, 179.99), (38.4, -179.99),
                                      (-89.9, 10.0)])
def test_studies_at_the_poles_and_the_antimeridian_run(tmp_path, lat, lon):
    from helpers import homogeneous_study

    f = tmp_path / "edge.toml"
    f.write_text(homogeneous_study(lat, lon))
    rc, _, err = run_cli("run", f, "--out", tmp_path / "o")
    assert rc == 0, err


# --- batch use --------------------------------------------------------------------------------

@pytest.mark.gui
@pytest.mark.parametrize("study", ["missing.toml", "bad.toml"])
def test_screenshot_with_bad_study_exits_at_once(tmp_path, study):
    (tmp_path / "bad.toml").write_text("[station]\nlat = true\n")
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    p = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "gui",
                        str(tmp_path / study), "--screenshot", str(tmp_path / "x.png")],
                       capture_output=True, text=True, timeout=60, env=env)
    assert p.returncode == 2
    one_line_error(p.stderr, "mwreach gui: error:", study)
    assert not (tmp_path / "x.png").exists()


def test_cli_version_help_and_case():
    rc, out, _ = run_cli("--version")
    assert rc == 0 and out.startswith("mwreach ")
    with contextlib.redirect_stdout(io.StringIO()) as buf, pytest.raises(SystemExit):
        cli.main(["field", "--help"])
    assert "(default: 300.0)" in buf.getvalue()
    with contextlib.redirect_stdout(io.StringIO()) as buf, pytest.raises(SystemExit):
        cli.main(["run", "--help"])
    assert "-o OUT, --out OUT" in buf.getvalue() and "--fail-on-violation" in buf.getvalue()
    rc, out, err = run_cli("sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "45",
                           "-80", "--method", "ITU", "--json")
    assert rc == 0 and json.loads(out)["method"] == "itu"


def test_fail_on_violation_exit_status(demo_copy):
    # the demo fails its third-adjacent day overlap (Kestrel Point Radio) at 1 kW by day
    f = demo_copy / "quick.toml"
    f.write_text(DEMO_TEXT.replace("bearing_step_deg = 1.0", "bearing_step_deg = 15.0"))
    rc, out, err = run_cli("run", f, "--out", demo_copy / "o")
    assert rc == 0 and "FAILS" in out
    rc, out, err = run_cli("run", f, "--out", demo_copy / "o", "--fail-on-violation")
    assert rc == 3 and "protection check(s) fail" in err
    rc, out, err = run_cli("run", small_study(demo_copy), "--out", demo_copy / "o2",
                           "--fail-on-violation")
    assert rc == 0


# --- fuzzing the one reader -------------------------------------------------------------------

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from mwreach.coverage.inputs import load_zones, parse_study, read_toml  # noqa: E402
from mwreach.coverage.ground import ground_class  # noqa: E402

_FUZZ = settings(max_examples=150, deadline=None,
                 suppress_health_check=[HealthCheck.function_scoped_fixture])
_scalars = st.one_of(st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True),
                     st.text(max_size=12), st.dates(), st.datetimes(), st.times())
_values = st.recursive(_scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=8), inner, max_size=3)),
    max_leaves=6)
_json = st.recursive(st.one_of(st.none(), st.booleans(), st.floats(allow_nan=False),
                               st.integers(), st.text(max_size=8)),
                     lambda inner: st.one_of(st.lists(inner, max_size=4),
                                             st.dictionaries(st.text(max_size=12), inner,
                                                             max_size=4)),
                     max_leaves=12)


def _valid_or_one_line(call):
    try:
        return call()
    except ValueError as exc:
        assert str(exc) and "\n" not in str(exc), repr(str(exc))
        return None


@_FUZZ
@given(data=st.binary(max_size=400))
def test_fuzz_random_bytes_as_study(tmp_path, data):
    f = tmp_path / "fuzz.toml"
    f.write_bytes(data)
    _valid_or_one_line(lambda: load_study(f))


@_FUZZ
@given(choice=st.data(), value=_values)
def test_fuzz_random_toml_values(demo_copy, choice, value):
    doc = read_toml(_demo_in(demo_copy))
    section = choice.draw(st.sampled_from(sorted(doc)))
    table = doc[section]
    if isinstance(table, list):
        table = table[0]
    key = choice.draw(st.sampled_from(sorted(table) + ["unknown_key"]))
    table[key] = value
    _valid_or_one_line(lambda: parse_study(doc, demo_copy / "quellmoor.toml"))


@_FUZZ
@given(geo=st.one_of(_json, st.builds(
    lambda feats: {"type": "FeatureCollection", "features": feats},
    st.lists(st.fixed_dictionaries({"type": st.just("Feature"), "properties": _json,
                                    "geometry": _json}), max_size=3))))
def test_fuzz_random_geojson_as_zones(tmp_path, geo):
    import json as _j

    f = tmp_path / "z.geojson"
    f.write_text(_j.dumps(geo))
    _valid_or_one_line(lambda: load_zones(f, ground_class("land")))


# --- values too large, files with nothing in them, what --help loads ---------------------------

@pytest.mark.parametrize("old, new, needle", [
    ("layer_height_km = 100.0", "layer_height_km = 1" + "0" * 400,
     "layer_height_km must be a finite number (got an integer of 401 digits) in [night]"),
    ("bearings = [137.5]", "bearings = [1" + "0" * 310 + "]", "bearings must be a finite number"),
    ("field_mv_m = 5.0", "field_mv_m = -1" + "0" * 400, "field_mv_m must be a finite number"),
    ("freq_khz = 1390\npower_day_kw", "freq_khz = 1" + "0" * 300 + "\npower_day_kw",
     "freq_khz must be >= 10 and <= 30000 (got an integer of 301 digits)"),
    ("percent = 10 ", "percent = 1" + "0" * 400 + " ", "percent must be one of 10, 50"),
    ("layer_height_km = 100.0", "layer_height_km = 1" + "0" * 5001,
     "a number with more digits than any value needs"),
])
def test_integers_too_large_for_a_float_are_bad_values(demo_copy, old, new, needle):
    assert old in DEMO_TEXT
    f = demo_copy / "big.toml"
    f.write_text(DEMO_TEXT.replace(old, new, 1), encoding="utf-8")
    before = digest(demo_copy)
    rc, out, err = run_cli("run", f, "-o", demo_copy / "out")
    assert rc == 2
    one_line_error(err, needle, str(f))
    assert len(err) < 400  # the value is described, not printed in full
    assert digest(demo_copy) == before


def test_geojson_coordinates_must_be_numbers(demo_copy):
    zones = json.loads((demo_copy / "zones.geojson").read_text())
    ring = zones["features"][0]["geometry"]["coordinates"][0]
    ring[1] = [str(ring[1][0]), str(ring[1][1])]
    (demo_copy / "zones.geojson").write_text(json.dumps(zones))
    (demo_copy / "s.toml").write_text(DEMO_TEXT, encoding="utf-8")
    rc, out, err = run_cli("run", demo_copy / "s.toml", "-o", demo_copy / "out")
    assert rc == 2
    one_line_error(err, "feature 1 of", "coordinates must be numbers (got '")


def test_empty_zones_and_header_only_neighbours_are_said(demo_copy):
    (demo_copy / "zones.geojson").write_text('{"type": "FeatureCollection", "features": []}')
    head = (demo_copy / "neighbours.csv").read_text().splitlines()[0]
    (demo_copy / "neighbours.csv").write_text(head + "\n")
    (demo_copy / "s.toml").write_text(DEMO_TEXT, encoding="utf-8")
    spec = load_study(demo_copy / "s.toml")
    notes = " | ".join(spec.input_notes)
    assert "zones.geojson: the zones file holds no feature" in notes, notes
    assert "neighbours.csv: the neighbours file lists no station" in notes, notes
    assert [n.name for n in spec.interference.neighbours] == ["Varnholt Radio"]


@pytest.mark.parametrize("rows, needle", [
    ([], "no readings"),
    ([1, 2], "0 reading(s) beyond the near field"),  # both inside the near field
    ([1, 12], "1 reading(s) beyond the near field"),
])
def test_measurements_with_too_few_usable_rows(demo_copy, tmp_path, rows, needle):
    lines = (DEMO.parent / "measurements.csv").read_text().splitlines()
    m = demo_copy / "few.csv"
    m.write_text("\n".join([lines[0]] + [lines[i] for i in rows]) + "\n")
    (demo_copy / "s.toml").write_text(DEMO_TEXT, encoding="utf-8")
    rc, out, err = run_cli("fit", demo_copy / "s.toml", m, "-o", tmp_path / "fit")
    assert rc == 2
    one_line_error(err, f"{m}", needle)
    assert not (tmp_path / "fit").exists() or not any((tmp_path / "fit").iterdir())


def test_help_and_version_load_no_heavy_module():
    # `mwreach --help` should cost little more than Python with numpy (the time itself is a
    # benchmark: benchmarks/bench_cli.py); what it imports is the behaviour tested here
    code = ("import sys; from mwreach.coverage import cli\n"
            "for argv in (['--help'], ['--version'], ['run', '--help'], ['search', '--help']):\n"
            "    try:\n        cli.main(argv)\n    except SystemExit:\n        pass\n"
            "heavy = sorted(m for m in ('scipy', 'shapely', 'pyproj', 'PySide6', 'contourpy', "
            "'distributed') if m in sys.modules)\n"
            "print('HEAVY', heavy)")
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert p.returncode == 0, p.stderr
    assert "HEAVY []" in p.stdout, p.stdout[-300:]


# --- outputs aimed at inputs, empty names, devices ---------------------------------------------

@pytest.mark.parametrize("target", ["quellmoor.toml", "zones.geojson", "neighbours.csv"])
def test_screenshot_onto_an_input_is_refused_before_any_window(demo_copy, target):
    study = demo_copy / "quellmoor.toml"
    study.write_text(DEMO_TEXT, encoding="utf-8")
    before = digest(demo_copy)
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    p = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "gui", str(study),
                        "--screenshot", str(demo_copy / target)],
                       capture_output=True, text=True, timeout=120, env=env)
    assert p.returncode == 2
    one_line_error(p.stderr, "the study reads that file", target)
    assert digest(demo_copy) == before


@pytest.mark.parametrize("argv, needle", [
    (["run", DEMO, "-o", ""], "argument -o/--out: an empty name"),
    (["sheet", DEMO, "-o", " "], "argument -o/--out/--output: an empty name"),
    (["search", DEMO, "--radius-km", "5", "-o", ""], "argument -o/--out: an empty name"),
    (["fit", DEMO, DEMO.parent / "measurements.csv", "-o", "x", "--write-zones", ""],
     "argument --write-zones: an empty name"),
    (["sheet", DEMO, "-o", "/dev/full"], "/dev/full: is not a regular file"),
    (["sheet", DEMO, "-o", DEMO.parent / "zones.geojson"], "the study reads that file"),
])
def test_output_names_that_mean_nothing_or_a_device(argv, needle, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    before = digest(DEMO.parent)
    rc, out, err = run_cli(*argv)
    assert rc == 2
    one_line_error(err, needle)
    assert list(tmp_path.iterdir()) == [] and digest(DEMO.parent) == before
    if os.path.exists("/dev/full"):
        assert pathlib.Path("/dev/full").is_char_device()


# --- what a study may cost ---------------------------------------------------------------------

@pytest.mark.parametrize("old, new, needle", [
    ("bearings = [137.5]", "bearings = [" + ", ".join(["1.5"] * 3601) + "]",
     "bearings: 3601 entries, more than the 3600"),
    ("step_km = 0.25", "step_km = 0.01\nmax_km = 2000",
     "361 bearings × 199100 distances = 7.19e+07 field points"),
])
def test_lists_and_grids_beyond_what_a_study_may_cost(demo_copy, old, new, needle):
    f = demo_copy / "big.toml"
    f.write_text(DEMO_TEXT.replace(old, new, 1), encoding="utf-8")
    rc, out, err = run_cli("run", f, "-o", demo_copy / "out")
    assert rc == 2
    one_line_error(err, needle, "big.toml")
    assert not (demo_copy / "out").exists() or not any((demo_copy / "out").iterdir())


def test_too_many_contours_and_neighbour_rows(demo_copy):
    f = demo_copy / "many.toml"
    levels = "".join(f"[[contour]]\nfield_mv_m = {0.01 * (k + 1):g}\n" for k in range(21))
    f.write_text(DEMO_TEXT.replace("[community]", levels + "[community]", 1), encoding="utf-8")
    with pytest.raises(ValueError, match="contour: 25 entries, more than the 20"):
        load_study(f)
    lines = (demo_copy / "neighbours.csv").read_text().splitlines()
    (demo_copy / "neighbours.csv").write_text("\n".join(lines + lines[1:2] * 10_001) + "\n")
    (demo_copy / "s.toml").write_text(DEMO_TEXT, encoding="utf-8")
    with pytest.raises(ValueError, match="neighbour: 10007 entries, more than the 10000"):
        load_study(demo_copy / "s.toml")


@pytest.mark.parametrize("kind", ["fifo", "device", "large"])
def test_only_regular_files_of_bounded_size_are_read(demo_copy, kind):
    text = DEMO_TEXT
    if kind == "fifo":
        os.mkfifo(demo_copy / "pipe.geojson")  # reading it would block for ever
        text = text.replace('zones = "zones.geojson"', 'zones = "pipe.geojson"')
        needle = "pipe.geojson: is not a regular file"
    elif kind == "device":
        text = text.replace('zones = "zones.geojson"', 'zones = "/dev/zero"')
        needle = "/dev/zero: is not a regular file"
    else:
        with open(demo_copy / "huge.geojson", "wb") as fh:
            fh.truncate(65 * 2**20)  # a sparse file: 65 MiB of zeros
        text = text.replace('zones = "zones.geojson"', 'zones = "huge.geojson"')
        needle = "huge.geojson: larger than 64 MiB"
    f = demo_copy / "s.toml"
    f.write_text(text, encoding="utf-8")
    rc, out, err = run_cli("run", f, "-o", demo_copy / "out")
    assert rc == 2
    one_line_error(err, needle)


def test_search_counts_candidates_before_building_them(tmp_path):
    import resource

    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    rc, out, err = run_cli("search", DEMO, "--radius-km", "2000", "--step-km", "0.05",
                           "-o", tmp_path / "s")
    assert rc == 2
    one_line_error(err, "about 5.03e+09 candidate sites", "--step-km")
    grown_mb = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before) / 1024
    assert grown_mb < 200  # the grid it refused would need tens of GiB


@pytest.mark.parametrize("where", ["mwreach.coverage.cli.build_parser",
                                   "mwreach.coverage.inputs.load_study_doc",
                                   "mwreach.coverage.study.Study.run"])
def test_ctrl_c_while_starting_or_reading_is_one_line(monkeypatch, tmp_path, where):
    # Ctrl-C lands wherever the program is: while it builds its options, reads the study or
    # computes. Each gives one line and exit 130, never a traceback (the numpy and core imports
    # happen inside main's handling, not when the command-line module loads)
    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(where, interrupted)
    rc, out, err = run_cli("run", DEMO, "-o", tmp_path / "out")
    assert rc == 130
    one_line_error(err, "interrupted")
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_the_command_line_module_loads_no_numpy():
    code = "import sys; import mwreach.coverage.cli; print(sorted(m for m in ('numpy', " \
           "'scipy') if m in sys.modules))"
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert p.stdout.strip() == "[]", p.stdout + p.stderr


def test_an_overlong_radial_name_is_blamed_on_the_readings_file(demo_copy, tmp_path):
    text = (DEMO.parent / "measurements.csv").read_text().replace(",south,", "," + "r" * 300 + ",")
    m = demo_copy / "long.csv"
    m.write_text(text)
    (demo_copy / "s.toml").write_text(DEMO_TEXT, encoding="utf-8")
    rc, out, err = run_cli("fit", demo_copy / "s.toml", m, "-o", tmp_path / "fit")
    assert rc == 2
    one_line_error(err, "radial must be at most 200 characters (got 300)", "long.csv")


def test_every_json_output_is_strict_json(demo_run):
    # NaN and Infinity are not JSON (RFC 8259 §6): no output may hold them
    from mwreach.coverage.safefiles import json_text

    def refuse(name):
        raise ValueError(f"{name} in JSON")

    out, _ = demo_run
    for name in ("summary.json", "night.json", "contours.geojson"):
        json.loads((out / name).read_text(encoding="utf-8"), parse_constant=refuse)
    text = json_text({"a": float("nan"), "b": [1.0, float("inf"), -float("inf")], "c": "x"})
    assert json.loads(text, parse_constant=refuse) == {"a": None, "b": [1.0, None, None],
                                                       "c": "x"}


@pytest.mark.parametrize("plan, method", [("us", "kirke"), ("region2", "millington"),
                                          ("regions-1-3", "millington")])
def test_the_protection_plan_sets_the_default_mixed_path_method(demo_copy, plan, method):
    # 47 CFR 73.183(d) (read): US mixed paths by the equivalent-distance method; the ITU
    # regions' plans use Millington (ITU-R P.368 Annex 2); a study may still choose
    text = DEMO_TEXT.replace('mixed_path = "millington"', "").replace(
        "raster_khz = 10\n", f'plan = "{plan}"\n')
    if plan == "regions-1-3":  # its channels are multiples of 9 kHz: 1395, not 1390
        text = text.replace("freq_khz = 1390", "freq_khz = 1395")
    f = demo_copy / "plan.toml"
    f.write_text(text, encoding="utf-8")
    spec = load_study(f)
    assert spec.mixed_path == method
    assert any("the method of the protection plan" in n for n in spec.input_notes)
    f.write_text(text.replace("[study]", '[study]\nmixed_path = "millington"'), encoding="utf-8")
    assert load_study(f).mixed_path == "millington"
