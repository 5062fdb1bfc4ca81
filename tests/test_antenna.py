"""Towers and arrays: checks against handbook and standard values named beside each."""

import json

import numpy as np
import pytest

from mwreach.coverage import cli
from mwreach.coverage.antenna import (
    ETA0,
    Array,
    Element,
    Tower,
    electrical_deg,
    quarter_wave_m,
)
from mwreach.coverage.inputs import array_from_table, array_to_table


def test_short_monopole_gives_300_mv_m_for_1_kw():
    # ITU-R BS.561 / P.368 reference (docs/methods.md §0): 300 mV/m at 1 km for 1 kW
    e = Array.single(Tower(0.5)).horizontal_summary(1.0)["rms_mv_m"]
    assert e == pytest.approx(300.0, rel=0.005)


@pytest.mark.parametrize(
    "height, r_ohm, e_mv_m",
    [
        # Kraus, Antennas (from memory): 36.5 Ω (λ/4), 99.5 Ω (λ/2 at the loop);
        # docs/methods.md §3 [calc]: 313.8 and 380.3 mV/m at 1 km for 1 kW, lossless
        (90.0, 36.5, 313.8),
        (180.0, 99.5, 380.3),
    ],
)
def test_quarter_and_half_wave_towers(height, r_ohm, e_mv_m):
    t = Tower(height)
    assert t.radiation_resistance_ohm == pytest.approx(r_ohm, rel=0.005)
    assert Array.single(t).horizontal_summary(1.0)["rms_mv_m"] == pytest.approx(e_mv_m, rel=0.005)


def test_loss_resistance_one_ohm():
    # docs/methods.md §3 [calc]: λ/4 with 1 Ω loss at the loop, 309.6 mV/m (47 CFR 73.150 convention)
    e = Array.single(Tower(90.0, loss_ohm=1.0)).horizontal_summary(1.0)["rms_mv_m"]
    assert e == pytest.approx(309.6, rel=0.005)


def test_efficiency_scales_as_sqrt():
    full = Array.single(Tower(90.0)).k_mv_m(1.0)
    half = Array.single(Tower(90.0, efficiency=0.5)).k_mv_m(1.0)
    assert half / full == pytest.approx(np.sqrt(0.5), rel=1e-12)


@pytest.mark.parametrize(
    "g, elev, expected",
    # docs/methods.md §3 [calc] from the 47 CFR 73.160 vertical characteristic
    [(90.0, 30.0, 0.8165), (90.0, 45.0, 0.6279), (120.0, 30.0, 0.7698)],
)
def test_vertical_characteristic(g, elev, expected):
    assert Tower(g).vertical(elev) == pytest.approx(expected, abs=1e-4)


def test_vertical_characteristic_limits():
    t = Tower(90.0)
    assert t.vertical(0.0) == pytest.approx(1.0)
    assert t.vertical(90.0) == 0.0
    # a short tower approaches the short-monopole cos θ
    np.testing.assert_allclose(Tower(0.5).vertical([10, 40, 70]), np.cos(np.radians([10, 40, 70])),
                               rtol=1e-4)


# --- an independent reference: direct numerical integration of the assumed current ----------
# A tower of electrical height A [rad] with top loading B carries I(u) = I_loop·sin(A + B − u),
# u = k·z from 0 to A, mirrored in the perfectly conducting ground. Summing the current elements
# (scipy.integrate.quad, not the closed forms of coverage/antenna.py) gives the far field
#   E(θ) = (η0/2π)·(I_loop/r)·cos θ·∫0^A sin(A + B − u)·cos(u·sin θ) du   (θ elevation)
# and the radiated power P = (2π r²/η0)·∫0^{π/2} |E|² cos θ dθ, so R_loop = P / I_loop².
# The vertical characteristic of 47 CFR 73.160 (with top loading, 73.160(b)) is E(θ)/E(0).
ETA0_CODATA = 376.730313668  # Ω, CODATA 2018


def _ref_pattern(a_deg, b_deg, elev_deg):
    from scipy.integrate import quad

    a, b, th = np.radians(a_deg), np.radians(b_deg), np.radians(elev_deg)
    val = quad(lambda u: np.sin(a + b - u) * np.cos(u * np.sin(th)), 0.0, a,
               epsabs=1e-13, epsrel=1e-12)[0]
    return np.cos(th) * val  # field per I_loop, in units of (η0/2π)/r


def _ref_r_loop(a_deg, b_deg):
    from scipy.integrate import quad

    p = quad(lambda th: _ref_pattern(a_deg, b_deg, np.degrees(th)) ** 2 * np.cos(th), 0.0,
             np.pi / 2, epsabs=1e-13, epsrel=1e-11)[0]
    return ETA0_CODATA / (2 * np.pi) * p  # (η0/2π)²·2π/η0·∫ = (η0/2π)·∫


@pytest.mark.parametrize("a_deg, b_deg", [(90.0, 0.0), (60.0, 30.0), (45.0, 60.0), (120.0, 0.0),
                                          (170.0, 40.0), (30.0, 0.0)])
def test_vertical_characteristic_against_integrated_current(a_deg, b_deg):
    t = Tower(a_deg, top_loading_deg=b_deg)
    el = np.array([5.0, 20.0, 35.0, 50.0, 65.0, 80.0])
    ref = np.array([_ref_pattern(a_deg, b_deg, e) for e in el]) / _ref_pattern(a_deg, b_deg, 0.0)
    np.testing.assert_allclose(t.vertical(el), ref, atol=1e-9)


@pytest.mark.parametrize("a_deg, b_deg", [(90.0, 0.0), (180.0, 0.0), (60.0, 30.0), (30.0, 0.0),
                                          (45.0, 20.0)])
def test_radiation_resistance_against_integrated_current(a_deg, b_deg):
    t = Tower(a_deg, top_loading_deg=b_deg)
    r_loop = _ref_r_loop(a_deg, b_deg)
    # below 90° of total height the current maximum is at the base: R_base = R_loop / sin²(A+B)
    base = np.sin(np.radians(a_deg + b_deg)) ** 2 if a_deg + b_deg < 90.0 else 1.0
    # 1e-5 relative: both integrate smooth functions to ~1e-10; 60 Ω in place of η0/2π is 1.4e-3
    assert t.radiation_resistance_ohm == pytest.approx(r_loop / base, rel=1e-5)


@pytest.mark.parametrize("a_deg, b_deg, loss", [(45.0, 0.0, 3.0), (60.0, 20.0, 2.0),
                                                (90.0, 0.0, 1.0), (140.0, 0.0, 2.0)])
def test_field_with_loss_against_integrated_current(a_deg, b_deg, loss):
    # 1 kW into the antenna; loss resistance at the base for towers under 90° (where the
    # current is largest), else at the current loop (47 CFR 73.150's 1 Ω convention)
    r_loop = _ref_r_loop(a_deg, b_deg)
    base = np.sin(np.radians(a_deg + b_deg)) ** 2 if a_deg + b_deg < 90.0 else 1.0
    r_at = r_loop / base
    i_at = np.sqrt(1000.0 / (r_at + loss))  # current where R and the loss are referred
    i_loop = i_at / np.sqrt(base)
    e_mv_m = ETA0_CODATA / (2 * np.pi) * i_loop * _ref_pattern(a_deg, b_deg, 0.0)  # V/m at 1 m
    e = Array.single(Tower(a_deg, top_loading_deg=b_deg, loss_ohm=loss)).horizontal_summary(1.0)
    assert e["rms_mv_m"] == pytest.approx(e_mv_m, rel=1e-5)  # mV/m at 1 km = V/m at 1 m


def test_top_loading_raises_the_radiation_resistance_of_a_short_tower():
    # more current high up the tower (Kraus, Antennas, §5; common practice)
    assert Tower(60.0, top_loading_deg=30.0).radiation_resistance_ohm > Tower(60.0).radiation_resistance_ohm


def test_quarter_wave_heights():
    # docs/methods.md §3 [calc]: 138.8 m at 540 kHz, 74.9 m at 1000 kHz, 44.0 m at 1705 kHz;
    # towers of about 50–140 m across the band (common practice, no published source)
    np.testing.assert_allclose(quarter_wave_m([540, 1000, 1705]), [138.8, 74.9, 44.0], atol=0.06)
    assert electrical_deg(74.9481145, 1000) == pytest.approx(90.0, abs=1e-6)


def _cardioid(rotation=0.0):
    # tower 1 at the reference point, tower 2 λ/4 to the north lagging 90°
    return Array(
        (Element(Tower(90.0)), Element(Tower(90.0), 1.0, -90.0, 90.0, 0.0)),
        rotation_deg=rotation,
    )


def test_cardioid_null_toward_the_leading_tower_side():
    # two-element theory (Kraus, Antennas, arrays of two point sources): the null points from
    # the lagging tower through the leading one; here due south
    a = _cardioid()
    s = a.horizontal_summary(1.0, step_deg=0.5)
    assert s["min_azimuth_deg"] == pytest.approx(180.0, abs=0.25)
    assert s["min_mv_m"] < 1e-6 * s["max_mv_m"]
    assert s["max_azimuth_deg"] == pytest.approx(0.0, abs=0.25)
    # relative pattern |2 cos(45°(1 − cos φ))|: 1 + j... exact at 90°: sqrt(2)
    assert a.relative(90.0, 0.0) == pytest.approx(np.sqrt(2.0), rel=1e-12)


def test_in_phase_half_wave_spacing_has_nulls_along_the_line():
    a = Array((Element(Tower(90.0)), Element(Tower(90.0), 1.0, 0.0, 180.0, 60.0)))
    e = a.relative([60.0, 240.0, 150.0, 330.0], 0.0)
    assert e[0] < 1e-12 and e[1] < 1e-12
    assert e[2] == pytest.approx(2.0) and e[3] == pytest.approx(2.0)


def test_rotating_the_array_rotates_the_pattern():
    az = np.arange(0.0, 360.0, 1.0)
    base = _cardioid().relative(az, 20.0)
    turned = _cardioid(rotation=37.0).relative(az + 37.0, 20.0)
    np.testing.assert_allclose(turned, base, atol=1e-12)


def test_changing_the_reference_tower_changes_nothing_physical():
    az = np.arange(0.0, 360.0, 3.0)
    a = Array(
        (
            Element(Tower(90.0), 1.0, 0.0, 0.0, 0.0),
            Element(Tower(90.0), 0.7, 110.0, 120.0, 30.0),
            Element(Tower(90.0), 0.4, -40.0, 200.0, 100.0),
        )
    )
    # express the same towers relative to tower 2: positions, phases and ratios shift
    pos = [0, 120 * np.exp(1j * np.radians(90 - 30)), 200 * np.exp(1j * np.radians(90 - 100))]
    ref = pos[1]
    els = []
    for e, p in zip(a.elements, pos):
        d = p - ref
        spacing = abs(d)
        orient = (90 - np.degrees(np.angle(d))) % 360 if spacing > 1e-9 else 0.0
        els.append(Element(e.tower, e.field_ratio / 0.7, e.phase_deg - 110.0, spacing, orient))
    b = Array(tuple(els))
    np.testing.assert_allclose(b.field_mv_m(az, 15.0, 2.0), a.field_mv_m(az, 15.0, 2.0), rtol=1e-9)


def test_power_is_conserved():
    # the hemisphere integral of the scaled pattern equals the input power less losses;
    # brute-force 0.25° × 0.25° midpoint grid, independent of the J0 azimuth integration
    a = Array(
        (
            Element(Tower(100.0, loss_ohm=1.0), 1.0, 0.0, 0.0, 0.0),
            Element(Tower(100.0, loss_ohm=1.0), 0.8, 95.0, 100.0, 20.0),
        )
    )
    p_kw = 2.5
    az = np.radians(np.arange(0.125, 360, 0.25))
    el = np.radians(np.arange(0.125, 90, 0.25))
    e = a.field_mv_m(np.degrees(az)[None, :], np.degrees(el)[:, None], p_kw) * 1e-3  # V/m at 1 km
    p_rad = (1000.0**2 / ETA0) * np.sum(e**2 * np.cos(el)[:, None]) * np.radians(0.25) ** 2
    k = a.k_mv_m(p_kw)
    loss = sum((k * x.field_ratio / (60 * x.tower.horizon_factor)) ** 2 * 1.0 for x in a.elements)
    assert p_rad + loss == pytest.approx(p_kw * 1e3, rel=1e-4)


def test_normalisation_grid_converged():
    # doubling the elevation grid changes the field by < 0.01 dB (issue requirement)
    a = Array(tuple(Element(Tower(120.0), 1.0, 30.0 * i, 150.0 * i, 70.0) for i in range(6)))
    k1 = a.k_mv_m(1.0, n_nodes=64)
    k2 = a.k_mv_m(1.0, n_nodes=128)
    assert abs(20 * np.log10(k1 / k2)) < 0.01


def test_one_tower_array_is_its_tower():
    t = Tower(110.0, loss_ohm=2.0)
    a = Array.single(t)
    s = a.horizontal_summary(1.0)
    # single tower: e1km = (η0/2π)·I·(1 − cos G), P = I² (R_rad + R_loss)
    i_loop = np.sqrt(1000.0 / (t.radiation_resistance_ohm + 2.0))
    assert s["rms_mv_m"] == pytest.approx(ETA0_CODATA / (2 * np.pi) * i_loop * t.horizon_factor,
                                          rel=1e-6)


@pytest.mark.parametrize(
    "build, needle",
    [
        (lambda: Tower(0.0), "height_deg"),
        (lambda: Tower(-10.0), "height_deg"),
        (lambda: Element(Tower(90.0), phase_deg=float("nan")), "phase_deg"),
        (lambda: Array((Element(Tower(90.0), 0.0), Element(Tower(90.0), 0.0))), "not all be zero"),
        (lambda: Array(tuple(Element(Tower(90.0)) for _ in range(13))), "1 to 12 towers"),
        (lambda: Tower(90.0, loss_ohm=1.0, efficiency=0.9), "not both"),
    ],
)
def test_bad_antenna_input(build, needle):
    with pytest.raises(ValueError, match=needle):
        build()


def test_array_table_round_trip_and_errors():
    table = {"rotation_deg": 10.0, "tower": [{"height_m": 74.9481145}, {"height_deg": 90.0,
             "phase_deg": 90.0, "spacing_deg": 90.0, "orientation_deg": 45.0, "loss_ohm": 1.0}]}
    a = array_from_table(table, 1000.0, "arr.toml")
    assert a.elements[0].tower.height_deg == pytest.approx(90.0, abs=1e-6)
    b = array_from_table(array_to_table(a), 1000.0, "x")
    np.testing.assert_allclose(b.relative(np.arange(0, 360, 10.0), 0), a.relative(np.arange(0, 360, 10.0), 0))
    with pytest.raises(ValueError, match=r"unknown key 'hieght_deg' in tower 1 of arr.toml"):
        array_from_table({"tower": [{"hieght_deg": 90}]}, 1000.0, "arr.toml")
    with pytest.raises(ValueError, match=r"exactly one of height_deg or height_m in tower 1"):
        array_from_table({"tower": [{}]}, 1000.0, "arr.toml")


def test_cli_antenna_json(capsys):
    assert cli.main(["antenna", "--freq-khz", "1000", "--height-deg", "90", "--loss-ohm", "1",
                     "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["e1km_mv_m"] == pytest.approx(309.6, rel=0.005)  # docs/methods.md §3 [calc]
    assert len(out["pattern_mv_m"]) == 360
    assert out["radiation_resistance_ohm"] == pytest.approx(36.5, rel=0.005)  # Kraus, from memory
    assert cli.main(["antenna", "--freq-khz", "1000", "--height-deg", "-1"]) == 2
    assert "--height-deg" in capsys.readouterr().err


@pytest.mark.parametrize("loss", [0.0, 1.0])
def test_an_array_whose_fields_cancel_is_refused(loss):
    # two equal towers at one point fed in anti-phase radiate nothing at all (their currents
    # cancel everywhere): a mistake in the feeds, refused in one line instead of a division
    # by zero (lossless) or a "maximum power" of 10^30 kW (with loss)
    t = Tower(90.0, loss_ohm=loss)
    with pytest.raises(ValueError, match="the towers' fields cancel"):
        Array((Element(t), Element(t, phase_deg=180.0)))
    # the same pair a quarter wave apart in quadrature is a cardioid: a deep null, accepted
    arr = Array((Element(t), Element(t, phase_deg=90.0, spacing_deg=90.0)))
    assert arr.horizontal_summary(1.0)["min_mv_m"] < 1e-6 * arr.horizontal_summary(1.0)["max_mv_m"]


def test_cli_refuses_a_cancelling_array_in_one_line(tmp_path):
    import contextlib
    import io

    from mwreach.coverage import cli

    f = tmp_path / "arr.toml"
    f.write_text("[[tower]]\nheight_deg = 90\n[[tower]]\nheight_deg = 90\nphase_deg = 180\n")
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        assert cli.main(["antenna", "--freq-khz", "1000", "--array", str(f)]) == 2
    assert err.getvalue().count("\n") == 1 and "fields cancel" in err.getvalue()
    assert str(f) in err.getvalue()


@pytest.mark.parametrize("elements", [
    # two towers, unequal ratio and phase, a quarter wave apart
    ((90.0, 1.0, 0.0, 0.0, 0.0), (90.0, 0.7, 105.0, 90.0, 30.0)),
    # three towers in a dog-leg with unequal heights, ratios and phases
    ((80.0, 1.0, 0.0, 0.0, 0.0), (90.0, 1.6, -110.0, 120.0, 200.0),
     (110.0, 0.45, 40.0, 230.0, 180.0)),
])
def test_array_rms_equals_the_numerical_rms_of_its_own_pattern(elements):
    # RMS of the horizontal-plane field: sqrt((1/2π) ∫ E(φ, 0)² dφ) by scipy.integrate.quad
    # over the array's own pattern, against the closed form Σ Re(a_i a_j*) J0(S_ij) of
    # horizontal_summary (docs/methods.md §3); quad's error is ~1e-10, so 1e-7 relative
    from scipy import integrate

    arr = Array(tuple(Element(Tower(h), field_ratio=r, phase_deg=p, spacing_deg=s,
                              orientation_deg=o) for h, r, p, s, o in elements),
                rotation_deg=17.0)
    power = 1.0
    ms = integrate.quad(lambda phi: float(arr.field_mv_m(phi, 0.0, power)) ** 2, 0.0, 360.0,
                        limit=400, epsabs=0, epsrel=1e-12)[0] / 360.0
    s = arr.horizontal_summary(power)
    assert s["rms_mv_m"] == pytest.approx(np.sqrt(ms), rel=1e-7)
    # and the maximum and minimum are those of the pattern on a 0.01° grid (0.1° step: within
    # the change of the field over 0.05°, well under 0.01 %)
    az = np.arange(0.0, 360.0, 0.01)
    e = arr.field_mv_m(az, 0.0, power)
    assert s["max_mv_m"] == pytest.approx(float(e.max()), rel=1e-4)
    assert s["min_mv_m"] == pytest.approx(float(e.min()), abs=1e-4 * float(e.max()))


def test_array_radiates_the_power_put_in_by_a_numerical_hemisphere_integral():
    # lossless three-tower array: the power through a hemisphere at 1 km,
    # P = (1/η0) ∫∫ E² cos θ dθ dφ with E in mV/m at 1 km (so V/m × 1000 m), by scipy dblquad
    # over the array's own field, equals the 1 kW fed in; quad to 1e-9, so 1e-6 relative
    from scipy import integrate

    arr = Array((Element(Tower(80.0)), Element(Tower(90.0), 1.6, -110.0, 120.0, 200.0),
                 Element(Tower(110.0), 0.45, 40.0, 230.0, 180.0)))
    p_w = integrate.dblquad(
        lambda th, phi: float(arr.field_mv_m(phi, th, 1.0)) ** 2 * np.cos(np.radians(th)),
        0.0, 360.0, 0.0, 90.0, epsabs=0, epsrel=1e-9)[0] * (np.pi / 180) ** 2 / ETA0_CODATA
    assert p_w == pytest.approx(1000.0, rel=1e-6)
