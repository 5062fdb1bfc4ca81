"""Property-based checks (hypothesis) of invariants that hold for any valid input."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from mwreach.coverage.ground import Ground, Section
from mwreach.coverage.interference import rss
from mwreach.coverage.mixedpath import millington_db

sigmas = st.sampled_from([0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 5000.0])
eps = st.sampled_from([3.0, 10.0, 15.0, 30.0, 70.0])


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(sigmas, eps, st.floats(2.0, 120.0)), min_size=1, max_size=4),
       st.floats(150.0, 1700.0))
def test_millington_reciprocal_for_any_path(parts, freq):
    # Millington's method is reciprocal by construction (ITU-R P.368 Annex 2)
    secs, start = [], 0.0
    for s, e, length in parts:
        secs.append(Section(start, start + length, Ground(s, e)))
        start += length
    rev, start = [], 0.0
    for sec in reversed(secs):
        length = sec.end_km - sec.start_km
        rev.append(Section(start, start + length, sec.ground))
        start += length
    total = secs[-1].end_km
    a = millington_db(secs, [total], freq)[0]
    b = millington_db(rev, [total], freq)[0]
    assert abs(a - b) < 1e-9


@settings(max_examples=50, deadline=None)
@given(st.lists(st.floats(0.0, 100.0), min_size=1, max_size=12), st.sampled_from([0, 25, 50]))
def test_rss_bounds(values, rule):
    # RSS with exclusion lies between the largest term and the plain RSS of all terms
    total, used = rss(values, rule)
    v = np.asarray(values)
    assert total <= np.sqrt(np.sum(v**2)) + 1e-9
    assert total >= v.max() - 1e-9
    if rule == 0:
        assert total == np.sqrt(np.sum(v[v > 0] ** 2)) or abs(total - np.sqrt(np.sum(v**2))) < 1e-9


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.floats(0.0, 10.0), min_size=4, max_size=4), min_size=1, max_size=6),
       st.sampled_from([0, 25, 50]))
def test_column_rss_equals_the_one_column_rule(cols, rule):
    # the vectorised RSS with exclusion gives the one-column rule's result on every column
    from mwreach.coverage.interference import rss_columns

    lin = np.array(cols, dtype=float)  # (n_values, 4 points)
    total, used = rss_columns(lin, rule)
    for j in range(lin.shape[1]):
        t, u = rss(lin[:, j], rule)
        assert np.isclose(total[j], t, rtol=1e-12, atol=1e-300)
        assert list(used[:, j]) == list(u)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.tuples(sigmas, eps, st.floats(2.0, 80.0)), min_size=1, max_size=4),
       st.floats(5.0, 300.0))
def test_batched_millington_equals_path_by_path(parts, extra):
    # the many-paths form of Millington's sum gives the one-path form (docs/methods.md §2)
    from mwreach.coverage.mixedpath import millington_points_db

    secs, start = [], 0.0
    for s_, e_, length in parts:
        secs.append(Section(start, start + length, Ground(s_, e_)))
        start += length
    dists = [start * 0.5 + 1.0, start + extra]
    one = [float(millington_db(secs, [x], 1000.0)[0]) for x in dists]
    many = millington_points_db([secs, secs], dists, 1000.0)
    np.testing.assert_allclose(many, one, atol=1e-9)
