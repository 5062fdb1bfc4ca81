"""Standard and augmented patterns (47 CFR 73.150, 73.152): hand values from the rule's
expressions written out here, separately from the code, and the rule's refusals."""

import numpy as np
import pytest

from mwreach.coverage.antenna import Array, Element, Tower
from mwreach.coverage.pattern import (
    Augmentation,
    Facility,
    StandardPattern,
    elevation_table,
    g_factor,
)

# 73.150(b)(1)(i): E_std = 1.05·sqrt(E_th² + Q²), Q = max(0.025·g·E_rss, 10·g·√P)
# (1.05 read; 0.025, 10 and the 1 kW floor # from memory — the equation is an image in the
# stored rule)


def f_typical(g_deg, elev_deg):
    """73.160(b)(1) vertical characteristic of a typical tower, written out independently:
    [cos(G sin θ) − cos G] / [(1 − cos G) cos θ]."""
    g, th = np.radians(g_deg), np.radians(elev_deg)
    return (np.cos(g * np.sin(th)) - np.cos(g)) / ((1 - np.cos(g)) * np.cos(th))


def theory_by_hand(k, towers, az_deg, el_deg):
    """73.150(b)(1)(i) theoretical pattern, term by term: k·|Σ F_i f_i(θ) ∠(ψ_i + S_i cos θ
    cos(φ_i − φ))|, towers = [(G, F, ψ, S, φ_i)]."""
    th = np.radians(el_deg)
    total = 0j
    for g, f, psi, s, phi in towers:
        arg = np.radians(psi) + np.radians(s) * np.cos(th) * np.cos(np.radians(phi - az_deg))
        total += f * f_typical(g, el_deg) * np.exp(1j * arg)
    return k * abs(total)


def make(towers, loss=1.0):
    return Array(tuple(Element(Tower(g, loss_ohm=loss), f, psi, s, phi)
                       for g, f, psi, s, phi in towers))


POWER_BRANCH = [(90.0, 1.0, 0.0, 0.0, 0.0), (90.0, 0.9, 100.0, 90.0, 135.0)]  # 2.5 kW
RSS_BRANCH = [(90.0, 1.0, 0.0, 0.0, 0.0), (90.0, 0.9, 160.0, 45.0, 135.0)]  # 1 kW


@pytest.mark.parametrize("towers, power, branch", [(POWER_BRANCH, 2.5, "power"),
                                                   (RSS_BRANCH, 1.0, "rss")])
@pytest.mark.parametrize("el", [0.0, 20.0, 45.0])
def test_standard_pattern_by_hand(towers, power, branch, el):
    arr = make(towers)
    sp = StandardPattern(arr, power)
    assert sp.q_branch() == branch
    k = arr.k_mv_m(power)
    e_rss = k * np.sqrt(sum(t[1] ** 2 for t in towers))  # both towers' horizontal fields
    g = f_typical(90.0, el)  # shortest tower 90° (≤ 180°): g = f
    q = max(0.025 * g * e_rss, 10.0 * g * np.sqrt(max(power, 1.0)))
    for az in (0.0, 77.0, 135.0, 200.0, 315.0):
        want = 1.05 * np.sqrt(theory_by_hand(k, towers, az, el) ** 2 + q**2)
        # 1e-9 relative: the same arithmetic in another order
        assert sp.field_mv_m(az, el, power) == pytest.approx(want, rel=1e-9)
        assert sp.field_mv_m(az, el, power) >= arr.field_mv_m(az, el, power)


def test_standard_never_below_theoretical_anywhere():
    for towers, p in ((POWER_BRANCH, 2.5), (RSS_BRANCH, 1.0), (POWER_BRANCH, 0.3)):
        arr = make(towers)
        sp = StandardPattern(arr, p)
        az, el = np.meshgrid(np.arange(0.0, 360.0, 2.0), np.arange(0.0, 90.0, 3.0))
        assert np.all(sp.field_mv_m(az, el, p) >= 1.05 * arr.field_mv_m(az, el, p) - 1e-9)


def test_q_uses_one_kilowatt_below_one_kilowatt():
    # 73.150(b)(1)(i) # from memory: P below 1 kW is taken as 1 kW in 10·g·√P
    sp = StandardPattern(make(POWER_BRANCH), 0.25)
    assert sp.q_mv_m(0.0) == pytest.approx(10.0, rel=1e-12)
    # the pattern scales with √P from its own power (filed shape kept)
    assert sp.field_mv_m(10.0, 0.0, 1.0) == pytest.approx(2.0 * sp.field_mv_m(10.0, 0.0, 0.25))


def test_g_fills_the_null_of_a_tall_shortest_tower():
    # 73.150(b)(1)(i) # from memory: shortest tower taller than 180°: g = sqrt(f² + 0.0625)/1.030776
    arr = make([(200.0, 1.0, 0.0, 0.0, 0.0), (190.0, 1.0, 150.0, 60.0, 0.0)])
    el = np.array([0.0, 30.0, 60.0])
    f = f_typical(190.0, el)  # the shortest is the 190° tower
    assert g_factor(arr, el) == pytest.approx(np.sqrt(f**2 + 0.0625) / 1.030776, rel=1e-12)
    assert g_factor(arr, 0.0) == pytest.approx(1.0, abs=1e-6)  # 1.030776 = sqrt(1.0625) to 1e-6
    short = make(POWER_BRANCH)
    assert g_factor(short, el) == pytest.approx(np.abs(f_typical(90.0, el)), rel=1e-12)


@pytest.mark.parametrize("el", [0.0, 15.0, 40.0])
def test_rms_is_exact(el):
    # the closed form (docs/methods.md §3.1) against the mean square sampled every 0.01°
    sp = StandardPattern(make(POWER_BRANCH), 2.5, (Augmentation(150.0, 60.0, 120.0),
                                                   Augmentation(170.0, 40.0, 150.0)))
    az = np.arange(0.0, 360.0, 0.01)
    sampled = np.sqrt(np.mean(sp.field_mv_m(az, el, 2.5) ** 2))
    assert sp.rms_mv_m(2.5, el) == pytest.approx(sampled, rel=1e-6)  # sampling error ≪ 1e-6
    arr = sp.array
    assert arr.rms_mv_m(2.5, el) == pytest.approx(
        np.sqrt(np.mean(arr.field_mv_m(az, el, 2.5) ** 2)), rel=1e-6)


def test_augmentation_by_hand():
    # 73.152(c) (read): E_aug² = E_std² + A·[g(θ)·cos(180·DA/S)]², A = E_aug(φ,0)² − E_std(φ,0)²
    arr = make(POWER_BRANCH)
    std = StandardPattern(arr, 2.5)
    aug = StandardPattern(arr, 2.5, (Augmentation(135.0, 60.0, 100.0),))
    e0 = float(std.field_mv_m(135.0, 0.0, 2.5))
    a = 100.0**2 - e0**2
    assert aug.a_values == pytest.approx((a,), rel=1e-12)
    assert aug.field_mv_m(135.0, 0.0, 2.5) == pytest.approx(100.0, rel=1e-12)  # centre
    for el in (0.0, 30.0):
        g = f_typical(90.0, el)
        for az, da in ((150.0, 15.0), (120.0, 15.0), (160.0, 25.0)):
            want = np.sqrt(std.field_mv_m(az, el, 2.5) ** 2
                           + a * (g * np.cos(np.radians(180.0 * da / 60.0))) ** 2)
            assert aug.field_mv_m(az, el, 2.5) == pytest.approx(want, rel=1e-12)
    for az in (105.0, 165.0):  # span edges: merges into the standard pattern
        assert aug.field_mv_m(az, 0.0, 2.5) == pytest.approx(std.field_mv_m(az, 0.0, 2.5))
    for az in (0.0, 90.0, 200.0, 300.0):  # outside the span: unchanged
        assert aug.field_mv_m(az, 0.0, 2.5) == std.field_mv_m(az, 0.0, 2.5)


def test_overlapping_augmentations_apply_in_ascending_azimuth():
    # 73.152(c) (read): in ascending central azimuth; an earlier span over a later central
    # azimuth changes the later A
    arr = make(POWER_BRANCH)
    first, second = Augmentation(130.0, 60.0, 110.0), Augmentation(150.0, 40.0, 130.0)
    both = StandardPattern(arr, 2.5, (second, first))  # given out of order
    only_first = StandardPattern(arr, 2.5, (first,))
    a2 = 130.0**2 - float(only_first.field_mv_m(150.0, 0.0, 2.5)) ** 2
    assert both.a_values[1] == pytest.approx(a2, rel=1e-12)
    alone = StandardPattern(arr, 2.5, (second,))
    assert both.a_values[1] != pytest.approx(alone.a_values[0], rel=1e-3)
    assert both.field_mv_m(150.0, 0.0, 2.5) == pytest.approx(130.0, rel=1e-12)


@pytest.mark.parametrize("make_bad, words", [
    (lambda a: Augmentation(10.0, 400.0, 50.0), "span_deg must be"),
    (lambda a: Augmentation(10.0, 0.0, 50.0), "span_deg must be"),
    (lambda a: Augmentation(10.0, 30.0, -5.0), "field_mv_m must be"),
    (lambda a: StandardPattern(a, 2.5, (Augmentation(10.0, 30.0, 1.0),)), "A > 0"),
    (lambda a: StandardPattern(a, 2.5, (Augmentation(10.0, 30.0, 900.0),
                                        Augmentation(10.0, 60.0, 950.0))), "share a central"),
    (lambda a: Facility(a, "cardioid"), "pattern must be one of"),
    (lambda a: Facility(Array.single(Tower(90.0)), "standard"), "2 or more towers"),
    (lambda a: Facility(a, "theoretical", (Augmentation(10.0, 30.0, 900.0),)),
     "augmentations modify a standard pattern"),
])
def test_what_the_rule_does_not_allow_is_refused(make_bad, words):
    with pytest.raises(ValueError, match=words):
        make_bad(make(POWER_BRANCH))


def test_facility_defaults():
    assert Facility(make(POWER_BRANCH)).kind == "standard"
    one = Facility(Array.single(Tower(90.0)))
    assert one.kind == "theoretical" and one.radiator(1.0) is one.array


def test_elevation_table_shape_and_values():
    sp = StandardPattern(make(POWER_BRANCH), 2.5)
    t = elevation_table(sp, 2.5, np.arange(0.0, 360.0, 10.0))
    assert t["pattern_mv_m"].shape == (13, 36)  # 0..60° every 5° (73.150(b)(1), read) × 36
    assert list(t["elevation_deg"]) == [float(e) for e in range(0, 61, 5)]
    assert t["pattern_mv_m"][4, 9] == pytest.approx(sp.field_mv_m(90.0, 20.0, 2.5))
    assert np.all(t["pattern_mv_m"] >= t["theoretical_mv_m"])
