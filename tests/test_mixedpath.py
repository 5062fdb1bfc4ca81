"""Mixed paths: Millington and equivalent distance (Kirke)."""

import numpy as np
import pytest

from mwreach.coverage import groundwave as gw
from mwreach.coverage.ground import Section, SectionTable, ground_class
from mwreach.coverage.mixedpath import (
    kirke_db,
    millington_db,
    millington_points_db,
    millington_radials_db,
    path_field_db,
)

LAND = ground_class("land")
SEA = ground_class("sea")
DRY = ground_class("dry")
F = 1000.0


def _dbu(x):
    return x + gw.mv_m_to_dbu(300.0)


def test_one_section_equals_homogeneous_curve():
    d = np.array([1.0, 10.0, 55.0, 300.0])
    secs = [Section(0.0, 400.0, LAND)]
    # table interpolation within 0.001 dB of the direct evaluation (groundwave.table docstring)
    np.testing.assert_allclose(_dbu(millington_db(secs, d, F)), gw.field_dbu(F, LAND, d), atol=1e-3)
    np.testing.assert_allclose(_dbu(kirke_db(secs, d, F)), gw.field_dbu(F, LAND, d), atol=1e-3)


def test_millington_is_reciprocal():
    fwd = [Section(0, 30, LAND), Section(30, 90, SEA), Section(90, 200, DRY)]
    rev = [Section(0, 110, DRY), Section(110, 170, SEA), Section(170, 200, LAND)]
    assert millington_db(fwd, [200.0], F)[0] == pytest.approx(millington_db(rev, [200.0], F)[0],
                                                             abs=1e-9)


def test_land_to_sea_recovery():
    # Millington (1949): over sea after a land-sea boundary the field recovers
    secs = [Section(0, 50, LAND), Section(50, 400, SEA)]
    d = np.array([49.9, 50.1, 60.0, 100.0, 200.0])
    e = _dbu(millington_db(secs, d, F))
    land = gw.field_dbu(F, LAND, d)
    sea = gw.field_dbu(F, SEA, d)
    assert e[2] > e[1]  # rises after the coast
    assert np.all(e[2:] > land[2:]) and np.all(e[2:] < sea[2:])


def test_three_sections_by_hand():
    # Millington's forward/reverse sums written out from homogeneous values (docs/methods.md §2)
    d1, d2, d3 = 20.0, 35.0, 45.0
    D = d1 + d2 + d3
    secs = [Section(0, d1, LAND), Section(d1, d1 + d2, SEA), Section(d1 + d2, D, DRY)]
    E = {g.name: (lambda dd, g=g: float(gw.field_dbu(F, g, dd))) for g in (LAND, SEA, DRY)}
    el, es, ed = E["land"], E["sea"], E["dry"]
    forward = el(d1) - es(d1) + es(d1 + d2) - ed(d1 + d2) + ed(D)
    reverse = ed(d3) - es(d3) + es(d3 + d2) - el(d3 + d2) + el(D)
    expected = (forward + reverse) / 2
    assert _dbu(millington_db(secs, [D], F)[0]) == pytest.approx(expected, abs=0.005)  # dB, table


def test_kirke_continuous_and_not_reciprocal():
    secs = [Section(0, 40, LAND), Section(40, 300, SEA)]
    eps = 1e-6
    e = kirke_db(secs, [40 - eps, 40 + eps], F)
    assert abs(e[0] - e[1]) < 1e-3  # dB: continuous at the boundary
    # dry land then sea: the equivalent-distance result depends on the direction by several dB
    # (Kirke 1949 is not reciprocal; Millington introduced his method to fix that)
    dry_sea = [Section(0, 100, DRY), Section(100, 300, SEA)]
    sea_dry = [Section(0, 200, SEA), Section(200, 300, DRY)]
    assert abs(kirke_db(dry_sea, [300.0], F)[0] - kirke_db(sea_dry, [300.0], F)[0]) > 3.0  # dB


def test_kirke_follows_next_curve_from_equivalent_distance():
    secs = [Section(0, 40, LAND), Section(40, 300, SEA)]
    reached = float(gw.field_dbu(F, LAND, 40.0))
    from scipy.optimize import brentq

    d_eq = brentq(lambda x: float(gw.field_dbu(F, SEA, x)) - reached, 1.0, 2000.0)
    assert _dbu(kirke_db(secs, [100.0], F)[0]) == pytest.approx(
        float(gw.field_dbu(F, SEA, d_eq + 60.0)), abs=0.005)  # dB, table interpolation


def test_radials_at_once_equal_one_path_at_a_time():
    # the grouped kernel used for whole studies must be the same sums as millington_db,
    # including grid points that fall exactly on a boundary and paths of one section
    rng = np.random.default_rng(3)
    grounds = [LAND, SEA, DRY]
    d = np.concatenate([[0.5, 1.0], np.arange(2.0, 300.0, 2.0)])
    paths = [[Section(0.0, 300.0, SEA)]]
    for _ in range(40):
        cuts = np.sort(rng.choice(np.arange(4.0, 296.0, 2.0), rng.integers(1, 6), replace=False))
        if rng.random() < 0.5:
            cuts = cuts + rng.uniform(0.1, 1.9, cuts.size)  # off the grid as well
        edges = np.concatenate([[0.0], cuts, [300.0]])
        paths.append([Section(float(a), float(b), grounds[rng.integers(3)])
                      for a, b in zip(edges[:-1], edges[1:])])
    grid = millington_radials_db(paths, d, F)
    one = np.array([millington_db(p, d, F) for p in paths])
    np.testing.assert_allclose(grid, one, atol=1e-9)  # dB; the same look-ups, summed in another order
    # and one receiver per path, anywhere along it (the kernel for fields at given points)
    dk = rng.uniform(0.5, 299.0, len(paths))
    each = [millington_db(p, [x], F)[0] for p, x in zip(paths, dk)]
    np.testing.assert_allclose(millington_points_db(paths, dk, F), each, atol=1e-9)  # dB, same
    # the flat-array form of the same paths reads back as the same sections and gives the
    # same fields
    table = SectionTable.of(paths)
    assert [table[k] for k in range(len(table))] == paths and list(table) == paths
    np.testing.assert_array_equal(millington_radials_db(table, d, F), grid)
    np.testing.assert_array_equal(millington_points_db(table, dk, F),
                                  millington_points_db(paths, dk, F))


def test_section_table_refuses_what_section_lists_refuse():
    for bad, words in (([[Section(0, 10, LAND), Section(12, 20, SEA)]], "contiguous"),
                       ([[Section(1, 10, LAND)]], "transmitter"),
                       ([[Section(0, 10, LAND)], []], "at least one")):
        with pytest.raises(ValueError, match=words):
            millington_radials_db(bad, [5.0, 8.0], F)
        with pytest.raises(ValueError, match=words):
            millington_points_db(bad, [5.0] * len(bad), F)


def test_bad_paths():
    with pytest.raises(ValueError, match="mixed_path must be one of"):
        path_field_db("average", [Section(0, 10, LAND)], [5.0], F)
    with pytest.raises(ValueError, match="contiguous"):
        millington_db([Section(0, 10, LAND), Section(12, 20, SEA)], [15.0], F)
    with pytest.raises(ValueError, match="at least one"):
        millington_db([], [15.0], F)


def test_kirke_reads_equivalent_distances_at_every_boundary():
    # three sections, by hand (47 CFR 73.183(d), read: the equivalent-distance method): land to
    # 40 km, sea to 100 km, dry ground beyond. At each boundary the field reached so far is
    # found on the next section's curve (scipy brentq) and followed from that distance; the
    # second boundary's field must come from the sea curve at its equivalent distance, not
    # at 100 km. 0.005 dB: the curve tables' interpolation (groundwave.table docstring)
    from scipy.optimize import brentq

    secs = [Section(0, 40, LAND), Section(40, 100, SEA), Section(100, 400, DRY)]

    def on(ground, target):
        return brentq(lambda x: float(gw.field_dbu(F, ground, x)) - target, 0.5, 5000.0)

    d_sea = on(SEA, float(gw.field_dbu(F, LAND, 40.0)))
    at_100 = float(gw.field_dbu(F, SEA, d_sea + 60.0))
    d_dry = on(DRY, at_100)
    want = float(gw.field_dbu(F, DRY, d_dry + 100.0))
    assert _dbu(kirke_db(secs, [100.0], F)[0]) == pytest.approx(at_100, abs=0.005)
    assert _dbu(kirke_db(secs, [200.0], F)[0]) == pytest.approx(want, abs=0.005)
    # the slip of reading the sea curve at the boundary's own distance would be far off
    wrong = float(gw.field_dbu(F, DRY, on(DRY, float(gw.field_dbu(F, SEA, 100.0))) + 100.0))
    assert abs(want - wrong) > 1.0  # dB
