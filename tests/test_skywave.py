"""Night-time sky wave: 47 CFR 73.190 and ITU-R P.1147 (constants from memory)."""

import json

import numpy as np
import pytest

from mwreach.coverage import cli
from mwreach.coverage import skywave as sw


@pytest.mark.parametrize(
    "d_km, phi, expected",
    # docs/methods.md §4 [calc] from 47 CFR 73.190 Formula 1: Φ_M = 40°: 41.87 (250 km),
    # 27.46 (1000 km), 11.00 (3000 km); Φ_M = 50°: 23.88 at 1000 km
    [(250.0, 40.0, 41.87), (1000.0, 40.0, 27.46), (3000.0, 40.0, 11.00), (1000.0, 50.0, 23.88)],
)
def test_cfr_formula_check_values(d_km, phi, expected):
    assert float(sw.cfr_field_dbu(d_km, phi, 50)) == pytest.approx(expected, abs=0.005)


def test_geomagnetic_latitude():
    # docs/methods.md §4 [calc]: Φ_M(40° N, 90° W) = 50.58°; the dipole pole itself is at 90°
    assert float(sw.geomagnetic_lat_deg(40.0, -90.0)) == pytest.approx(50.58, abs=0.005)
    assert float(sw.geomagnetic_lat_deg(78.5, -69.0)) == pytest.approx(90.0, abs=1e-9)
    assert float(sw.geomagnetic_lat_deg(-78.5, 111.0)) == pytest.approx(-90.0, abs=1e-9)


def test_slant_distance_at_zero_is_200_km():
    # 47 CFR 73.190: D = sqrt(40000 + d²)
    assert float(sw.slant_km(0.0)) == 200.0


@pytest.mark.parametrize("phi, delta", [(30.0, 6.0), (50.0, 8.0), (70.0, 10.0), (-50.0, 8.0)])
def test_ten_percent_correction(phi, delta):
    # 47 CFR 73.190 Formula 2 (docs/methods.md §4): 6 dB below 40°, 0.2|Φ| − 2 for 40–60°, 10 above
    assert float(sw.ten_percent_excess_db(phi)) == pytest.approx(delta)
    assert float(sw.cfr_field_dbu(800.0, phi, 10) - sw.cfr_field_dbu(800.0, phi, 50)) == pytest.approx(delta)


def test_latitude_cap_at_60_degrees():
    # 47 CFR 73.190: Φ_M is evaluated at 60° when |Φ_M| > 60°
    assert float(sw.cfr_field_dbu(900.0, 75.0)) == pytest.approx(float(sw.cfr_field_dbu(900.0, 60.0)))
    assert float(sw.cfr_field_dbu(900.0, -75.0)) == pytest.approx(float(sw.cfr_field_dbu(900.0, 60.0)))


@pytest.mark.parametrize(
    "d_km, expected",
    # docs/methods.md §4 [calc]: one hop off 100 km: 63.0° (100 km), 20.5° (500), 9.0° (1000), 1.2° (2000)
    [(100.0, 63.0), (500.0, 20.5), (1000.0, 9.0), (2000.0, 1.2)],
)
def test_departure_angles(d_km, expected):
    assert float(sw.departure_deg(d_km, 1, 100.0)) == pytest.approx(expected, abs=0.05)


def test_hops():
    assert list(sw.auto_hops([100.0, 2200.0, 2300.0, 6000.0])) == [1, 1, 2, 3]
    assert float(sw.departure_deg(0.0)) == pytest.approx(90.0)


@pytest.mark.parametrize("a, b", [((10.0, 179.5), (12.0, -175.0)), ((-5.0, 20.0), (8.0, 25.0))])
def test_paths_across_date_line_and_equator_are_symmetric(a, b):
    fwd = sw.sky_path(*a, *b)
    rev = sw.sky_path(*b, *a)
    assert float(fwd.distance_km) == pytest.approx(float(rev.distance_km), abs=1e-6)
    assert float(fwd.geomagnetic_lat_deg) == pytest.approx(float(rev.geomagnetic_lat_deg), abs=1e-6)
    f1 = sw.sky_field_dbu(fwd, 100.0, "cfr", 10)
    f2 = sw.sky_field_dbu(rev, 100.0, "cfr", 10)
    assert float(f1) == pytest.approx(float(f2), abs=1e-6)


def test_itu_terms_by_hand():
    # ITU-R P.1147 §2 structure (constants from memory, ITU_CONSTANTS): V = 0, G_S = 0, L_p = 0
    d, f, phi = 1000.0, 1000.0, 45.0
    p = np.sqrt(d**2 + 40000)
    k = 3.2 + 0.19 * f**0.4 * np.tan(np.radians(phi + 3)) ** 2
    expected = 110.0 - 20 * np.log10(p) - k * p / 1000  # Region 2, A = 110
    assert float(sw.itu_field_dbu(d, f, phi, region=2)) == pytest.approx(expected, abs=1e-9)
    assert float(sw.itu_field_dbu(d, f, phi, region=1)) == pytest.approx(expected - 3.0, abs=1e-9)
    # sunspot term: k_R = k + b·R/100 with b = 4 in North America
    na = float(sw.itu_field_dbu(d, f, phi, solar="north-america", sunspot=100))
    assert na == pytest.approx(expected - 4 * p / 1000, abs=1e-9)


def test_doubling_power_raises_sky_wave_3_01_db():
    path = sw.sky_path(38.4, -46.2, 42.0, -51.0)
    e1 = sw.sky_field_dbu(path, 300.0, "cfr", 10)
    e2 = sw.sky_field_dbu(path, 300.0 * np.sqrt(2), "cfr", 10)
    assert float(e2 - e1) == pytest.approx(3.0103, abs=1e-4)


def test_out_of_range_distances_are_refused():
    with pytest.raises(ValueError, match="outside the ITU-R P.1147 sky-wave range 50–12000 km"):
        sw.itu_field_dbu(20.0, 1000.0, 40.0)
    with pytest.raises(ValueError, match="outside the 47 CFR 73.190 sky-wave range"):
        sw.cfr_field_dbu(9000.0, 40.0)
    with pytest.raises(ValueError, match="freq_khz"):
        sw.itu_field_dbu(500.0, 100.0, 40.0)


def _azimuth_to_pole_sphere(lat, lon):
    # azimuth of the great circle toward the dipole pole (78.5° N, 69° W), spherical trigonometry
    p1, p2 = np.radians(lat), np.radians(78.5)
    dl = np.radians(-69.0 - lon)
    return np.degrees(np.arctan2(np.sin(dl) * np.cos(p2),
                                 np.cos(p1) * np.sin(p2) - np.sin(p1) * np.cos(p2) * np.cos(dl)))


@pytest.mark.parametrize("lat, lon", [(-5.0, -60.0), (8.0, -75.0), (-15.0, -40.0)])
def test_coupling_loss_by_hand(lat, lon):
    # ITU-R P.1147 (from memory): L_p = 180/sqrt(36 + θ² + I²) − 2 dB for |I| ≤ 45°, θ the path
    # azimuth from magnetic east–west, I the magnetic dip; a centred dipole has tan I = 2 tan Φ
    phi = float(sw.geomagnetic_lat_deg(lat, lon))
    dip = np.degrees(np.arctan(2 * np.tan(np.radians(phi))))
    assert abs(dip) <= 45.0
    east = _azimuth_to_pole_sphere(lat, lon) + 90.0  # magnetic east: θ = 0
    expect_ew = 180 / np.sqrt(36 + dip**2) - 2
    # 0.01 dB: the tool takes the pole azimuth on the ellipsoid; the sphere differs by < 0.2°,
    # which changes θ² by < 0.04 deg² here
    assert float(sw.coupling_loss_db(lat, lon, east)) == pytest.approx(expect_ew, abs=0.01)
    assert float(sw.coupling_loss_db(lat, lon, east + 180.0)) == pytest.approx(expect_ew, abs=0.01)
    # 30° off magnetic east–west
    expect_30 = max(180 / np.sqrt(36 + 30.0**2 + dip**2) - 2, 0.0)
    assert float(sw.coupling_loss_db(lat, lon, east + 30.0)) == pytest.approx(expect_30, abs=0.02)
    # along magnetic north–south θ = 90°: 180/sqrt(36 + 8100 + I²) − 2 < 0, so no loss
    assert float(sw.coupling_loss_db(lat, lon, east - 90.0)) == 0.0


def test_coupling_loss_only_at_low_dip():
    # ITU-R P.1147 (from memory): L_p applies for |I| ≤ 45° only
    assert float(sw.coupling_loss_db(60.0, -80.0, 90.0)) == 0.0
    lp = sw.coupling_loss_db(0.0, -20.0, np.arange(0.0, 360.0, 30.0))
    assert np.all(lp > 0) and np.all(lp <= 180 / 6 - 2 + 1e-9)


def test_cli_sky_json(capsys):
    assert cli.main(["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "40", "-78",
                     "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    for key in ("distance_km", "slant_km", "midpoint_geomagnetic_lat_deg", "departure_deg",
                "field_50_dbu", "field_10_dbu"):
        assert key in out
    assert out["e1km_mv_m"] == 100.0
    # against the rule written out by hand, not the command's own numbers
    d_km, phi, f50 = _by_hand((40.0, -90.0), (40.0, -78.0))
    assert out["distance_km"] == pytest.approx(d_km, abs=1e-6)  # km
    assert out["midpoint_geomagnetic_lat_deg"] == pytest.approx(phi, abs=1e-9)  # deg
    assert out["field_50_dbu"] == pytest.approx(f50, abs=1e-9)  # dB
    assert cli.main(["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "40.1", "-90",
                     "--method", "itu"]) == 2
    assert "the ITU-R P.1147 method covers 50–12000 km" in capsys.readouterr().err


def test_itu_latitude_cap():
    # ITU_CONSTANTS["phi_cap_deg"] (from memory): k is evaluated at 60° above 60°
    assert float(sw.itu_field_dbu(1500.0, 1000.0, 75.0)) == pytest.approx(
        float(sw.itu_field_dbu(1500.0, 1000.0, 60.0)))


def _by_hand(tx, rx):
    """47 CFR 73.190(b) written out by hand: d° by Eq. 5 [pub], d = 111.18·d° km (Eq. 4)
    [from memory], Φ_M by Eq. 3 [pub] at the middle of the great-circle arc, and Formula 1
    [pub] for 100 mV/m at 1 km: 97.5 − 20 log D − (2π + 4.95 tan²Φ)·sqrt(D/1000)."""
    at, bt, ar, br = map(np.radians, (tx[0], tx[1], rx[0], rx[1]))
    d_deg = np.degrees(np.arccos(np.sin(at) * np.sin(ar)
                                 + np.cos(at) * np.cos(ar) * np.cos(br - bt)))
    d_km = 111.18 * d_deg
    # midpoint: go half the arc from T along the initial great-circle course
    course = np.arctan2(np.sin(br - bt) * np.cos(ar),
                        np.cos(at) * np.sin(ar) - np.sin(at) * np.cos(ar) * np.cos(br - bt))
    half = np.radians(d_deg / 2)
    am = np.arcsin(np.sin(at) * np.cos(half) + np.cos(at) * np.sin(half) * np.cos(course))
    bm = bt + np.arctan2(np.sin(course) * np.sin(half) * np.cos(at),
                         np.cos(half) - np.sin(at) * np.sin(am))
    phi = np.degrees(np.arcsin(np.sin(am) * np.sin(np.radians(78.5))
                               + np.cos(am) * np.cos(np.radians(78.5))
                               * np.cos(np.radians(69.0) + bm)))
    slant = np.sqrt(40000.0 + d_km**2)
    t2 = np.tan(np.radians(min(abs(phi), 60.0))) ** 2
    f50 = 97.5 - 20 * np.log10(slant) - (2 * np.pi + 4.95 * t2) * np.sqrt(slant / 1000.0)
    return d_km, phi, f50


@pytest.mark.parametrize("tx, rx", [((38.40, -46.20), (42.2312, -51.51)),
                                    ((40.0, -90.0), (30.0, -100.0)),
                                    ((-20.0, 179.5), (-25.0, -175.0)),  # across the antimeridian
                                    ((10.0, 20.0), (10.0, 21.0))])
def test_cfr_path_matches_a_hand_computation_from_the_published_equations(tx, rx):
    d_km, phi, _ = _by_hand(tx, rx)
    path = sw.sky_path(tx[0], tx[1], rx[0], rx[1], geometry="cfr")
    assert float(path.distance_km) == pytest.approx(d_km, abs=1e-6)  # km
    assert float(path.geomagnetic_lat_deg) == pytest.approx(phi, abs=1e-9)  # deg
    # and the field is Formula 1 at that distance and latitude
    assert float(sw.sky_field_dbu(path, 100.0, "cfr", 50)) == pytest.approx(
        float(sw.cfr_field_dbu(d_km, phi, 50)), abs=1e-9)


def test_departure_angle_has_no_jump_at_the_grazing_distance():
    # one hop off a 100 km layer grazes the ground near 2245 km (docs/methods.md §4.3): the
    # angle falls smoothly to 0° there and stays at 0°; it does not jump to a two-hop angle
    d = np.linspace(2000.0, 2600.0, 601)
    dep = sw.sky_path(40.0, -90.0, *_points_at(40.0, -90.0, d), geometry="cfr").departure_deg
    assert np.all(np.diff(dep) <= 1e-9) and dep.min() == 0.0 and dep.max() < 2.0
    assert np.max(np.abs(np.diff(dep))) < 0.05  # deg per km step: continuous


def _points_at(lat, lon, d_km):
    from mwreach.coverage.geodesy import fwd_points

    return fwd_points(lat, lon, np.full(np.shape(d_km), 90.0), d_km)


@pytest.mark.parametrize("tx, rx", [((40.0, -100.0), (45.0, -80.0)), ((45.0, -80.0), (40.0, -100.0)),
                                    ((10.0, 20.0), (-5.0, 60.0)), ((38.4, -46.2), (42.23, -51.51))])
def test_literal_eqs_6_7_agree_with_the_arc_middle_away_from_the_antimeridian(tx, rx):
    # 47 CFR 73.190(b) Eqs. 6–7 (form from memory; Note 3's k read): on paths that do not cross
    # 180° they are the middle of the great-circle arc, which the tool uses
    lit = sw.cfr_midpoint_literal(tx[0], tx[1], rx[0], rx[1])
    geo = sw.cfr_geometry(tx[0], tx[1], rx[0], rx[1])[3:]
    assert float(lit[0]) == pytest.approx(float(geo[0]), abs=1e-9)  # deg
    assert float(lit[1]) == pytest.approx(float(geo[1]), abs=1e-9)  # deg


def test_across_the_antimeridian_the_tool_keeps_the_arc_middle_not_the_literal_k():
    # 60° N 170° E to 55° N 160° W runs east across 180°, but b_R < b_T, so Note 3's k = 1 sends
    # the literal Eq. 7 west of the transmitter: 153.9° E instead of 173.9° W (the arc's middle)
    tx, rx = (60.0, 170.0), (55.0, -160.0)
    lit_lat, lit_lon = sw.cfr_midpoint_literal(*tx, *rx)
    path = sw.sky_path(*tx, *rx, geometry="cfr")
    assert float(path.mid_lat) == pytest.approx(float(lit_lat), abs=1e-9)  # latitude agrees
    assert float(path.mid_lon) == pytest.approx(-173.948, abs=0.001)  # deg, the arc's middle
    assert float(lit_lon) == pytest.approx(153.948, abs=0.001)  # deg, the literal reading
    # the two readings differ in Φ_M and so in the 50 % field; the tool's field is the arc's
    phi_lit = float(sw.geomagnetic_lat_deg(lit_lat, lit_lon))
    d = float(path.distance_km)
    assert float(sw.sky_field_dbu(path, 100.0, "cfr", 50)) == pytest.approx(
        float(sw.cfr_field_dbu(d, float(path.geomagnetic_lat_deg), 50)), abs=1e-9)
    assert abs(float(sw.cfr_field_dbu(d, phi_lit, 50))
               - float(sw.cfr_field_dbu(d, float(path.geomagnetic_lat_deg), 50))) > 1.0  # dB


def test_an_explicit_hop_count_sets_the_departure_angle(capsys):
    # two equal hops off 100 km over 1800 km: tan θ = (cos ψ − a/(a + h))/sin ψ with
    # ψ = d/(2·a·2), a = 6370 km (docs/methods.md §4.3, geometry by hand): about 11.3°,
    # against about 2.1° for one hop
    assert cli.main(["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "40", "-69",
                     "--hops", "2", "--json"]) == 0
    two = json.loads(capsys.readouterr().out)
    assert cli.main(["sky", "--freq-khz", "1000", "--from", "40", "-90", "--to", "40", "-69",
                     "--json"]) == 0
    one = json.loads(capsys.readouterr().out)
    a, h = 6370.0, 100.0
    for out, n in ((two, 2), (one, 1)):
        psi = out["distance_km"] / (2 * a * n)
        want = np.degrees(np.arctan2(np.cos(psi) - a / (a + h), np.sin(psi)))
        assert out["departure_deg"] == pytest.approx(want, abs=1e-9)  # deg
    assert two["departure_deg"] - one["departure_deg"] > 5.0  # deg: the hop count matters
