"""Operating periods: day checks on the day facility, night checks on the night facility, a
period without its own facility on the day antenna; study-file errors in one line, exit 2."""

import dataclasses
import json
import pathlib

import numpy as np
import pytest

from mwreach.coverage import cli
from mwreach.coverage.inputs import load_study, parse_study, spec_to_toml
from mwreach.coverage.interference import point_ground_dbu, sky_dbu_from
from mwreach.coverage.station import period_rows
from mwreach.coverage.study import Study

from helpers import homogeneous_study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"

NIGHT_ARRAY = """
[antenna_night]
pattern = "standard"
[[antenna_night.tower]]
height_deg = 90
loss_ohm = 1
[[antenna_night.tower]]
height_deg = 90
loss_ohm = 1
field_ratio = 0.9
phase_deg = 90
spacing_deg = 90
orientation_deg = 270
"""


def study_text(extra: str = "", night_kw: float = 0.5) -> str:
    base = homogeneous_study(40.0, 10.0).replace("power_day_kw = 1",
                                                 f"power_day_kw = 1\npower_night_kw = {night_kw}")
    return base + extra


def test_night_uses_its_own_facility_and_day_the_day_one():
    spec = parse_study(__import__("tomllib").loads(study_text(NIGHT_ARRAY)), "s.toml")
    st = spec.station
    assert st.day_antenna.kind == "theoretical" and len(st.day_antenna.elements) == 1
    night = st.night_antenna
    assert night.kind == "standard" and len(night.array.elements) == 2
    # the null of the night array toward 270° (second tower west, +90°): the night field there
    # is the standard pattern's fill, far below the day tower's
    assert night.field_mv_m(270.0, 0.0, 0.5) < 0.2 * st.day_antenna.field_mv_m(270.0, 0.0, 0.5)
    # sky wave toward the west at night follows the night pattern, at the departure angle
    from mwreach.coverage.interference import NightSettings
    ns = NightSettings()
    west = sky_dbu_from(st.lat, st.lon, st.freq_khz, night, 0.5, 40.0, 2.0, ns)
    as_day = sky_dbu_from(st.lat, st.lon, st.freq_khz, st.day_antenna, 0.5, 40.0, 2.0, ns)
    assert west[0] < as_day[0] - 10.0  # dB: the null side of the array


def test_a_period_without_its_own_facility_uses_the_day_antenna_and_says_so():
    spec = parse_study(__import__("tomllib").loads(study_text()), "s.toml")
    st = spec.station
    assert not st.has_own("night")
    assert st.night_antenna is st.day_antenna
    assert any("no [antenna_night]" in n for n in spec.input_notes)
    rows = period_rows(st)
    assert [r["period"] for r in rows] == ["day", "night"]
    assert rows[1]["own_facility"] is False
    # fields ∝ √P: the day antenna at night power
    assert rows[1]["rms_mv_m"] == pytest.approx(rows[0]["rms_mv_m"] * np.sqrt(0.5), rel=1e-12)


def test_critical_hours_facility_and_power():
    text = study_text(NIGHT_ARRAY.replace("antenna_night", "antenna_critical"))
    text = text.replace("power_night_kw = 0.5", "power_night_kw = 0.5\npower_critical_kw = 0.7")
    spec = parse_study(__import__("tomllib").loads(text), "s.toml")
    rows = {r["period"]: r for r in period_rows(spec.station)}
    assert rows["critical"]["own_facility"] and rows["critical"]["power_kw"] == 0.7
    assert rows["critical"]["pattern"] == "standard"
    assert not rows["night"]["own_facility"]


def test_study_with_periods_round_trips_through_toml():
    tomllib = __import__("tomllib")
    aug = ("\n[[antenna_night.augmentation]]\nazimuth_deg = 90\nspan_deg = 40\n"
           "field_mv_m = 400\n")
    spec = parse_study(tomllib.loads(study_text(NIGHT_ARRAY + aug)), "s.toml")
    again = parse_study(tomllib.loads(spec_to_toml(spec)), "s.toml")
    assert again.station == spec.station


def test_max_night_power_follows_the_night_array():
    # the demo's night array (null toward its co-channel neighbours to the west) allows more
    # night power than its day tower would; both are found per period
    spec = load_study(DEMO)
    res = Study(spec).run(bearings=np.arange(0.0, 360.0, 30.0))
    with_array = res.interference.max_power["night"]["max_power_kw"]
    plain = dataclasses.replace(spec, station=dataclasses.replace(spec.station, night=None))
    res2 = Study(plain).run(bearings=np.arange(0.0, 360.0, 30.0))
    without = res2.interference.max_power["night"]["max_power_kw"]
    assert with_array > 3 * without  # demo: 1.38 kW against 0.218 kW
    assert res.interference.max_power["day"] == res2.interference.max_power["day"]


@pytest.mark.parametrize("extra, words", [
    (NIGHT_ARRAY + "\n[[antenna_night.augmentation]]\nazimuth_deg = 90\nspan_deg = 400\n"
     "field_mv_m = 400\n", "span_deg must be > 0 and <= 360"),
    (NIGHT_ARRAY + "\n[[antenna_night.augmentation]]\nazimuth_deg = 90\nspan_deg = 40\n"
     "field_mv_m = -4\n", "field_mv_m must be > 0"),
    (NIGHT_ARRAY + "\n[[antenna_night.augmentation]]\nazimuth_deg = 270\nspan_deg = 40\n"
     "field_mv_m = 1\n", "needs A > 0"),
    ("\n[antenna_night]\npattern = \"standard\"\n", "missing key 'tower'"),
    (NIGHT_ARRAY.replace('"standard"', '"cardioid"'), "pattern must be one of"),
    (NIGHT_ARRAY + "\n[[antenna_night.augmentation]]\nazimuth_deg = 90\nspan = 40\n",
     "unknown key 'span'"),
])
def test_bad_periods_are_one_line_exit_2(tmp_path, capsys, extra, words):
    f = tmp_path / "s.toml"
    f.write_text(study_text(extra))
    assert cli.main(["run", str(f), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1, err
    assert words in err and "s.toml" in err and "antenna_night" in err, err


def test_demo_outputs_carry_periods_sun_times_and_pattern_table(tmp_path):
    assert cli.main(["run", str(DEMO), "--out", str(tmp_path)]) == 0
    summary = json.loads((tmp_path / "summary.json").read_text())
    periods = {r["period"]: r for r in summary["operating_periods"]}
    assert periods["night"]["pattern"] == "standard"
    assert len(periods["night"]["augmentations"]) == 1
    assert len(summary["sun"]["months"]) == 12
    assert summary["sun"]["clock"].startswith("local standard time")
    rows = (tmp_path / "patterns.csv").read_text().splitlines()
    head = rows[0].split(",")
    night = [dict(zip(head, r.split(","))) for r in rows[1:] if r.startswith("night,")]
    assert sorted({float(r["elevation_deg"]) for r in night}) == list(range(0, 61, 5))
    assert all(float(r["pattern_mv_m"]) >= float(r["theoretical_mv_m"]) for r in night)
