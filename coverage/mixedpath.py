"""Ground wave over mixed paths: Millington's method and the equivalent-distance (Kirke) method.

Both are built on the homogeneous curves of :mod:`mwreach.coverage.groundwave`, through each
model's cached table, so nothing that depends only on (frequency, ground) is recomputed per point.
All fields here are in dB relative to the unattenuated field at 1 km; add
``mv_m_to_dbu(e1km_mv_m)`` for dBµV/m.

References
----------
G. Millington, "Ground-wave propagation over an inhomogeneous smooth earth",
Proc. IEE 96, Part III (1949); ITU-R P.368-9, Annex 2 (docs/methods.md §2).
H. L. Kirke, "Calculation of ground-wave field strength over a composite land and sea path",
Proc. IRE 37 (1949); required for mixed paths in 47 CFR 73.183(d).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .ground import Section, SectionTable
from .groundwave import GroundWaveModel, model

__all__ = [
    "METHODS", "path_field_db", "millington_db", "millington_terms", "millington_points_db",
    "millington_radials_db", "kirke_db",
]

METHODS = ("millington", "kirke")


def _models(sections: Sequence[Section], freq_khz: float, earth_k: float):
    return [model(freq_khz, s.ground, earth_k) for s in sections]


def _check_sections(sections: Sequence[Section]):
    if not sections:
        raise ValueError("a path needs at least one ground section")
    if sections[0].start_km != 0.0:
        raise ValueError("the first section must start at the transmitter (0 km)")
    for a, b in zip(sections, sections[1:]):
        if abs(a.end_km - b.start_km) > 1e-9 or b.end_km <= b.start_km:
            raise ValueError("sections must be contiguous and of positive length")


def millington_db(sections: Sequence[Section], dist_km, freq_khz: float, earth_k: float = 4 / 3):
    """Millington's mixed-path field [dB re unattenuated field at 1 km] at ``dist_km``.

    With boundaries b_j (cumulative, from the transmitter) and E_i the homogeneous curve of
    section i (dB), for a receiver at D in section n:

    forward  E_F = E_n(D) + Σ_{b_j < D} [E_j(b_j) − E_{j+1}(b_j)]
    reverse  E_R = E_1(D) + Σ_{b_j < D} [E_{j+1}(D − b_j) − E_j(D − b_j)]
    result   (E_F + E_R) / 2

    The last section is taken to extend beyond its end. The inverse-distance parts cancel in
    each bracket, so only attenuations are differenced.

    References
    ----------
    Millington (1949); ITU-R P.368-9 Annex 2; docs/methods.md §2.
    """
    _check_sections(sections)
    d = np.asarray(dist_km, dtype=float)
    ms = _models(sections, freq_khz, earth_k)
    bounds = np.array([s.end_km for s in sections[:-1]])
    # the section each distance lies in
    sec = np.searchsorted(bounds, d, side="left")
    fwd = np.empty(d.shape)
    for i, m in enumerate(ms):
        here = sec == i
        if np.any(here):
            fwd[here] = m.curve_db(d[here])
    rev = ms[0].curve_db(d)
    for j, b in enumerate(bounds):
        beyond = d > b
        if not np.any(beyond):
            break
        fwd[beyond] += float(ms[j].gain_db(b) - ms[j + 1].gain_db(b))  # Eq. forward jump
        r = d[beyond] - b
        rev[beyond] += ms[j + 1].gain_db(r) - ms[j].gain_db(r)  # Eq. reverse term
    return 0.5 * (fwd + rev)


def millington_terms(paths, dist_km):
    """Millington's field for many paths, each to its own receiver, as a sum of curve look-ups.

    Path k (its own sections ``paths[k]``, receiver at ``dist_km[k]``) has
    field_k = −20·log10 D_k + ½·[g_n(D) + g_1(D) + Σ_j (g_j(b_j) − g_{j+1}(b_j) + g_{j+1}(D − b_j)
    − g_j(D − b_j))], g a section's attenuation in dB — the formula of :func:`millington_db`.

    ``paths`` is a :class:`~.ground.SectionTable` or one list of sections per path. Returns
    arrays (path, section, distance, weight), one entry per look-up, with ``section`` counting
    the sections of all paths in order (path 0's first, …), so that
    field_k = −20·log10 D_k + Σ weight · g_section(distance) over the entries of path k.
    The curves are left to the caller: known grounds use their tables, the conductivity fit
    its family of tables.
    """
    t = SectionTable.of(paths)
    t.check()
    d = np.atleast_1d(np.asarray(dist_km, dtype=float))
    n = len(t)
    if d.size != n:
        raise ValueError(f"one receiver distance per path is needed ({d.size} for {n} paths)")
    first = t.ptr[:-1]
    owner = np.repeat(np.arange(n), np.diff(t.ptr))  # the path of each section
    # boundaries: the end of every section but each path's last, where it lies before D
    inner = np.ones(t.end_km.size, dtype=bool)
    inner[t.ptr[1:] - 1] = False
    j = np.flatnonzero(inner & (t.end_km < d[owner]))
    b, k = t.end_km[j], owner[j]
    receiver = first + np.bincount(k, minlength=n)  # the section that holds D
    dk = d[k]
    path = np.concatenate([np.arange(n), np.arange(n), np.repeat(k, 4)])
    sec = np.concatenate([receiver, first, np.column_stack([j, j + 1, j + 1, j]).ravel()])
    x = np.concatenate([d, d, np.column_stack([b, b, dk - b, dk - b]).ravel()])
    w = np.concatenate([np.full(2 * n, 0.5), np.tile([0.5, -0.5, 0.5, -0.5], j.size)])
    return path, sec, x, w


_STACKS: dict = {}


def _stacked_tables(grounds, freq_khz: float, earth_k: float):
    """(log10 d grid, (G, N) attenuations [dB], {(i, j): half the difference of curves i and j})
    of the grounds' cached curves, which all share one geometric distance grid; kept per
    (frequency, earth factor, grounds), the differences filled in as they are asked for."""
    key = (float(freq_khz), float(earth_k), tuple(g.key for g in grounds))
    hit = _STACKS.get(key)
    if hit is None:
        tabs = [model(freq_khz, g, earth_k).table for g in grounds]
        logd = tabs[0][0]
        for other, _ in tabs[1:]:
            if other is not logd and not np.array_equal(other, logd):
                raise RuntimeError("curve tables on different distance grids")
        if len(_STACKS) > 256:
            _STACKS.clear()
        hit = _STACKS[key] = (logd, np.vstack([att for _, att in tabs]), {})
    return hit


def _lookup(logd, att, row, x):
    """``att[row]`` interpolated linearly in log10 distance at ``x`` [km] (0 dB at and below the
    table's first distance, the last value beyond its end): np.interp per element, on the
    uniform log grid of the curve tables, so many curves are read in one pass."""
    n = logd.size
    with np.errstate(divide="ignore"):
        lx = np.log10(x)
    step = (logd[-1] - logd[0]) / (n - 1)
    i = np.clip(np.floor((lx - logd[0]) / step).astype(np.intp), 0, n - 2)
    frac = np.clip((lx - logd[i]) / (logd[i + 1] - logd[i]), 0.0, 1.0)
    flat = att.reshape(-1)
    at = row * n + i
    out = flat[at] + frac * (flat[at + 1] - flat[at])
    return np.where(lx < logd[0], 0.0, out)


def millington_points_db(paths, dist_km, freq_khz: float, earth_k: float = 4 / 3):
    """Millington's field [dB re unattenuated field at 1 km] for many paths at once: path k
    with its own ``paths[k]`` sections, to its own receiver distance ``dist_km[k]``.

    The look-ups of :func:`millington_terms`, all read from the stacked curve tables in one
    pass.
    """
    t = SectionTable.of(paths)
    d = np.atleast_1d(np.asarray(dist_km, dtype=float))
    out = -20 * np.log10(d)
    path, sec, x, w = millington_terms(t, d)
    if path.size == 0:
        return out
    _, gnum, grounds = t.keys()
    logd, att, _ = _stacked_tables(grounds, freq_khz, earth_k)
    return out + np.bincount(path, weights=w * _lookup(logd, att, gnum[sec], x),
                             minlength=out.size)


def millington_radials_db(paths, dist_km, freq_khz: float, earth_k: float = 4 / 3,
                          stack=None):
    """Millington's field [dB re unattenuated field at 1 km] on many radials at once:
    (n_paths, n_dist) for the sections ``paths[k]`` of each radial (a
    :class:`~.ground.SectionTable` or lists of sections) and one shared, increasing distance
    grid.

    The same sums as :func:`millington_db`, regrouped into whole-array operations (the
    per-study speed path; the two agree to rounding). Distances equal to a boundary count as
    inside the nearer section, as there.

    ``stack`` = (log10 d grid, (G, N) attenuations [dB], {}) gives the curves directly, one row
    per entry of the table's ``grounds`` (section k on row ``ground[k]``), instead of the
    grounds' cached curves: the uncertainty draws (:mod:`~.uncertainty`) change the curves of
    the same sections from one draw to the next.
    """
    d = np.asarray(dist_km, dtype=float)
    nd = d.size
    if nd > 1 and np.any(np.diff(d) <= 0):
        raise ValueError("dist_km must be increasing for millington_radials_db")
    t = SectionTable.of(paths)
    t.check()
    n = len(t)
    if stack is None:
        ng, gnum, grounds = t.keys()
        logd, att, halfdiff = _stacked_tables(grounds, freq_khz, earth_k)
    else:
        logd, att, halfdiff = stack
        ng, gnum = att.shape[0], t.ground
    # half the attenuation of each ground at the grid distances: (ng, nd)
    half = 0.5 * _lookup(logd, att, np.repeat(np.arange(ng), nd), np.tile(d, ng)).reshape(ng, nd)
    first = t.ptr[:-1]
    owner = np.repeat(np.arange(n), np.diff(t.ptr))
    inner = np.ones(t.end_km.size, dtype=bool)
    inner[t.ptr[1:] - 1] = False
    j = np.flatnonzero(inner)  # boundaries: section j ends where section j + 1 starts
    k, b = owner[j], t.end_km[j]
    cell0 = np.searchsorted(d, b, side="right")  # first grid cell beyond the boundary (D > b)
    j, k, b, cell0 = (v[cell0 < nd] for v in (j, k, b, cell0))
    # forward, the receiver's own section: its ground number per cell, by a running sum of
    # the changes at each boundary
    width = nd + 1
    change = np.bincount(np.concatenate([np.arange(n) * width, k * width + cell0]),
                         weights=np.concatenate([gnum[first], gnum[j + 1] - gnum[j]]),
                         minlength=n * width).reshape(n, width)
    own = np.rint(np.cumsum(change, axis=1)[:, :nd]).astype(np.intp)
    cols = np.arange(nd)
    out = -20 * np.log10(d) + half[own, cols] + half[gnum[first]]  # … and reverse, first section
    # forward jumps at each boundary, carried to every cell beyond it
    if j.size:
        jump = 0.5 * (_lookup(logd, att, gnum[j], b) - _lookup(logd, att, gnum[j + 1], b))
        steps = np.bincount(k * width + cell0, weights=jump, minlength=n * width)
        out += np.cumsum(steps.reshape(n, width), axis=1)[:, :nd]
        # reverse terms at D − b for every cell beyond each boundary, one interpolation per
        # pair of grounds on the difference of their curves (the runs of one boundary are in
        # increasing distance, which np.interp reads fastest)
        pair = gnum[j + 1] * ng + gnum[j]
        order = np.argsort(pair, kind="stable")
        j, k, b, cell0, pair = j[order], k[order], b[order], cell0[order], pair[order]
        length = nd - cell0
        which = np.repeat(np.arange(j.size), length)
        cell = np.arange(which.size) - np.repeat(np.cumsum(length) - length, length) + cell0[which]
        logx = np.log10(d[cell] - b[which])  # D > b in every such cell
        g = np.empty(logx.size)
        ends = np.concatenate([[0], np.cumsum(length)])
        cuts = np.flatnonzero(np.diff(pair)) + 1
        for lo, hi in zip(np.concatenate([[0], cuts]), np.concatenate([cuts, [j.size]])):
            pm = divmod(int(pair[lo]), ng)
            table = halfdiff.get(pm)
            if table is None:
                table = halfdiff[pm] = 0.5 * (att[pm[0]] - att[pm[1]])
            g[ends[lo]:ends[hi]] = np.interp(logx[ends[lo]:ends[hi]], logd, table, left=0.0)
        out += np.bincount(k[which] * nd + cell, weights=g, minlength=n * nd).reshape(n, nd)
    return out


def kirke_db(sections: Sequence[Section], dist_km, freq_khz: float, earth_k: float = 4 / 3):
    """Equivalent-distance (Kirke) field [dB re unattenuated field at 1 km] at ``dist_km``.

    Along section 1 the field follows its own curve. At each boundary, the distance on the
    next section's curve that gives the field reached so far is found, and the field continues
    along that curve from there. Continuous at boundaries; not reciprocal.

    References
    ----------
    Kirke (1949); 47 CFR 73.183(d); docs/methods.md §2.
    """
    _check_sections(sections)
    d = np.asarray(dist_km, dtype=float)
    ms: list[GroundWaveModel] = _models(sections, freq_khz, earth_k)
    out = ms[0].curve_db(d)
    offset = 0.0  # equivalent distance at the start of the current section, minus its start
    for j in range(1, len(sections)):
        b = sections[j].start_km
        reached = float(ms[j - 1].curve_db(b + offset))
        d_eq = float(ms[j].distance_for_curve_db(reached))
        offset = d_eq - b
        beyond = d > b
        out[beyond] = ms[j].curve_db(d[beyond] + offset)
    return out


def path_field_db(method: str, sections, dist_km, freq_khz: float, earth_k: float = 4 / 3):
    """Dispatch to :func:`millington_db` or :func:`kirke_db` by name."""
    if method == "millington":
        return millington_db(sections, dist_km, freq_khz, earth_k)
    if method == "kirke":
        return kirke_db(sections, dist_km, freq_khz, earth_k)
    raise ValueError(f"mixed_path must be one of {', '.join(METHODS)} (got {method!r})")
