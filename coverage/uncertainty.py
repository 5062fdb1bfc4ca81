"""How sure a contour is: Monte Carlo over the grounds whose conductivity is known only to a range.

A ground with a range [lo, hi] (``[ground] sigma_range_ms_m`` for the default ground, the zone
property ``conductivity_range_ms_m``) has a log-normal conductivity whose 5 % and 95 % points
are lo and hi: ln σ ~ N(μ, s²), μ = (ln lo + ln hi)/2, s = (ln hi − ln lo)/(2·z₀.₉₅) with
z₀.₉₅ = Φ⁻¹(0.95) = 1.6448536 (scipy.special.ndtri). Grounds without a range are exact.

Draws are a midpoint Latin hypercube: for N draws, each uncertain ground takes each of the N
values σ_k = exp(μ + s·Φ⁻¹((k + ½)/N)) exactly once, in an order of its own (a seeded random
permutation per ground), so the grounds vary independently while every marginal is sampled
evenly; percentiles are read with the matching plotting position (k + ½)/N (numpy's "hazen"
method). With one uncertain ground the 5 % contour is then the contour at σ = lo exactly, as
the field grows monotonically with σ.

The field of every draw comes from the study's own radials: the ground sections along them do
not change between draws, only the conductivities of their grounds, so the sections are found
once. Millington's field on fixed sections is linear in the grounds' attenuation curves, and an
uncertain ground's curve at any σ is the four-point Lagrange interpolation in ln σ of curves
computed exactly at 11 conductivities spanning μ ± 4s; so the batch Millington kernel
(:func:`~.mixedpath.millington_radials_db`) runs once per node curve, and every draw is a
weighted sum of those fields (checked against exact runs in the tests). Equivalent distance (Kirke) has no batch kernel: with
``mixed_path = "kirke"`` each draw's curves are computed exactly, path by path (slower).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
from scipy.special import ndtri

from .contours import polar_area_km2, polar_shares, RadialFields
from .ground import Ground, _ray_interval_arrays, _sections_from_intervals
from .groundwave import model, mv_m_to_dbu
from .mixedpath import millington_radials_db, path_field_db

__all__ = ["Z95", "UncertaintySettings", "lognormal_params", "latin_hypercube", "LevelBand",
           "ground_bands", "uncertain_grounds", "top_grounds", "SPLINE_NODES"]

#: Φ⁻¹(0.95): the 5 %–95 % range of a normal variable is μ ± Z95·s (scipy.special.ndtri).
Z95 = float(ndtri(0.95))
#: Conductivities at which an uncertain ground's curve is computed exactly, spanning μ ± 4s.
SPLINE_NODES = 11
PERCENTILES = (5.0, 50.0, 95.0)
BANDS = ("p05", "p50", "p95")
BEYOND_KM = 1e9
BATCH = 8  # draws per matrix product  # stands for "beyond the radial" (inf) while percentiles are taken


@dataclass(frozen=True)
class UncertaintySettings:
    """``[uncertainty]``: how many draws, and the seed that makes them repeatable."""

    draws: int = 200
    seed: int = 1


def lognormal_params(lo: float, hi: float) -> tuple[float, float]:
    """(μ, s) of ln σ for a log-normal σ whose 5 % and 95 % points are ``lo`` and ``hi``."""
    a, b = np.log(lo), np.log(hi)
    return float((a + b) / 2.0), float((b - a) / (2.0 * Z95))


def latin_hypercube(n_draws: int, n_vars: int, seed: int) -> np.ndarray:
    """(n_draws, n_vars) standard normal values: each column holds Φ⁻¹((k + ½)/N), k = 0 … N−1,
    once each, in its own seeded random order (a midpoint Latin hypercube)."""
    z = ndtri((np.arange(n_draws) + 0.5) / n_draws)
    rng = np.random.default_rng(seed)
    return np.column_stack([z[rng.permutation(n_draws)] for _ in range(n_vars)]) \
        if n_vars else np.zeros((n_draws, 0))


def uncertain_grounds(ground_map) -> list[tuple[int, Ground, tuple[float, float]]]:
    """(row, ground, (lo, hi)) of every ground with a range: row 0 is the default ground,
    row i the i-th zone."""
    out = []
    if ground_map.default_range is not None:
        out.append((0, ground_map.default, ground_map.default_range))
    for i, z in enumerate(ground_map.zones, 1):
        if z.sigma_range is not None:
            out.append((i, z.ground, z.sigma_range))
    return out


class _Grounds:
    """A set of grounds, as :func:`~.contours.radial_length_km` reads a ground map."""

    def __init__(self, grounds):
        self.grounds = list(grounds)


def top_grounds(spec) -> _Grounds:
    """The map's grounds with every uncertain one at the largest conductivity its draws take
    (Φ⁻¹((N − ½)/N) standard deviations up): what the radials must be long enough for."""
    settings = spec.uncertainty or UncertaintySettings()
    z = float(ndtri((settings.draws - 0.5) / settings.draws))
    out = list(spec.ground.grounds)
    for _, g, (lo, hi) in uncertain_grounds(spec.ground):
        mu, s = lognormal_params(lo, hi)
        out.append(Ground(float(np.exp(mu + s * z)), g.eps_r))
    return _Grounds(out)


class _Row:
    """A ground as a row of the draw's curve stack: every zone its own row, even where two
    zones hold equal grounds (their draws differ)."""

    __slots__ = ("key", "ground")

    def __init__(self, i: int, ground: Ground):
        self.key = ("row", i)
        self.ground = ground


def _nodes(lo: float, hi: float) -> np.ndarray:
    """The ln σ nodes of an uncertain ground: :data:`SPLINE_NODES` evenly over μ ± 4s."""
    mu, s = lognormal_params(lo, hi)
    return np.linspace(mu - 4.0 * s, mu + 4.0 * s, SPLINE_NODES) if s > 0 else np.array([mu])


def _weights(nodes: np.ndarray, x: float) -> tuple[int, np.ndarray]:
    """(first node, weights) of the four-point Lagrange interpolation at ``x`` on evenly spaced
    ``nodes`` (the stencil shifted inward at the ends; one node: weight 1)."""
    n = nodes.size
    if n == 1:
        return 0, np.ones(1)
    h = nodes[1] - nodes[0]
    t = (x - nodes[0]) / h
    j = int(np.clip(np.floor(t) - 1, 0, max(n - 4, 0)))
    m = min(4, n)
    u = t - j  # position within the stencil j … j + m − 1
    k = np.arange(m)
    w = np.array([np.prod([(u - k[q]) / (k[i] - k[q]) for q in range(m) if q != i])
                  for i in range(m)])
    return j, w


@dataclass
class LevelBand:
    """One level's contour distances at the 5 %, 50 % and 95 % points, per bearing."""

    level_mv_m: float
    km: dict  # "p05"/"p50"/"p95" → (nb,) first-crossing distance [km] (NaN, inf as contours)
    area_km2: dict  # "p05"/"p50"/"p95" → area inside that contour [km², ellipsoid]
    share_goal: float | None = None
    share_goal_probability: float | None = None  # share of draws whose community share ≥ goal
    polygons: dict = field(default_factory=dict)  # "p05"/"p95" → lon/lat polygon


def _sections(spec, lat, lon, bearings, max_km):
    """The study's radials' sections with one row per ground (default 0, zone i → i)."""
    gm = spec.ground
    from .geodesy import local_projection

    proj = local_projection(float(lat), float(lon))
    with gm._lock:
        zones_xy = gm.zones_xy(proj)
        rr, zz, aa, ee = _ray_interval_arrays(zones_xy, bearings, max_km)
    rows = [_Row(0, gm.default)] + [_Row(i, z.ground) for i, z in enumerate(gm.zones, 1)]
    return _sections_from_intervals(bearings.size, rr, zz + 1, aa, ee, float(max_km), rows), rows


def _subtable(table, radials):
    """The sections of the given radials only, as a table of their own (same grounds)."""
    from .ground import SectionTable

    counts = np.diff(table.ptr)[radials]
    idx = np.concatenate([np.arange(table.ptr[r], table.ptr[r + 1]) for r in radials]) \
        if radials.size else np.zeros(0, dtype=np.intp)
    ptr = np.concatenate([[0], np.cumsum(counts)])
    return SectionTable(ptr, table.start_km[idx], table.end_km[idx], table.ground[idx],
                        table.grounds)


def draw_fields(spec, radials: RadialFields, settings: UncertaintySettings, max_km: float):
    """Yield (draw index, {row: σ}, field [dBµV/m] (nb, nd)) for every draw."""
    st = spec.station
    freq, k = st.freq_khz, spec.earth_k
    bearings, d = radials.bearings_deg, radials.dist_km
    table, rows = _sections(spec, st.lat, st.lon, bearings, max_km)
    unc = uncertain_grounds(spec.ground)
    z = latin_hypercube(settings.draws, len(unc), settings.seed)
    sig = np.empty_like(z)
    for j, (_, _, (lo, hi)) in enumerate(unc):
        mu, s = lognormal_params(lo, hi)
        sig[:, j] = np.exp(mu + s * z[:, j])
    e1 = mv_m_to_dbu(radials.e1km_mv_m)[:, None]
    if spec.mixed_path == "millington":
        # Millington's field is linear in the grounds' attenuation curves once the sections are
        # fixed: field = C + Σ_g L_g(curve_g). An uncertain ground's curve at σ is the
        # four-point Lagrange interpolation in ln σ of exact curves at fixed nodes, so its
        # part is Σ_k w_k(σ) L_g(node curve k): each L_g(node curve) is computed once, and a
        # draw is a weighted sum of these fields.
        logd = model(freq, rows[0].ground, k).table[0]
        ntab = logd.size
        zero = np.zeros((len(rows), ntab))
        att = np.vstack([model(freq, r.ground, k).table[1] for r in rows])
        for row, _, _ in unc:
            att[row] = 0.0
        base = millington_radials_db(table, d, freq, k, stack=(logd, att, {}))
        const = -20.0 * np.log10(d)  # the kernel's field with every curve at 0 dB
        owner = np.repeat(np.arange(len(table)), np.diff(table.ptr))
        parts, nodes, subsets, jobs = [], [], [], []
        for row, g, (lo, hi) in unc:
            x = _nodes(lo, hi)
            nodes.append(x)
            sub = np.unique(owner[table.ground == row])  # the radials that cross this ground
            subsets.append(sub)
            jobs += [(row, g, v, _subtable(table, sub)) for v in x]

        def node_field(job):
            row, g, v, part = job
            one = zero.copy()
            one[row] = model(freq, Ground(float(np.exp(v)), g.eps_r), k).table[1]
            return (millington_radials_db(part, d, freq, k, stack=(logd, one, {}))
                    - const).astype(np.float32).reshape(-1)

        # the node fields are independent; numpy leaves the interpreter lock in its array
        # work, so two threads share the cores (the draws below use the BLAS threads)
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max(1, min(4, os.cpu_count() or 1))) as pool:
            done = list(pool.map(node_field, jobs))
        k0 = 0
        for x, sub in zip(nodes, subsets):
            fields = done[k0:k0 + x.size]
            k0 += x.size
            parts.append(np.stack(fields) if sub.size else np.zeros((x.size, 0), np.float32))
        base = base + e1
        nb, nd = base.shape
        weights = []
        for j in range(len(unc)):
            w = np.zeros((settings.draws, nodes[j].size), dtype=np.float32)
            for i in range(settings.draws):
                first, wj = _weights(nodes[j], float(np.log(sig[i, j])))
                w[i, first:first + wj.size] = wj
            weights.append(w)
        base32 = base.astype(np.float32)  # single precision: 1e-5 dB at 100 dBµV/m
        for start in range(0, settings.draws, BATCH):  # a few draws per matrix product
            stop = min(start + BATCH, settings.draws)
            batch = np.broadcast_to(base32, (stop - start, nb, nd)).copy()
            for j, sub in enumerate(subsets):
                if sub.size:
                    batch[:, sub, :] += (weights[j][start:stop] @ parts[j]).reshape(
                        stop - start, sub.size, nd)
            for i in range(start, stop):
                yield (i, {row: float(sig[i, j]) for j, (row, _, _) in enumerate(unc)},
                       batch[i - start])
    else:
        from .ground import SectionTable

        for i in range(settings.draws):
            grounds = [r.ground for r in rows]
            for j, (row, g, _) in enumerate(unc):
                grounds[row] = Ground(float(sig[i, j]), g.eps_r, g.name)
            t = SectionTable(table.ptr, table.start_km, table.end_km, table.ground, grounds)
            f = np.vstack([path_field_db(spec.mixed_path, secs, d, freq, k) for secs in t]) + e1
            yield i, {row: float(sig[i, j]) for j, (row, _, _) in enumerate(unc)}, f


def first_below(dist, field_dbu, level_dbu: float) -> np.ndarray:
    """Per radial the distance [km] where the field first falls below ``level_dbu`` (linear in
    dB between grid points): NaN where it is below at the first distance, inf where it never
    falls below: the ``first_km`` of :func:`~.contours.first_crossings`, found with one pass."""
    f = np.asarray(field_dbu)
    below = f < level_dbu
    j = np.argmax(below, axis=1)
    out = np.full(f.shape[0], np.inf)
    out[below[:, 0]] = np.nan
    ok = below.any(axis=1) & ~below[:, 0]
    r = np.flatnonzero(ok)
    f0, f1 = f[r, j[r] - 1].astype(float), f[r, j[r]].astype(float)
    d0, d1 = dist[j[r] - 1], dist[j[r]]
    out[r] = d0 + (f0 - level_dbu) / (f0 - f1) * (d1 - d0)
    return out


def _contour_area(bearings, dist, first_km, proj) -> float:
    """Area [km²] inside a star-shaped contour given by its distance per bearing: the area
    integral of :func:`~.contours.polar_area_km2` on the field first_km − d (≥ 0 inside)."""
    r = np.where(np.isnan(first_km), 0.0, np.where(np.isinf(first_km), dist[-1], first_km))
    return polar_area_km2(bearings, dist, r[:, None] - dist[None, :], 0.0, proj)


def _polygon(bearings, first_km, dist, proj):
    import shapely

    from .geodesy import xy_to_lonlat_geometry

    r = np.where(np.isnan(first_km), 0.0, np.where(np.isinf(first_km), dist[-1], first_km))
    a = np.radians(bearings)
    ring = np.column_stack([r * np.sin(a), r * np.cos(a)])
    poly = shapely.Polygon(ring)
    if not poly.is_valid:
        poly = shapely.make_valid(poly)
    return xy_to_lonlat_geometry(poly, proj)


def ground_bands(spec, radials: RadialFields, levels, max_km: float, settings: UncertaintySettings,
                 community_xy=None, goals=None) -> list[LevelBand]:
    """For every level (mV/m) the contour distance per bearing at the 5 %, 50 % and 95 %
    points over the draws, the area inside each, and (where ``goals`` gives a share goal for
    the level and a community is given in the site's plane) the probability that the
    community share reaches it."""
    from .geodesy import local_projection

    st = spec.station
    proj = local_projection(st.lat, st.lon)
    bearings, dist = radials.bearings_deg, radials.dist_km
    goals = goals or {}
    lv_dbu = [float(mv_m_to_dbu(v)) for v in levels]
    first = np.empty((settings.draws, len(levels), bearings.size))
    shares = {i: [] for i, v in enumerate(levels) if goals.get(v) is not None}
    for i, _sig, f in draw_fields(spec, radials, settings, max_km):
        for j, lv in enumerate(lv_dbu):
            first[i, j] = first_below(dist, f, lv)
        if shares and community_xy is not None:
            got = polar_shares(bearings, dist, f, [lv_dbu[j] for j in shares], community_xy)
            for j, s in zip(shares, got):
                shares[j].append(s)
    out = []
    for j, v in enumerate(levels):
        # NaN (below the level at once) counts as 0 km; inf (beyond the radial) is ordered
        # above every distance and stays inf where a percentile reaches it
        x = np.where(np.isnan(first[:, j]), 0.0, first[:, j])
        x = np.where(np.isinf(x), BEYOND_KM, x)
        km = {}
        for b, p in zip(BANDS, PERCENTILES):
            q = np.percentile(x, p, axis=0, method="hazen")
            km[b] = np.where(q > dist[-1] + 1.0, np.inf, q)
        area = {b: _contour_area(bearings, dist, km[b], proj) for b in BANDS}
        band = LevelBand(float(v), km, area)
        if j in shares and shares[j]:
            band.share_goal = float(goals[v])
            band.share_goal_probability = float(np.mean(np.asarray(shares[j]) >= goals[v]))
        band.polygons = {b: _polygon(bearings, km[b], dist, proj) for b in ("p05", "p95")}
        out.append(band)
    return out
