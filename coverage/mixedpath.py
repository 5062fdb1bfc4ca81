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

from .ground import Section
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

    Returns arrays (path, section, distance, weight), one entry per look-up, with ``section``
    counting the sections of all paths in order (path 0's first, …), so that
    field_k = −20·log10 D_k + Σ weight · g_section(distance) over the entries of path k.
    The curves are left to the caller: known grounds use their tables, the conductivity fit
    its family of tables.
    """
    d = np.atleast_1d(np.asarray(dist_km, dtype=float))
    path, sec, xs, ws = [], [], [], []
    first = 0  # number of the path's first section among all sections
    for k, (secs, dk) in enumerate(zip(paths, d)):
        _check_sections(secs)
        bounds = [sc.end_km for sc in secs[:-1] if sc.end_km < dk]
        n = len(bounds)
        path += [k, k]
        sec += [first + n, first]
        xs += [dk, dk]
        ws += [0.5, 0.5]
        for j, b in enumerate(bounds):
            sj, sk = first + j, first + j + 1
            path += [k, k, k, k]
            sec += [sj, sk, sk, sj]
            xs += [b, b, dk - b, dk - b]
            ws += [0.5, -0.5, 0.5, -0.5]
        first += len(secs)
    return (np.array(path, dtype=int), np.array(sec, dtype=int), np.array(xs, dtype=float),
            np.array(ws, dtype=float))


def millington_points_db(paths, dist_km, freq_khz: float, earth_k: float = 4 / 3):
    """Millington's field [dB re unattenuated field at 1 km] for many paths at once: path k
    with its own ``paths[k]`` sections, to its own receiver distance ``dist_km[k]``.

    The look-ups of :func:`millington_terms`, grouped by ground: one interpolation per ground.
    """
    d = np.atleast_1d(np.asarray(dist_km, dtype=float))
    out = -20 * np.log10(d)
    path, sec, x, w = millington_terms(paths, d)
    if path.size == 0:
        return out
    grounds: dict = {}  # ground key -> (number, ground)
    number = np.array([grounds.setdefault(sc.ground.key, (len(grounds), sc.ground))[0]
                       for secs in paths for sc in secs])[sec]
    for num, g in grounds.values():
        sel = number == num
        out += np.bincount(path[sel], weights=w[sel] * model(freq_khz, g, earth_k).gain_db(x[sel]),
                           minlength=out.size)
    return out


def millington_radials_db(paths, dist_km, freq_khz: float, earth_k: float = 4 / 3):
    """Millington's field [dB re unattenuated field at 1 km] on many radials at once:
    (n_paths, n_dist) for the sections ``paths[k]`` of each radial and one shared, increasing
    distance grid.

    The same sums as :func:`millington_db`, regrouped so that every curve look-up of every
    radial on one ground is a single interpolation (the per-study speed path; the two agree to
    rounding). Distances equal to a boundary count as inside the nearer section, as there.
    """
    d = np.asarray(dist_km, dtype=float)
    nd = d.size
    if nd > 1 and np.any(np.diff(d) <= 0):
        raise ValueError("dist_km must be increasing for millington_radials_db")
    n = len(paths)
    out = np.tile(-20 * np.log10(d), (n, 1))
    jumps = np.zeros((n, nd + 1))  # cumulative-sum deltas for the forward boundary jumps
    # Curve look-ups at the grid distances themselves are shared by every radial (one per
    # ground); those at D − b (the reverse terms) are gathered per pair of grounds as runs
    # (row, first cell, boundary) and done in one interpolation per ground of the pair, on one
    # shared log10(D − b). The forward jumps are one look-up per boundary, spread along the row
    # by a cumulative sum.
    on_grid: dict = {}
    pair_runs: dict = {}
    jump_runs: dict = {}
    grounds: dict = {}

    def at_grid(g):
        if g.key not in on_grid:
            on_grid[g.key] = 0.5 * model(freq_khz, g, earth_k).gain_db(d)
        return on_grid[g.key]

    for k, secs in enumerate(paths):
        _check_sections(secs)
        row = out[k]
        # where each section's cells end: d ≤ b lies in the section that ends at b
        ends = np.searchsorted(d, [sc.end_km for sc in secs[:-1]], side="right").tolist()
        start = 0
        for i, sc in enumerate(secs):
            stop = ends[i] if i < len(ends) else nd
            if stop > start:
                row[start:stop] += at_grid(sc.ground)[start:stop]  # forward, receiver's section
            start = max(start, stop)
        row += at_grid(secs[0].ground)  # reverse, the first section
        for j, k0 in enumerate(ends):
            if k0 >= nd:
                break
            b = secs[j].end_km
            gj, gk = secs[j].ground, secs[j + 1].ground
            grounds[gj.key], grounds[gk.key] = gj, gk
            pair_runs.setdefault((gk.key, gj.key), []).append((k, k0, b))  # reverse at D − b
            for g, w in ((gj, 0.5), (gk, -0.5)):  # forward jump at b, beyond b
                jump_runs.setdefault(g.key, []).append((k * (nd + 1) + k0, b, w))
    flat_out = out.reshape(-1)
    for (plus, minus), rows in pair_runs.items():
        row, first, b = (np.array(c) for c in zip(*rows))
        length = nd - first
        which = np.repeat(np.arange(length.size), length)
        cell = np.arange(which.size) - np.repeat(np.cumsum(length) - length, length) + first[which]
        logx = np.log10(d[cell] - b[which])  # D > b in every such cell
        g = 0.0
        for key, w in ((plus, 0.5), (minus, -0.5)):
            logd, att_db = model(freq_khz, grounds[key], earth_k).table
            g = g + w * np.interp(logx, logd, att_db, left=0.0)
        flat_out += np.bincount(row[which] * nd + cell, weights=g, minlength=flat_out.size)
    flat_jumps = jumps.reshape(-1)
    for key, rows in jump_runs.items():
        at, b, w = (np.array(c) for c in zip(*rows))
        g = model(freq_khz, grounds[key], earth_k).gain_db(b)
        flat_jumps += np.bincount(at, weights=w * g, minlength=flat_jumps.size)
    out += np.cumsum(jumps, axis=1)[:, :nd]
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
