"""Protection ratios, RSS, night limit, D/U margins and maximum power."""

import csv
import dataclasses
import json
import pathlib

import numpy as np
import pytest

from mwreach.coverage.antenna import Array, Tower
from mwreach.coverage.classes import STATION_CLASSES, StationClass
from mwreach.coverage.ground import GroundMap, ground_class
from mwreach.coverage.interference import (
    channel_offset,
    InterferencePlan,
    Neighbour,
    NightSettings,
    ProtectionTable,
    rss,
    run_interference,
)
from mwreach.coverage.report import describe_max_power
from mwreach.coverage.groundwave import mv_m_to_dbu
from mwreach.coverage.skywave import sky_field_dbu, sky_path
from mwreach.coverage.inputs import load_study, read_neighbours_csv

from helpers import lens_km2

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def test_rss_exclusion_example():
    # docs/methods.md §5 [calc]: 1.0, 0.6, 0.3, 0.1 mV/m → 1.166 (50 % rule), 1.204 (25 % rule)
    vals = [0.3, 1.0, 0.1, 0.6]
    total50, used50 = rss(vals, 50)
    total25, used25 = rss(vals, 25)
    assert total50 == pytest.approx(1.166, abs=5e-4)
    assert total25 == pytest.approx(1.204, abs=5e-4)
    assert list(used50) == [False, True, False, True]
    assert list(used25) == [True, True, False, True]
    assert rss(vals, 0)[0] == pytest.approx(np.sqrt(1 + 0.36 + 0.09 + 0.01))


@pytest.mark.parametrize("second, rule, expected", [
    # 47 CFR 73.182(k) (from memory): a contribution is left out when it is below 50 % of the
    # RSS of the larger ones; 0.45 is, 0.55 is not; with the 25 % rule 0.45 is kept
    (0.45, 50, 1.0), (0.55, 50, float(np.hypot(1.0, 0.55))), (0.45, 25, float(np.hypot(1.0, 0.45))),
    (0.2, 25, 1.0),
])
def test_rss_exclusion_threshold(second, rule, expected):
    assert rss([1.0, second], rule)[0] == pytest.approx(expected, abs=1e-12)


def test_channel_offsets():
    assert channel_offset(1390, 1390, 10) == 0
    assert channel_offset(1390, 1380, 10) == -1
    assert channel_offset(1390, 1420, 10) == 3
    assert channel_offset(1395, 1390, 10) is None  # off the raster
    assert channel_offset(999, 1008, 9) == 1


@pytest.mark.parametrize("period, offset, pair", [
    # 47 CFR 73.37(a) contour pairs (from memory): co-channel 0.025 mV/m interfering against a
    # 0.5 mV/m protected contour, 20·log10(0.5/0.025) = 26.0 dB; 47 CFR 73.183(c) (read) and
    # the 1937 North American agreement, Appendix III Table I (read): first adjacent, 0.25 mV/m
    # against 0.5 mV/m, 6.0 dB. Night: the same ratios (47 CFR 73.182, from memory).
    ("day", 0, (0.5, 0.025)), ("night", 0, (0.5, 0.025)),
    ("day", 1, (0.5, 0.25)), ("night", 1, (0.5, 0.25)),
])
def test_default_ratios_from_the_contour_pairs(period, offset, pair):
    ratio = ProtectionTable().ratio_db(period, offset)[0]
    assert ratio == pytest.approx(20 * np.log10(pair[0] / pair[1]), abs=0.05)  # tables round to dB


def test_default_ratios_carry_sources():
    t = ProtectionTable()
    assert t.ratio_db("night", 0)[0] == 26.0 and "73.37" in t.ratio_db("night", 0)[1]
    assert t.ratio_db("day", -1)[0] == 6.0 and "73.183(c)" in t.ratio_db("day", -1)[1]
    assert t.ratio_db("day", 2) is None


#: a station class of the tests' own: no power range and no night level, so that the physics
#: checks below see the neighbours' limits and the [night] floor, never a class's rule
UNRANGED = StationClass("T", 0.5, "none", None, "test class without power range")


def _spec(neighbours, night=None, floor=0.5, station_class="T"):
    spec = load_study(DEMO)
    plan = InterferencePlan(tuple(neighbours), night=night or NightSettings(floor_mv_m=floor,
                                                                           bearing_step_deg=30.0),
                            contour_step_deg=30.0, classes=dict(STATION_CLASSES, T=UNRANGED))
    # the demo station with its day tower by night too, at 0.2 kW: the checks here are about
    # the mechanisms, not the demo's night array (tests/test_periods.py covers that)
    station = dataclasses.replace(spec.station, station_class=station_class, night=None,
                                  power_night_kw=0.2)
    return dataclasses.replace(spec, station=station, ground=GroundMap(ground_class("land")),
                               community=None, interference=plan)


def _nb(name, freq, lat=42.0, lon=-51.0, p=5.0):
    return Neighbour(name, lat, lon, freq, p, p, Array.single(Tower(90.0)))


def test_one_interferer_sets_the_limit_to_ratio_times_field():
    n = _nb("A", 1390.0)
    spec = _spec([n], floor=0.01)
    res = run_interference(spec, spec.interference)
    st = spec.station
    night = res.night
    from mwreach.coverage.geodesy import fwd_points

    plat, plon = fwd_points(st.lat, st.lon, night.bearings_deg, night.contour_km)
    # at each night-contour point the limit is 26 dB (co-channel, 47 CFR 73.37) above A's
    # 10 % sky wave there (47 CFR 73.190 Formula 2)
    path = sky_path(n.lat, n.lon, plat, plon)
    e_dep = n.antenna.field_mv_m(path.azimuth_deg, path.departure_deg, n.power_night_kw)
    u = sky_field_dbu(path, e_dep, "cfr", 10)
    # the limit is evaluated at the previous iteration's contour; the contour moves < 0.1 km
    np.testing.assert_allclose(night.limit_dbu, u + 26.0, atol=0.01)  # dB
    # and the own ground wave at the night contour equals the limit
    from mwreach.coverage.interference import point_ground_dbu

    own = point_ground_dbu(st.freq_khz, spec.ground, st.lat, st.lon, st.antenna,
                           st.power_night_kw, plat, plon)
    np.testing.assert_allclose(own, night.limit_dbu, atol=0.05)  # dB, 0.25 km grid


def test_undefined_ratio_contributes_nothing_and_is_reported():
    spec = _spec([_nb("B", 1430.0)])  # four channels off: no ratio, no overlap rule
    res = run_interference(spec, spec.interference)
    assert not res.rows and not res.overlaps
    assert any("B" in n and "no protection ratio" in n for n in res.notes)
    assert np.allclose(res.night.limit_mv_m, 0.5)  # the floor


def test_doubling_neighbour_power_raises_limit_3_01_db():
    a = _spec([_nb("A", 1390.0, p=5.0)], floor=0.01)
    b = _spec([_nb("A", 1390.0, p=10.0)], floor=0.01)
    la = run_interference(a, a.interference).night.limit_dbu
    lb = run_interference(b, b.interference).night.limit_dbu
    # the contour moves a little, so the points differ slightly: within 0.05 dB
    np.testing.assert_allclose(lb - la, 3.0103, atol=0.05)


def test_max_power_restores_zero_margin():
    spec = _spec([_nb("A", 1390.0, lat=39.5, lon=-48.0, p=1.0)])
    res = run_interference(spec, spec.interference)
    mp = res.max_power["night"]
    w = res.worst("night caused")
    assert mp["limiting_neighbour"] == "A"
    # caused field ∝ sqrt(P): at the maximum power the worst margin is zero
    spec2 = dataclasses.replace(spec, station=dataclasses.replace(
        spec.station, power_night_kw=mp["max_power_kw"]))
    w2 = run_interference(spec2, spec2.interference).worst("night caused")
    assert w2.margin_db == pytest.approx(0.0, abs=0.01)
    # 1e-3 dB: the night-limit entry power is found by bisection to 4e-5 dB
    assert w.margin_db == pytest.approx(10 * np.log10(mp["max_power_kw"] / spec.station.power_night_kw),
                                        abs=1e-3)


def test_neighbours_csv_errors(tmp_path):
    f = tmp_path / "n.csv"
    f.write_text("name,lat,lon,freq_khz,power_day_kw,height_deg\nX,91,0,1390,1,90\n")
    with pytest.raises(ValueError, match=r"lat must be .*got 91.*line 2 of .*n.csv"):
        read_neighbours_csv(f)
    f.write_text("name,lat,lon,freq_khz,power_day_kw,height_deg\nX,40,0,abc,1,90\n")
    with pytest.raises(ValueError, match=r"freq_khz must be a number \(got 'abc'\) in line 2"):
        read_neighbours_csv(f)
    f.write_text("name,lat,lon,freq_khz,power_day_kw,colour\nX,40,0,1390,1,red\n")
    with pytest.raises(ValueError, match="line 1 of .*n.csv: unknown column 'colour'"):
        read_neighbours_csv(f)
    f.write_text("name,lat,lon,freq_khz,power_day_kw\nX,40,0,1390,1\n")
    with pytest.raises(ValueError, match="exactly one of height_deg, height_m or array"):
        read_neighbours_csv(f)


def test_demo_night_outputs(demo_run):
    tmp_path, text = demo_run
    assert "Maximum night power" in text and "Thistlebury Radio" in text
    night = json.loads((tmp_path / "night.json").read_text())
    assert len(night["bearings"]) == 72
    rows = list(csv.DictReader((tmp_path / "interference.csv").open()))
    kinds = {r["kind"] for r in rows}
    assert kinds == {"day received", "day caused", "night caused", "day overlap",
                     "night limit entry"}
    # no absurd number where people read: margins above 60 dB are "> 60", fields below
    # −20 dBµV/m "< -20", and nothing in scientific notation
    for row in rows:
        for key in ("margin_db", "wanted_dbu", "unwanted_dbu"):
            v = row[key]
            if v and not v.startswith(("<", ">")):
                assert float(v) <= 60.0 if key == "margin_db" else float(v) >= -20.0, row
        assert not any("e-" in v or "e+" in v for v in row.values()), row
    assert any(r["margin_db"] == "> 60" for r in rows)  # the demo's far neighbours by day
    # the night-limit rows: margin = how far the proposal's product may rise before it enters
    # the neighbour's RSS limit under the 50 % exclusion rule (47 CFR 73.182, from memory): the
    # product enters once it is at least half (−6.02 dB) the RSS of the larger ones; with one
    # larger contribution at the deciding point that is wanted − unwanted − 6.02 dB
    entries = {r["neighbour"]: r for r in rows if r["kind"] == "night limit entry"}
    limits = json.loads((tmp_path / "night.json").read_text())["neighbour_night_limits"]
    assert set(entries) == {lim["neighbour"] for lim in limits}
    for lim in limits:  # JSON keeps the number, rounded to 1e-3 dB
        assert float(entries[lim["neighbour"]]["margin_db"]) == pytest.approx(lim["margin_db"],
                                                                             abs=0.006)
    v = entries["Varnholt Radio"]
    assert v["pass"] == "yes"
    mp = json.loads((tmp_path / "summary.json").read_text())["max_power"]["night"]
    # this check sets the demo's maximum night power: the spare margin is that power's ratio
    assert float(v["margin_db"]) == pytest.approx(
        10 * np.log10(mp["max_power_kw"] / mp["current_power_kw"]), abs=0.01)
    assert (float(v["lat"]), float(v["lon"])) == pytest.approx(
        (mp["limiting_lat"], mp["limiting_lon"]), abs=1e-5)
    r = next(x for x in rows if x["kind"] == "day caused" and x["margin_db"][0] not in "<>"
             and x["unwanted_dbu"][0] not in "<>")
    assert float(r["margin_db"]) == pytest.approx(
        float(r["wanted_dbu"]) - float(r["unwanted_dbu"]) - float(r["ratio_db"]), abs=0.02)
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["max_power"]["night"]["limiting_neighbour"]
    assert any(p["ratio_db"] is None for p in summary["protection_ratios"])
    gj = json.loads((tmp_path / "contours.geojson").read_text())
    assert [f["properties"]["kind"] for f in gj["features"]].count("night service") == 1
    # where one interferer alone sets the night limit, the limit is its 10 % sky wave
    # (47 CFR 73.190 Formula 2) at the night contour plus its protection ratio (26 dB co-channel,
    # 6 dB first adjacent); the contour moves < 0.1 km in the last iteration: 0.02 dB
    spec = load_study(DEMO)
    st = spec.station
    from mwreach.coverage.geodesy import fwd_points

    by_name = {n.name: n for n in spec.interference.neighbours}
    checked = 0
    for b in night["bearings"]:
        if len(b["interferers_used"]) != 1 or b["contour_km"] is None:
            continue
        n = by_name[b["interferers_used"][0]]
        ratio = 26.0 if n.freq_khz == st.freq_khz else 6.0
        plat, plon = fwd_points(st.lat, st.lon, b["bearing_deg"], b["contour_km"])
        path = sky_path(n.lat, n.lon, plat, plon)
        e_dep = n.antenna.field_mv_m(path.azimuth_deg, path.departure_deg, n.power_night_kw)
        u = float(sky_field_dbu(path, e_dep, "cfr", 10))
        assert b["night_limit_dbu"] == pytest.approx(u + ratio, abs=0.02)
        checked += 1
    assert checked >= 10


def test_study_interference_errors(demo_copy):
    text = DEMO.read_text()
    bad = demo_copy / "bad.toml"
    bad.write_text(text.replace('method = "cfr"', 'method = "guess"'))
    with pytest.raises(ValueError, match=r"method must be one of 'cfr', 'itu' .*\[night\] of .*bad.toml"):
        load_study(bad)
    bad.write_text(text.replace("raster_khz = 10", "raster_khz = 8"))
    with pytest.raises(ValueError, match=r"raster_khz must be one of 10, 9 .*\[protection\]"):
        load_study(bad)
    bad.write_text(text.replace('array = "varnholt_array.toml"', 'array = "nope.toml"'))
    with pytest.raises(ValueError, match=r"array file .*nope.toml.* not found \(array in \[\[neighbour\]\] 1"):
        load_study(bad)


def test_itu_night_limit_is_the_rss_of_ratio_times_sky_wave_on_the_demo():
    # ITU-R P.1147 (constants from memory): at each night-contour point the limit is the RSS,
    # with the 50 % exclusion, of ratio × 10 % sky wave of every night interferer
    spec = load_study(DEMO)
    plan = dataclasses.replace(spec.interference, night=dataclasses.replace(
        spec.interference.night, method="itu", bearing_step_deg=30.0, floor_mv_m=0.01),
        contour_step_deg=30.0)
    spec = dataclasses.replace(spec, interference=plan)
    res = run_interference(spec, plan)
    night = res.night
    from mwreach.coverage.geodesy import fwd_points

    st = spec.station
    plat, plon = fwd_points(st.lat, st.lon, night.bearings_deg, night.contour_km)
    prods = []
    for n in plan.neighbours:
        ratio = plan.protection.ratio_db("night", (n.freq_khz - st.freq_khz) / 10)
        if ratio is None:
            continue
        path = sky_path(n.lat, n.lon, plat, plon)
        e_dep = n.antenna.field_mv_m(path.azimuth_deg, path.departure_deg, n.power_night_kw)
        u = sky_field_dbu(path, e_dep, "itu", 10, freq_khz=n.freq_khz, tx=(n.lat, n.lon),
                          rx=(plat, plon))
        prods.append(10 ** ((u + ratio[0]) / 20))
    prods = np.sort(np.array(prods), axis=0)[::-1]
    expected = []
    for col in prods.T:  # the 50 % exclusion rule by hand
        total = col[0] ** 2
        for v in col[1:]:
            if v < 0.5 * np.sqrt(total):
                break
            total += v**2
        expected.append(10 * np.log10(total))
    # the limit was evaluated at the previous iteration's contour, which moves < 0.1 km
    np.testing.assert_allclose(night.limit_dbu, expected, atol=0.02)  # dB
    assert res.settings.method == "itu"


# --- the night rules (docs/methods.md §5) --------------------------------------------------------

def _north_of_site(spec, km):
    from mwreach.coverage.geodesy import fwd_points

    lat, lon = fwd_points(spec.station.lat, spec.station.lon, 0.0, km)
    return float(lat), float(lon)


def test_first_adjacent_40_km_fails_at_night_by_ground_wave():
    # a first-adjacent class B neighbour 20 km due north, 1 kW day and night; the proposal at
    # 1 kW day and night. Its protected night contour is 2.5 mV/m (class B, nothing else
    # listed, so its night limit is the class level; 47 CFR 73.182, from memory); the 10 % sky
    # wave at such short range is far weaker than the ground wave.
    spec = _spec([])
    spec = dataclasses.replace(spec, station=dataclasses.replace(spec.station, power_night_kw=1.0,
                                                                 power_day_kw=1.0))
    lat, lon = _north_of_site(spec, 20.0)
    n = Neighbour("Close", lat, lon, 1400.0, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = dataclasses.replace(spec, interference=dataclasses.replace(
        spec.interference, neighbours=(n,), contour_step_deg=10.0))
    res = run_interference(spec, spec.interference)
    rows = [r for r in res.rows if r.kind == "night caused"]
    assert rows and any(not r.passed for r in rows)
    r180 = next(r for r in rows if r.bearing_deg == 180.0)  # toward the proposal
    assert r180.mechanism == "ground"
    # by hand on the homogeneous land of this study (3 mS/m, εr 22; ITU-R P.368 class, from
    # memory): the neighbour's 2.5 mV/m radius, then the proposal's ground wave 20 km − r away
    from mwreach.coverage import groundwave as gw

    g = ground_class("land")
    e_n = n.antenna.field_mv_m(180.0, 0.0, 1.0)
    e_p = spec.station.antenna.field_mv_m(0.0, 0.0, 1.0)
    r = gw.model(1400.0, g, spec.earth_k).distance_to_field_km(2.5, float(e_n))
    u = float(gw.model(1390.0, g, spec.earth_k).field_dbu(20.0 - r, float(e_p)))
    margin = float(gw.mv_m_to_dbu(2.5)) - u - 6.0  # 6 dB first adjacent
    # 0.1 dB: 0.5 km radial grid and the geodesic vs straight-line 20 km − r
    assert r180.margin_db == pytest.approx(margin, abs=0.1)
    assert margin < -3.0
    assert res.worst("night caused").mechanism == "ground"


def test_co_channel_class_d_neighbour_has_no_night_check():
    n = dataclasses.replace(_nb("D", 1390.0), station_class="D")
    spec = _spec([n])
    res = run_interference(spec, spec.interference)
    assert not [r for r in res.rows if r.kind == "night caused"]
    assert any("class D: no night protection" in x for x in res.notes)
    assert [r for r in res.rows if r.kind == "day caused"]  # day protection stays


def test_class_a_neighbour_is_protected_to_its_50_percent_sky_wave_contour():
    n = dataclasses.replace(_nb("Clear", 1390.0, lat=45.0, lon=-60.0, p=50.0), station_class="A")
    spec = _spec([n])
    res = run_interference(spec, spec.interference)
    rows = [r for r in res.rows if r.kind == "night caused"]
    assert rows
    # the wanted field is 0.5 mV/m (class A, from memory) and each point lies where the
    # neighbour's 50 % sky wave (47 CFR 73.190 Formula 1) is 0.5 mV/m
    assert all(r.wanted_dbu == pytest.approx(float(mv_m_to_dbu(0.5)), abs=1e-9) for r in rows)
    r = rows[0]
    path = sky_path(n.lat, n.lon, r.lat, r.lon, geometry="cfr")
    e_dep = n.antenna.field_mv_m(path.azimuth_deg, path.departure_deg, n.power_night_kw)
    assert float(sky_field_dbu(path, e_dep, "cfr", 50)) == pytest.approx(
        float(mv_m_to_dbu(0.5)), abs=0.05)  # dB: interpolation on a 10 km grid
    assert all(r.mechanism == "sky" for r in rows)


def test_third_adjacent_overlap_area_is_the_lens_of_two_circles():
    # two single towers 3 km apart on homogeneous land, third adjacent: their 25 mV/m contours
    # (47 CFR 73.37, from memory) are circles; the overlap is the lens of two circles
    spec = _spec([])
    lat, lon = _north_of_site(spec, 3.0)
    n = Neighbour("Third", lat, lon, 1420.0, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = _neighbour_at(spec, n)
    res = run_interference(spec, spec.interference)
    (ov,) = res.overlaps
    from mwreach.coverage import groundwave as gw

    g = ground_class("land")
    r1 = gw.model(1390.0, g, spec.earth_k).distance_to_field_km(
        25.0, float(spec.station.antenna.field_mv_m(0.0, 0.0, spec.station.power_day_kw)))
    r2 = gw.model(1420.0, g, spec.earth_k).distance_to_field_km(
        25.0, float(n.antenna.field_mv_m(0.0, 0.0, 1.0)))
    d = 3.0
    lens = lens_km2(r1, r2, d)
    # measured 5.4e-5 relative (2° polygons of the two circles); 5e-4 allowed
    assert ov.area_km2 == pytest.approx(lens, rel=5e-4)
    assert not ov.passed and ov.offset_channels == 3 and ov.points
    assert any(row["kind"] == "day overlap" and not row["passed"]
               for row in res.neighbour_summary())



def test_exclusion_flips_when_the_proposal_crosses_half_the_rss():
    # neighbour N (class B) has one co-channel interferer O setting its night limit; the
    # proposal enters N's RSS once its product reaches 50 % of O's (47 CFR 73.182(k), from
    # memory), i.e. −6.02 dB. Fields scale with sqrt(P): the flip is at a computable power.
    o = _nb("O", 1390.0, lat=44.0, lon=-55.0, p=5.0)
    nn = _nb("N", 1390.0, lat=42.0, lon=-51.0, p=5.0)
    spec = _spec([nn, o])
    res = run_interference(spec, spec.interference)
    lim = next(x for x in res.neighbour_limits if x.neighbour == "N")
    x = float(np.max(lim.proposal_dbu - lim.without_dbu))  # dB at the most exposed point
    threshold = 20 * np.log10(0.5)
    p0 = spec.station.power_night_kw
    # the maximum night power stops just short of entering N's RSS (or of a D/U limit)
    p_flip = p0 * 10 ** ((threshold - x) / 10)
    assert res.max_power["night"]["max_power_kw"] <= p_flip * 10 ** (0.01 / 10)
    for delta, enters in ((-1.0, False), (+1.0, True)):
        p = p0 * 10 ** ((threshold - x + delta) / 10)
        sp = dataclasses.replace(spec, station=dataclasses.replace(spec.station, power_night_kw=p))
        got = next(x for x in run_interference(sp, sp.interference).neighbour_limits
                   if x.neighbour == "N")
        assert got.excluded is (not enters)
        assert (got.increase_db > 0) is enters


def test_third_adjacent_maximum_day_power_makes_the_contours_touch():
    # 25 km apart, no overlap at 1 kW; the maximum day power grows the proposal's 25 mV/m
    # circle until it touches the neighbour's: radius 25 km − r2, so
    # P = P0·(25 mV/m / its field there at P0)² (fields ∝ √P)
    from mwreach.coverage import groundwave as gw

    spec = _spec([])
    lat, lon = _north_of_site(spec, 25.0)
    n = Neighbour("Third", lat, lon, 1420.0, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = _neighbour_at(spec, n)
    res = run_interference(spec, spec.interference)
    assert res.overlaps[0].passed
    g = ground_class("land")
    r2 = gw.model(1420.0, g, spec.earth_k).distance_to_field_km(
        25.0, float(n.antenna.field_mv_m(0.0, 0.0, 1.0)))
    e1 = float(spec.station.antenna.field_mv_m(0.0, 0.0, spec.station.power_day_kw))
    f = float(gw.model(1390.0, g, spec.earth_k).field_mv_m(25.0 - r2, e1))
    p_touch = spec.station.power_day_kw * (25.0 / f) ** 2
    mp = res.max_power["day"]
    assert mp["check"] == "day overlap" and mp["limiting_neighbour"] == "Third"
    # 0.05 dB: the radial grid (0.1 km) and 2° bearings of the contours
    assert 10 * np.log10(mp["max_power_kw"] / p_touch) == pytest.approx(0.0, abs=0.05)


def test_entry_into_a_night_limit_equals_halving_on_the_plain_rss():
    # entry_scale_db slots the proposal into pre-sorted columns and searches 16 sub-intervals a
    # round; the reference is limit_with (stacked rows, stable sort, the RSS rule as written)
    # halved 30 times. Random limits with ties, missing values, a class level and both rules.
    from mwreach.coverage.interference import NeighbourLimit

    rng = np.random.default_rng(11)
    for _ in range(150):
        n, p = int(rng.integers(0, 7)), int(rng.integers(1, 30))
        others = rng.uniform(20.0, 60.0, (n, p))
        prop = rng.uniform(10.0, 60.0, p)
        if rng.random() < 0.3:  # ties between the proposal and the others
            others, prop = np.round(others / 3) * 3, np.round(prop / 3) * 3
        others[rng.random((n, p)) < 0.1] = -np.inf
        z = np.zeros(p)
        lim = NeighbourLimit("N", z, z, z, z, z, np.zeros(p, bool), prop, others,
                             float(rng.choice([-np.inf, 40.0])), int(rng.choice([0, 25, 50])))
        lim = dataclasses.replace(lim, without_dbu=dataclasses.replace(
            lim, proposal_dbu=np.full(p, -np.inf)).limit_with())

        def raises(x):
            return bool(np.any(lim.limit_with(x) > lim.without_dbu + 1e-9))

        for x in rng.uniform(-40.0, 40.0, 8):
            assert bool(lim._raises_at()([x])[0]) == raises(x)
        lo, hi = -80.0, 80.0
        if raises(lo):
            want = lo
        elif not raises(hi):
            want = hi
        else:
            for _ in range(30):
                mid = 0.5 * (lo + hi)
                lo, hi = (lo, mid) if raises(mid) else (mid, hi)
            want = lo
        assert lim.entry_scale_db() == pytest.approx(want, abs=4e-5)  # dB, the search's step


def test_least_margin_rows_give_the_same_maximum_powers():
    # the site search keeps only each neighbour's point of least margin per check; the maximum
    # powers (and what limits them) must be those of the full set of rows, on the demo and at
    # two sites moved off it
    from mwreach.coverage.interference import NeighbourChecks

    spec = load_study(DEMO)
    checks = NeighbourChecks(spec, spec.interference)
    for dlat, dlon in ((0.0, 0.0), (0.2, -0.3), (-0.25, 0.15)):
        moved = spec.with_site(spec.station.lat + dlat, spec.station.lon + dlon)
        full = checks.assess(moved, night_service_too=False, received=False)
        light = checks.assess(moved, night_service_too=False, received=False, all_rows=False)
        assert light.max_power == full.max_power
        assert set(light.rows) <= set(full.rows)
        kinds = {(r.kind, r.neighbour) for r in full.rows}
        assert sorted((r.kind, r.neighbour) for r in light.rows) == sorted(kinds)
        for r in light.rows:  # the least margin of its neighbour and check
            assert r.margin_db == min(x.margin_db for x in full.rows
                                      if (x.kind, x.neighbour) == (r.kind, r.neighbour))


# --- the rules as their text says (47 CFR 73.21, 73.37) ---------------------------------------

def _class_a(spec, km, freq, p=50.0):
    lat, lon = _north_of_site(spec, km)
    return Neighbour("Clear", lat, lon, freq, p, p, Array.single(Tower(90.0)), station_class="A")


@pytest.mark.parametrize("freq, level_mv_m", [
    (1390.0, 0.1),  # 47 CFR 73.37(a): co-channel, class A's 0.1 mV/m contour (read)
    (1400.0, 0.5),  # 47 CFR 73.37(a): first adjacent, 0.5 mV/m for every class (read)
])
def test_class_a_day_contour_by_channel_offset(freq, level_mv_m):
    spec = _spec([])
    n = _class_a(spec, 400.0, freq)
    spec = _neighbour_at(spec, n)
    res = run_interference(spec, spec.interference)
    caused = [r for r in res.rows if r.kind == "day caused"]
    assert caused and {round(r.wanted_dbu, 6) for r in caused} == {
        round(float(mv_m_to_dbu(level_mv_m)), 6)}


def test_first_adjacent_class_a_limits_a_class_b_proposal_by_its_half_millivolt_contour():
    # the case: a class B proposal 400 km from a 50 kW first-adjacent class A station.
    # Protecting the 0.1 mV/m contour (the old reading) allowed about 30 dB less than the rule's
    # 0.5 mV/m contour; with the rule the neighbour allows more than class B's 50 kW maximum
    # (47 CFR 73.21(a)(2), read), so the class range is what limits
    spec = _spec([], station_class="B")
    n = _class_a(spec, 400.0, 1400.0)
    spec = _neighbour_at(spec, n)
    res = run_interference(spec, spec.interference)
    mp = res.max_power["day"]
    assert mp["check"] == "class range" and mp["max_power_kw"] == 50.0
    assert mp["neighbours_allow_kw"] > 50.0
    # the neighbours' limit alone: the caused margin at the present power, +10 log P ratio
    w = res.worst("day caused")
    allow = spec.station.power_day_kw * 10 ** (w.margin_db / 10)
    assert mp["neighbours_allow_kw"] == pytest.approx(allow, rel=1e-9)


def test_secondary_service_is_protected_co_channel_only():
    # 47 CFR 73.21(a)(1) (read): a class A station's secondary (sky-wave) service is protected
    # from the same channel only; on an adjacent channel its primary service is protected
    spec = _spec([])
    for freq, wanted_mv_m in ((1390.0, 0.5), (1400.0, 0.5)):
        n = _class_a(spec, 900.0, freq)
        sp = dataclasses.replace(spec, interference=dataclasses.replace(spec.interference,
                                                                        neighbours=(n,)))
        res = run_interference(sp, sp.interference)
        night = [r for r in res.rows if r.kind == "night caused"]
        assert night and {round(r.wanted_dbu, 6) for r in night} == {
            round(float(mv_m_to_dbu(wanted_mv_m)), 6)}
        # co-channel points lie on the 50 % sky-wave service contour, far beyond the ground
        # wave; adjacent-channel points on the night ground-wave contour, within ~200 km
        from mwreach.coverage.geodesy import inverse

        d = inverse(n.lat, n.lon, np.array([r.lat for r in night]),
                    np.array([r.lon for r in night]))[0]
        if freq == 1390.0:
            assert d.min() > 300.0
            assert not any("adjacent channel: at night" in x for x in res.notes)
        else:
            assert d.max() < 300.0
            assert any("primary service" in x and "73.21(a)(1)" in x for x in res.notes)


@pytest.mark.parametrize("klass, freq, period, top", [
    ("B", 1390.0, "day", 50.0),   # 47 CFR 73.21(a)(2) (read)
    ("B", 1610.0, "day", 10.0),   # 73.21(a)(2): 10 kW in 1605–1705 kHz (read)
    ("A", 1390.0, "day", 50.0),   # 73.21(a)(1) (read)
    ("C", 1390.0, "day", 1.0),    # 73.21(c) (from memory)
    ("D", 1390.0, "day", 50.0),   # 73.21(a)(3) (read)
])
def test_maximum_power_stays_in_the_class_range(klass, freq, period, top):
    spec = _spec([], station_class=klass)
    st = dataclasses.replace(spec.station, freq_khz=freq)
    far = Neighbour("Far", 10.0, -20.0, freq, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = dataclasses.replace(spec, station=st, interference=dataclasses.replace(
        spec.interference, neighbours=(far,)))
    mp = run_interference(spec, spec.interference).max_power[period]
    assert mp["check"] == "class range" and mp["max_power_kw"] == top
    assert "the top of the class" in describe_max_power(period, mp)


def test_class_d_night_power_stays_below_a_quarter_kilowatt_and_141_mv_m():
    # 73.21(a)(3) (read): at night below 0.25 kW and below an RMS field of 141 mV/m at 1 km
    spec = _spec([], station_class="D")
    far = Neighbour("Far", 10.0, -20.0, 1390.0, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = dataclasses.replace(spec, interference=dataclasses.replace(
        spec.interference, neighbours=(far,)))
    mp = run_interference(spec, spec.interference).max_power["night"]
    rms_1kw = spec.station.antenna.horizontal_summary(1.0)["rms_mv_m"]
    assert mp["max_power_kw"] == pytest.approx(min(0.25, (141.0 / rms_1kw) ** 2), rel=1e-12)
    assert mp["check"] == "class range"


def test_below_the_class_minimum_no_power_passes_and_the_rms_field_counts():
    # a co-channel neighbour so close that it allows only a few watts: class B's minimum is
    # 0.25 kW, or less with an RMS field of at least 141 mV/m (73.21(a)(2), read)
    spec = _spec([], station_class="B")
    lat, lon = _north_of_site(spec, 60.0)
    n = Neighbour("Close", lat, lon, 1390.0, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = _neighbour_at(spec, n)
    res = run_interference(spec, spec.interference)
    mp = res.max_power["day"]
    assert mp["passes"] is False and mp["max_power_kw"] == 0.0
    rms_1kw = spec.station.antenna.horizontal_summary(1.0)["rms_mv_m"]
    lo = min(0.25, (141.0 / rms_1kw) ** 2)
    assert mp["class_range_kw"] == pytest.approx([lo, 50.0])
    assert 0 < mp["neighbours_allow_kw"] < lo
    text = describe_max_power("day", mp)
    assert text.startswith("Maximum day power: no power in the class range") and "Close" in text


def test_a_site_inside_the_overlap_contour_passes_at_no_power():
    # a third-adjacent neighbour 3 km away: the site stands inside its 25 mV/m contour (the
    # overlap rule's, 73.37(a)), so every power of the proposal overlaps it
    spec = _spec([])
    lat, lon = _north_of_site(spec, 3.0)
    n = Neighbour("Next door", lat, lon, 1420.0, 1.0, 1.0, Array.single(Tower(90.0)))
    spec = _neighbour_at(spec, n)
    mp = run_interference(spec, spec.interference).max_power["day"]
    assert mp["max_power_kw"] == 0.0 and mp["passes"] is False
    assert "no power passes: the site is inside" in describe_max_power("day", mp)


@pytest.mark.parametrize("klass, level", [("B", 2.5), ("C", 4.0), ("T", 0.5)])
def test_the_proposals_night_service_is_protected_to_its_class_level(klass, level):
    # with no interferer the night limit is the class level (B 2.5, C 4 mV/m; 47 CFR 73.182,
    # from memory), or the [night] floor for a class without one
    spec = _spec([], floor=0.5, station_class=klass)
    res = run_interference(spec, spec.interference)
    assert np.allclose(res.night.limit_mv_m, level, rtol=1e-12)


def _neighbour_at(spec, n):
    return dataclasses.replace(spec, interference=dataclasses.replace(spec.interference,
                                                                      neighbours=(n,)))


def _at_power(spec, period, kw):
    field = "power_day_kw" if period == "day" else "power_night_kw"
    return dataclasses.replace(spec, station=dataclasses.replace(spec.station, **{field: kw}))


@pytest.mark.parametrize("period, freq, place", [
    ("day", 1390.0, (39.3, -47.0)),    # co-channel, by day: 26 dB on its 0.5 mV/m contour
    ("day", 1400.0, (38.9, -46.6)),    # first adjacent, by day: 6 dB on its 0.5 mV/m contour
    ("night", 1390.0, ("A", 900.0)),   # co-channel class A: its 50 % sky-wave contour
    ("night", 1400.0, ("A", 100.0)),   # first-adjacent class A: its night ground-wave contour
])
def test_maximum_power_limited_by_caused_interference_gives_zero_margin_when_rerun(
        period, freq, place):
    # the caused field scales with sqrt(P) (47 CFR 73.190 for sky wave; ground wave linear in
    # the field at 1 km), so the worst caused margin falls by 10·log10(P/P0): re-running the
    # whole study at the reported maximum must give a worst margin of 0 dB, and 0.1 dB more
    # power must fail the check
    spec = _spec([])
    if place[0] == "A":
        n = _class_a(spec, place[1], freq)
    else:
        n = _nb("N", freq, lat=place[0], lon=place[1], p=1.0)
    spec = _neighbour_at(spec, n)
    kind = f"{period} caused"
    mp = run_interference(spec, spec.interference).max_power[period]
    assert mp["check"] == kind
    at_max = _at_power(spec, period, mp["max_power_kw"])
    w = run_interference(at_max, at_max.interference).worst(kind)
    # 0.01 dB: night contours move with the power (iterated to 0.01 dB); by day exact
    assert w.margin_db == pytest.approx(0.0, abs=0.01)
    more = _at_power(spec, period, mp["max_power_kw"] * 10 ** 0.01)
    assert run_interference(more, more.interference).worst(kind).margin_db == pytest.approx(
        -0.1, abs=0.01)  # dB


@pytest.mark.parametrize("freq, level_mv_m", [
    (1410.0, 5.0),   # second adjacent above: 5 mV/m against 5 mV/m (47 CFR 73.37(a), read)
    (1370.0, 5.0),   # second adjacent below
    (1420.0, 25.0),  # third adjacent: 25 mV/m against 25 mV/m (47 CFR 73.37(a), read)
])
def test_overlap_uses_each_stations_own_contour_at_its_own_power(freq, level_mv_m):
    # the proposal at 1 kW with a 90° tower, the neighbour at 10 kW with a 120° tower: the two
    # contour radii differ by a factor near 2, so using one station's power, tower or level for
    # both, or the other offset's level, changes the lens; the neighbour sits on the rim of the
    # larger circle (d = r2). Measured polygon error 3e-4 (2° radials): tolerance 3e-3
    from mwreach.coverage import groundwave as gw

    spec = _spec([])
    g = ground_class("land")
    r1 = gw.model(1390.0, g, spec.earth_k).distance_to_field_km(
        level_mv_m, float(spec.station.antenna.field_mv_m(0.0, 0.0, spec.station.power_day_kw)))
    ant = Array.single(Tower(120.0))
    r2 = gw.model(freq, g, spec.earth_k).distance_to_field_km(
        level_mv_m, float(ant.field_mv_m(0.0, 0.0, 10.0)))
    assert r2 > 1.5 * r1  # the levels are really apart
    d = r2
    lat, lon = _north_of_site(spec, d)
    spec = _neighbour_at(spec, Neighbour("N", lat, lon, freq, 10.0, 10.0, ant))
    (ov,) = run_interference(spec, spec.interference).overlaps
    lens = lens_km2(r1, r2, d)
    assert ov.area_km2 == pytest.approx(lens, rel=3e-3)
    assert ov.offset_channels == round((freq - 1390.0) / 10.0) and not ov.passed


@pytest.mark.parametrize("plan, period, offset, ratio_db, source", [
    # each row of each plan against its source, value written here from the source itself
    ("us", "day", 0, 26.0, "73.37"),      # 47 CFR 73.37(a) (read): 0.025 vs 0.5 mV/m, 20:1
    ("us", "day", 1, 6.0, "73.37"),       # 47 CFR 73.37(a), 73.183(c) (read): 0.25 vs 0.5, 2:1
    ("us", "night", 0, 26.0, "73.37"),    # the same pairs at night (73.182, from memory)
    ("us", "night", 1, 6.0, "73.37"),     # (73.182, from memory)
    ("region2", "day", 0, 26.0, "BS.560"),    # ITU-R BS.560-4 §1 Note 2 (read): 26 dB
    ("region2", "night", 0, 26.0, "BS.560"),  # ground wave and sky wave alike (same note)
    ("region2", "day", 1, 0.0, "Rio"),    # Rio de Janeiro 1981, first adjacent (from memory)
    ("region2", "night", 1, 0.0, "Rio"),  # (from memory)
    ("regions-1-3", "day", 0, 30.0, "Geneva 1975"),    # Geneva 1975 co-channel (from memory)
    ("regions-1-3", "night", 0, 30.0, "Geneva 1975"),  # (from memory)
    ("regions-1-3", "day", 1, 0.0, "Geneva 1975"),     # 9 kHz spacing (from memory)
    ("regions-1-3", "night", 1, 0.0, "Geneva 1975"),   # (from memory)
])
def test_plan_tables_row_by_row(plan, period, offset, ratio_db, source):
    from mwreach.coverage.classes import PROTECTION_PLANS

    row = PROTECTION_PLANS[plan]["ratios"][(period, offset)]
    assert row[0] == ratio_db and source in row[1]
    # and what a study file with that plan gets
    from mwreach.coverage.inputs import protection_from_table

    table = protection_from_table({"plan": plan}, "test")
    assert table.ratio_db(period, offset)[0] == ratio_db
    assert table.ratio_db(period, -offset)[0] == ratio_db  # below as above
    # and the raster the plan's offsets count in: 10 kHz in the Americas, 9 kHz elsewhere
    # (ITU Radio Regulations channelling; common practice, no published source here)
    assert PROTECTION_PLANS[plan]["raster_khz"] == (9.0 if plan == "regions-1-3" else 10.0)


def test_a_neighbours_night_limit_takes_ratios_by_offset_from_that_neighbour():
    # the proposal is on 1390 kHz; N and O both on 1400 kHz, O 7° north of N. In N's own night
    # limit O is co-channel (26 dB, 47 CFR 73.37(a) pairs), although O is first adjacent (6 dB)
    # to the proposal: its product is O's 10 % sky wave (47 CFR 73.190 Formula 2, on the rule's
    # sphere) plus 26 dB at every point of N's night contour
    spec = _spec([])
    nlat, nlon = _north_of_site(spec, 120.0)
    n = Neighbour("N", nlat, nlon, 1400.0, 1.0, 1.0, Array.single(Tower(90.0)))
    o = Neighbour("O", nlat + 7.0, nlon, 1400.0, 5.0, 5.0, Array.single(Tower(90.0)))
    spec = dataclasses.replace(spec, interference=dataclasses.replace(
        spec.interference, neighbours=(n, o)))
    lim = next(x for x in run_interference(spec, spec.interference).neighbour_limits
               if x.neighbour == "N")
    path = sky_path(o.lat, o.lon, lim.lat, lim.lon, geometry="cfr")
    u = sky_field_dbu(path, o.antenna.field_mv_m(path.azimuth_deg, path.departure_deg,
                                                o.power_night_kw), "cfr", 10)
    np.testing.assert_allclose(lim.others_dbu[0] - u, 26.0, atol=1e-6)  # dB, same formulas
    # the proposal's own product in N's limit uses its offset to N: first adjacent, 6 dB
    pp = sky_path(spec.station.lat, spec.station.lon, lim.lat, lim.lon, geometry="cfr")
    st = spec.station
    up = sky_field_dbu(pp, st.antenna.field_mv_m(pp.azimuth_deg, pp.departure_deg,
                                                 st.power_night_kw), "cfr", 10)
    from mwreach.coverage.interference import point_ground_dbu

    gp = point_ground_dbu(st.freq_khz, spec.ground, st.lat, st.lon, st.antenna,
                          st.power_night_kw, lim.lat, lim.lon)
    # the night interfering field is the larger of sky wave and ground wave (docs §5)
    np.testing.assert_allclose(lim.proposal_dbu - np.maximum(up, gp), 6.0, atol=0.01)  # dB


def test_class_a_sky_wave_service_contour_is_found_on_the_rules_sphere():
    # a class A station's 0.5 mV/m 50 % sky-wave contour (its protected night service): at each
    # point the 50 % field on 47 CFR 73.190's own sphere (Eqs. 4–5, Formula 1) is 0.5 mV/m.
    # Measured: 4e-4 dB from the 10 km interpolation; the same points on WGS84 geodesics are
    # up to 0.04 dB off, so 0.002 dB tells the two apart
    from mwreach.coverage.interference import skywave_service_points

    spec = _spec([])
    n = _class_a(spec, 900.0, 1390.0)
    _, d, lat, lon = skywave_service_points(n, 0.5, np.arange(0.0, 360.0, 30.0), NightSettings())
    assert d.size == 12 and d.min() > 400.0  # km: a sky-wave contour, far beyond ground wave
    path = sky_path(n.lat, n.lon, lat, lon, geometry="cfr")
    u = sky_field_dbu(path, n.antenna.field_mv_m(path.azimuth_deg, path.departure_deg,
                                                n.power_night_kw), "cfr", 50)
    np.testing.assert_allclose(u, float(mv_m_to_dbu(0.5)), atol=0.002)  # dB


@pytest.mark.parametrize("klass, level_mv_m", [
    ("A", 0.1),  # 47 CFR 73.37(a) (read): co-channel, class A's 0.1 mV/m contour
    ("B", 0.5),  # 47 CFR 73.37(a) (read): other classes' 0.5 mV/m contour
    ("C", 0.5),  # (read, the same row)
    ("D", 0.5),  # (read, the same row)
])
def test_each_class_is_protected_by_day_at_its_own_level(klass, level_mv_m):
    # behaviour, not the constants table: a co-channel neighbour of each class 300 km away;
    # every day-caused check sits on its protected contour at the class's level
    spec = _spec([])
    lat, lon = _north_of_site(spec, 300.0)
    n = Neighbour("N", lat, lon, 1390.0, 5.0, 5.0, Array.single(Tower(90.0)), station_class=klass)
    res = run_interference(_neighbour_at(spec, n), _neighbour_at(spec, n).interference)
    caused = [r for r in res.rows if r.kind == "day caused"]
    assert caused and {round(r.wanted_dbu, 6) for r in caused} == {
        round(float(mv_m_to_dbu(level_mv_m)), 6)}
    # and the points are where the neighbour's own ground wave is at that level
    from mwreach.coverage.interference import point_ground_dbu

    own = point_ground_dbu(1390.0, spec.ground, n.lat, n.lon, n.antenna, 5.0,
                           np.array([r.lat for r in caused]), np.array([r.lon for r in caused]))
    np.testing.assert_allclose(own, float(mv_m_to_dbu(level_mv_m)), atol=0.05)  # dB, 0.5 km grid


def test_the_demo_passes_its_overlap_check_below_its_maximum_day_power():
    # the README's walkthrough: the demo fails the third-adjacent overlap with Kestrel Point
    # Radio at 1 kW by day; just below the reported maximum day power the contours no longer
    # overlap, and just above they do
    spec = load_study(DEMO)
    res = run_interference(spec, spec.interference)
    ov = next(o for o in res.overlaps if o.neighbour == "Kestrel Point Radio")
    assert not ov.passed and 5.0 < ov.area_km2 < 20.0  # km², "about 10 km²"
    mp = res.max_power["day"]
    assert mp["limiting_neighbour"] == "Kestrel Point Radio" and 0.5 < mp["max_power_kw"] < 0.6
    for factor, passes in ((0.97, True), (1.03, False)):
        at = _at_power(spec, "day", mp["max_power_kw"] * factor)
        ov = next(o for o in run_interference(at, at.interference).overlaps
                  if o.neighbour == "Kestrel Point Radio")
        assert ov.passed is passes, factor


# --- carriers off the raster --------------------------------------------------------------------

def test_relative_curve_rows_and_interpolation():
    from mwreach.coverage.classes import RELATIVE_RF_CURVE, relative_rf_db

    # the curve's rows are ITU-R BS.560-4 §2 Figure 1 values recalled from memory (the figure
    # was not found in the stored texts), so this checks the shape the code relies on, not the
    # figure: 0 dB at the same carrier, falling monotonically with spacing
    khz = [r[0] for r in RELATIVE_RF_CURVE]
    db = [r[1] for r in RELATIVE_RF_CURVE]
    assert RELATIVE_RF_CURVE[0] == (0.0, 0.0)
    assert all(b < a for a, b in zip(db, db[1:])) and all(b > a for a, b in zip(khz, khz[1:]))
    # straight lines between rows, either sign of spacing, nothing past the last row
    assert relative_rf_db(4.5) == pytest.approx((db[4] + db[5]) / 2, abs=1e-12)
    assert relative_rf_db(-4.5) == relative_rf_db(4.5)
    assert relative_rf_db(khz[-1] + 0.5) is None


@pytest.mark.parametrize("freq, expected", [
    # on the raster the plan's rows (47 CFR 73.37(a) (read): 26 dB co-channel, 6 dB first
    # adjacent); between them the curve's shape scaled to meet both ends:
    # R = 26 + A(Δf)·(26 − 6)/(0 − A(10 kHz))
    (1390.0, 26.0), (1400.0, 6.0),
    (1391.0, 26.0 - 1.5 * 20.0 / 31.0), (1395.0, 26.0 - 14.0 * 20.0 / 31.0),
    (1381.0, 26.0 - 28.0 * 20.0 / 31.0),
    # past the first adjacent channel the ratio falls as the curve does from 10 kHz
    (1405.0, 6.0 + (-45.0 + 31.0)),
])
def test_ratio_at_any_carrier_spacing(freq, expected):
    prot = ProtectionTable()
    r = prot.ratio_db("night", prot.offset(1390.0, freq))
    assert r[0] == pytest.approx(expected, abs=0.001)  # dB: the ratio is rounded to 0.001 dB
    if freq % 10:
        assert "BS.560" in r[1] and "from memory" in r[1]  # the source stays beside the value


def test_ratio_is_continuous_across_the_raster_and_ends_with_the_curve():
    prot = ProtectionTable()
    spacing = np.arange(0.0, 19.99, 0.05)
    r = np.array([prot.ratio_db("day", prot.offset(1000.0, 1000.0 + s))[0] for s in spacing])
    assert np.all(np.diff(r) <= 1e-9)  # never rises with spacing
    assert np.max(np.abs(np.diff(r))) < 0.3  # dB per 0.05 kHz: no jump at 10 kHz (6 dB)
    assert prot.ratio_db("day", prot.offset(1000.0, 1020.5)) is None  # past the curve


def test_neighbour_off_the_raster_is_protected_not_dropped():
    on = _spec([_nb("A", 1390.0)], floor=0.01)
    off = _spec([_nb("A", 1391.0)], floor=0.01)
    r_on = run_interference(on, on.interference)
    r_off = run_interference(off, off.interference)
    assert r_off.rows and {r.neighbour for r in r_off.rows} == {"A"}
    assert all(r.offset_channels == pytest.approx(0.1) for r in r_off.rows)
    ratio = ProtectionTable().ratio_db("night", 0.1)[0]
    # the same paths and fields as co-channel, only the ratio differs (26 dB against ~25 dB)
    a = {(r.kind, r.bearing_deg): r.margin_db for r in r_on.rows}
    b = {(r.kind, r.bearing_deg): r.margin_db for r in r_off.rows}
    common = [k for k in a if k in b and k[0] != "night RSS"]
    assert common
    for k in common:
        # dB: the neighbour's fields at 1391 kHz differ from those at 1390 kHz by a few
        # hundredths of a dB (ground-wave attenuation grows with frequency)
        assert b[k] - a[k] == pytest.approx(26.0 - ratio, abs=0.05)
    assert any("off the 10 kHz raster" in n and "A (1391 kHz" in n for n in r_off.notes)


@pytest.mark.parametrize("freq, plan, text", [
    (1391, "us", "freq_khz 1391 is off the 10 kHz raster of the 'us' protection plan: the "
                 "nearest channels are 1390 and 1400 kHz"),
    (1390, "regions-1-3", "freq_khz 1390 is off the 9 kHz raster of the 'regions-1-3' "
                          "protection plan: the nearest channels are 1386 and 1395 kHz"),
])
def test_proposal_off_the_raster_is_refused_in_one_line(tmp_path, freq, plan, text):
    import subprocess
    import sys
    import shutil

    for f in DEMO.parent.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    study = tmp_path / "quellmoor.toml"
    s = study.read_text(encoding="utf-8").replace("freq_khz = 1390\npower_day_kw",
                                                  f"freq_khz = {freq}\npower_day_kw")
    s = s.replace("raster_khz = 10\n", f'plan = "{plan}"\n')
    study.write_text(s, encoding="utf-8")
    before = study.read_bytes()
    p = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "run", str(study), "-o",
                        str(tmp_path / "out")], capture_output=True, text=True)
    assert p.returncode == 2
    lines = p.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0] and str(study) in lines[0]
    assert study.read_bytes() == before and not (tmp_path / "out").exists()
