"""Contours, the study file and the study runner (`mwreach run`)."""

import csv
import json
import pathlib

import numpy as np
import pytest
from shapely.geometry import Point, Polygon

from mwreach.coverage import cli, geodesy
from mwreach.coverage import groundwave as gw
from mwreach.coverage.antenna import Array, Tower
from mwreach.coverage.contours import crossings, field_raster, level_contour, radial_fields
from mwreach.coverage.ground import GroundMap, Zone, ground_class
from mwreach.coverage.inputs import load_study, spec_to_toml
from mwreach.coverage.study import Study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
LAT, LON = 38.4, -46.2


def test_crossings_linear_interpolation():
    d = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
    f = np.array([10.0, 6.0, 2.0, 6.0, 0.0])
    dist, direction = crossings(d, f, 4.0)
    np.testing.assert_allclose(dist, [1.5, 2.5, 3 + 1 / 3])
    assert list(direction) == [-1, 1, -1]


def test_homogeneous_contours_match_inverse_and_circle_area():
    land = ground_class("land")
    gm = GroundMap(land)
    b = np.arange(0.0, 360.0, 5.0)
    e1 = np.full(b.shape, 300.0)
    rad = radial_fields(1000.0, gm, LAT, LON, b, e1, 120.0, 0.25)
    proj = geodesy.local_projection(LAT, LON)
    c = level_contour(rad, 1.0, "1 mV/m", proj)
    d_ref = gw.distance_to_field_km(1000.0, land, 1.0, e1km_mv_m=300.0)
    # linear interpolation in dB over 0.25 km steps: within 5 m
    np.testing.assert_allclose(c.first_km, d_ref, atol=0.005)
    # geodesic area of a 72-gon inscribed in the circle: (n/2) r² sin(2π/n)
    n = b.size
    assert c.area_km2 == pytest.approx(n / 2 * d_ref**2 * np.sin(2 * np.pi / n), rel=2e-3)
    assert not c.multiple.any()


def test_community_share():
    gm = GroundMap(ground_class("land"))
    b = np.arange(0.0, 360.0, 1.0)
    rad = radial_fields(1000.0, gm, LAT, LON, b, np.full(b.shape, 300.0), 120.0, 0.25)
    proj = geodesy.local_projection(LAT, LON)
    d = gw.distance_to_field_km(1000.0, ground_class("land"), 1.0, e1km_mv_m=300.0)
    # a square community centred on the contour line due east: half of it inside
    sq = Polygon([(d - 2, -2), (d + 2, -2), (d + 2, 2), (d - 2, 2)])
    comm = proj.geom_to_lonlat(sq)
    c = level_contour(rad, 1.0, "", proj, comm)
    assert c.community_share == pytest.approx(0.5, abs=0.02)  # the contour arc bulges 0.01 km
    inner = proj.geom_to_lonlat(Point(0, 0).buffer(3.0))
    assert level_contour(rad, 1.0, "", proj, inner).community_share == pytest.approx(1.0, abs=1e-6)


def test_recovery_over_sea_gives_further_crossings():
    # land out to 60 km east, then sea: the 0.5 mV/m level is crossed, regained, and lost again
    proj = geodesy.local_projection(LAT, LON)
    sea = proj.geom_to_lonlat(Polygon([(60, -400), (800, -400), (800, 400), (60, 400)]))
    gm = GroundMap(ground_class("dry"), [Zone("sea", ground_class("sea"), sea)])
    b = np.arange(0.0, 360.0, 2.0)
    rad = radial_fields(1000.0, gm, LAT, LON, b, np.full(b.shape, 300.0), 400.0, 0.25)
    levels = np.array([0.05, 0.02, 0.01])
    found = []
    for lv in levels:
        c = level_contour(rad, lv, "", proj)
        i = int(np.argmin(np.abs(b - 90.0)))
        found.append(bool(c.further[i]))
        if c.further[i]:
            a, e = c.further[i][0]
            assert c.first_km[i] < 60.0 < a < e
            assert c.multiple[i]
            assert c.polygon_xy.contains(Point((a + e) / 2 * 0.999, 0.0))  # island included
    assert any(found)


def test_field_raster_matches_radials():
    gm = GroundMap(ground_class("land"))
    b = np.arange(0.0, 360.0, 1.0)
    rad = radial_fields(1000.0, gm, LAT, LON, b, np.full(b.shape, 300.0), 100.0, 0.25)
    x, y, f = field_raster(rad, 50.0, 101)
    j = int(np.argmin(np.abs(x - 30.0)))
    i0 = int(np.argmin(np.abs(y - 0.0)))
    assert f[i0, j] == pytest.approx(float(gw.field_dbu(1000.0, ground_class("land"), x[j])),
                                     abs=0.01)  # dB: bilinear interpolation on 0.25 km grid


def test_demo_study_runs_and_is_sensible():
    res = Study.from_file(DEMO).run()
    rows = res.level_rows()
    assert [r["level_mv_m"] for r in rows] == [5.0, 2.0, 0.5, 0.1]
    # toward 180° the demo's radial stays on its default ground (4 mS/m, εr 15) for 680 km, so
    # each level lies where the homogeneous smooth-earth curve (checked against mpmath in
    # tests/test_groundwave.py) reaches it; measured within 4e-4 km (linear interpolation
    # between the 0.25 km steps of the radial), 2e-3 km allowed
    from mwreach.coverage import groundwave as gw

    b = res.radials.bearings_deg
    i = int(np.flatnonzero(b == 180.0)[0])
    assert len(res.radials.sections[i]) == 1
    m = gw.model(res.spec.station.freq_khz, res.spec.ground.default, res.spec.earth_k)
    for c in res.contours:
        want = m.distance_to_field_km(c.level_mv_m, float(res.radials.e1km_mv_m[i]))
        assert c.first_km[i] == pytest.approx(want, abs=2e-3)  # km
    # the seaward radials (east) reach further than the uplands (west)
    c = res.contours[2]
    assert c.first_km[b == 90.0][0] > 2 * c.first_km[b == 270.0][0]
    assert res.spec.ground.overlaps  # the demo has overlapping zones on purpose


def test_bearings_include_extra_ones():
    spec = load_study(DEMO)
    assert 137.5 in spec.bearings and spec.bearings.size == 361


def test_spec_round_trip(demo_copy):
    spec = load_study(DEMO)
    f = demo_copy / "copy.toml"
    f.write_text(spec_to_toml(spec))
    again = load_study(f)
    assert again.station.lat == spec.station.lat and again.levels == spec.levels
    assert again.station.antenna.elements[0].tower.height_deg == pytest.approx(
        spec.station.antenna.elements[0].tower.height_deg)
    assert again.mixed_path == spec.mixed_path and again.extra_bearings == spec.extra_bearings
    assert again.interference.neighbours == spec.interference.neighbours
    assert again.interference.night == spec.interference.night
    assert again.interference.protection.ratios.keys() == spec.interference.protection.ratios.keys()


def _study_text(**replace):
    text = DEMO.read_text()
    for old, new in replace.items():
        assert old in text
        text = text.replace(old, new)
    return text


@pytest.mark.parametrize(
    "old, new, needle",
    [
        ("lat = 38.40", "lat = 138.4", r"lat must be >= -90 and <= 90 \(got 138.4\) in \[station\] of .*bad.toml"),
        ("power_day_kw = 1.0", "power_day_kw = -1.0", r"power_day_kw must be > 0 .*\[station\]"),
        ("mixed_path = \"millington\"", "mixed_path = \"avg\"", "mixed_path must be one of 'millington', 'kirke'"),
        ("[output]", "[output]\ncolour = 1", r"unknown key 'colour' in \[output\] of .*bad.toml; valid keys"),
        ("field_mv_m = 5.0", "field_mv_m = nan", r"field_mv_m must be a finite number .*\[\[contour\]\] 1"),
        ("zones = \"zones.geojson\"", "zones = \"missing.geojson\"", "zones file .*missing.geojson.* not found"),
        ("height_m = 62.0", "height_m = 0", r"height_m must be > 0 .*tower 1 of \[antenna\]"),
        ("[station]", "[statoin]\n[station]", "unknown key 'statoin' in .*bad.toml; valid keys: study, station"),
        ("title =", "title = = ", r"bad.toml: .*line 5"),
    ],
)
def test_study_errors_name_key_and_file(demo_copy, old, new, needle):
    f = demo_copy / "bad.toml"
    f.write_text(_study_text(**{old: new}))
    with pytest.raises(ValueError, match=needle):
        load_study(f)


def test_cli_run_writes_outputs(demo_run):
    tmp_path, text = demo_run
    assert "0.5 mV/m protected" in text and "licensed engineer" in text
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["station"]["freq_khz"] == 1390.0
    lv = summary["levels"]
    assert {"level_mv_m", "min_km", "max_km", "mean_km", "area_km2", "community_share"} <= set(lv[0])
    rows = list(csv.DictReader((tmp_path / "radials.csv").open()))
    assert len(rows) == 361
    # at 180° the demo's radial stays on its default ground (4 mS/m, εr 15) well past the
    # 0.5 mV/m contour: the homogeneous smooth-earth curve (checked against mpmath in
    # test_groundwave.py) gives the distance; 0.01 km covers the 0.25 km grid's interpolation
    from mwreach.coverage import groundwave as gw

    r180 = next(r for r in rows if r["bearing_deg"] == "180")
    d = gw.model(1390.0, gw.Ground(4.0, 15.0), 1.3333).distance_to_field_km(
        0.5, float(r180["e1km_mv_m"]))
    assert float(r180["0.5mV_m_km"]) == pytest.approx(d, abs=0.01)
    r90 = next(r for r in rows if r["bearing_deg"] == "90")
    assert float(r90["0.5mV_m_mi"]) == pytest.approx(float(r90["0.5mV_m_km"]) / 1.609344, abs=0.01)
    gj = json.loads((tmp_path / "contours.geojson").read_text())
    day = [f for f in gj["features"] if f["properties"]["kind"] == "day ground wave"]
    assert [f["properties"]["level_mv_m"] for f in day] == [5.0, 2.0, 0.5, 0.1]
    assert all({"label", "area_km2", "station"} <= set(f["properties"]) for f in day)
    assert gj["features"][0]["properties"]["kind"] == "site"
    assert gj["features"][0]["geometry"] == {"type": "Point", "coordinates": [-46.2, 38.4]}
    kml = (tmp_path / "contours.kml").read_text()
    assert kml.count("<Placemark>") == len(gj["features"]) and "opengis.net/kml/2.2" in kml


def test_cli_run_bad_file(tmp_path, capsys):
    f = tmp_path / "x.toml"
    f.write_text("[station]\nlat = 1\n")
    assert cli.main(["run", str(f), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "x.toml" in err and "missing key" in err


def test_directional_antenna_shapes_contours():
    spec = load_study(DEMO)
    from mwreach.coverage.antenna import Element
    import dataclasses

    arr = Array((Element(Tower(90.0)), Element(Tower(90.0), 1.0, -90.0, 90.0, 0.0)))
    spec2 = dataclasses.replace(
        spec, station=dataclasses.replace(spec.station, antenna=arr, pattern="theoretical"),
        ground=GroundMap(ground_class("land")), community=None)
    res = Study(spec2).run(bearings=np.arange(0.0, 360.0, 10.0))
    c = res.contours[1].first_km
    assert c[0] > 1.1 * c[9]  # main lobe north (3 dB above east) reaches further than east
    assert np.isnan(c[18])  # the null due south: 2 mV/m is not reached even at one wavelength
    # the standard pattern (47 CFR 73.150, the default for an array) fills the null with
    # 1.05·Q: at 1 kW Q = 10·√1 mV/m (power branch), so 10.5 mV/m at 1 km reaches 2 mV/m
    std = Study(dataclasses.replace(spec2, station=dataclasses.replace(
        spec2.station, pattern=""))).run(bearings=np.arange(0.0, 360.0, 10.0))
    assert std.spec.station.day_antenna.kind == "standard"
    assert np.isfinite(std.contours[1].first_km[18])
    ok = np.isfinite(c)
    assert np.all(std.contours[1].first_km[ok] >= c[ok] - 0.25)  # never inside the theoretical
    # contour; 0.25 km is the radial step


MINIMAL = """
[station]
name = "Minimal"
lat = 10.0
lon = 20.0
freq_khz = 1000
power_day_kw = 1

[antenna]
[[antenna.tower]]
height_deg = 90

[ground]
class = "land"

[[contour]]
field_mv_m = 1.0
"""


def test_minimal_study_runs(tmp_path, capsys):
    f = tmp_path / "min.toml"
    f.write_text(MINIMAL)
    assert cli.main(["run", str(f), "--out", str(tmp_path / "o")]) == 0
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    (lv,) = summary["levels"]
    # homogeneous land, λ/4 tower, 1 kW: the contour is a circle at the homogeneous distance
    d = gw.distance_to_field_km(1000.0, ground_class("land"), 1.0,
                                e1km_mv_m=summary["antenna"]["rms_mv_m"])
    assert lv["min_km"] == pytest.approx(d, abs=0.01) and lv["max_km"] == pytest.approx(d, abs=0.01)
    assert lv["community_share"] is None
    assert not (tmp_path / "o" / "night.json").exists()
    f.write_text(MINIMAL.replace('class = "land"\n', ""))
    assert cli.main(["run", str(f), "--out", str(tmp_path / "o")]) == 2
    assert "give class, or both sigma_ms_m and eps_r" in capsys.readouterr().err


def test_binary_study_file_is_named(tmp_path, capsys):
    f = tmp_path / "b.toml"
    f.write_bytes(b"[station]\nname = \"\xff\"\n")
    assert cli.main(["run", str(f), "--out", str(tmp_path / "o")]) == 2
    assert "b.toml: not UTF-8 text" in capsys.readouterr().err
