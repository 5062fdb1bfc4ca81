"""A neighbour's own night limit and whether the proposal enters it (the RSS with 50 % exclusion
along the neighbour's night contour), and a class A station's 50 % sky-wave service contour (47
CFR 73.21(a)(1), 73.190); docs/methods.md §5.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from ..contours import first_crossings, radial_fields, radial_length_km
from ..geodesy import fwd_points
from ..groundwave import mv_m_to_dbu
from ..skywave import METHOD_DISTANCE_KM
from ..station import Station
from .fields import night_fields, sky_dbu_from
from .nightservice import CONVERGED_DB, MAX_ITERATIONS
from .records import InterferencePlan, Neighbour, NightSettings
from .rss import _dbu_to_linear, _limit_dbu, _rss_limit, _rss_sorted


@dataclass(frozen=True)
class NeighbourLimit:
    """A neighbour's own night limit along its protected night contour, with and without the
    proposal (the published procedure for a night application: does the proposal enter the
    neighbour's RSS night limit?)."""

    neighbour: str
    bearings_deg: np.ndarray
    lat: np.ndarray
    lon: np.ndarray
    without_dbu: np.ndarray  # RSS of the other listed stations (never below the class level)
    with_dbu: np.ndarray  # the same with the proposal
    proposal_used: np.ndarray  # True where the exclusion rule keeps the proposal
    proposal_dbu: np.ndarray  # the proposal's ratio × interfering field at each point
    others_dbu: np.ndarray = field(default=None, repr=False)  # (n_others, n_points)
    fixed_dbu: float = -np.inf  # the class's fixed night level
    exclusion_percent: int = 50

    def limit_with(self, scale_db: float = 0.0) -> np.ndarray:
        """The limit [dBµV/m] with the proposal's product raised by ``scale_db``."""
        others = self.others_dbu if self.others_dbu is not None else np.empty((0, self.lat.size))
        prods = np.vstack([others, self.proposal_dbu[None, :] + scale_db])
        return _rss_limit(prods, None, None, self.exclusion_percent, self.fixed_dbu,
                          want_names=False)[0]

    def entry_scale_db(self) -> float:
        """How far [dB] the proposal's product may change before it raises the limit anywhere
        (negative: it must fall by that much), within ±80 dB; to 4e-5 dB."""
        return first_entry_db([self])[0]

    def _raises_at(self):
        """``raises(xs)``: for each x [dB] of ``xs``, does the proposal's product raised by x
        raise the limit anywhere? (the test of :func:`first_entry_db`)"""
        others = self.others_dbu if self.others_dbu is not None else np.empty((0, self.lat.size))
        cols = [(_dbu_to_linear(others), np.asarray(self.proposal_dbu, dtype=float),
                 self.without_dbu + 1e-9, np.full(self.proposal_dbu.size, self.fixed_dbu))]
        pts = _EntryColumns.of(cols, np.full(self.proposal_dbu.size, -np.inf),
                               self.exclusion_percent)
        return lambda xs: pts.raising(np.atleast_1d(xs)).any(axis=1)

    @property
    def increase_db(self) -> float:
        """Largest rise of the limit that the proposal causes [dB] (0 where it is excluded)."""
        return float(np.max(self.with_dbu - self.without_dbu)) if self.with_dbu.size else 0.0

    def margin_db(self) -> float:
        """The margin of this check [dB]: while the proposal is excluded, how far its products
        may still rise before they enter the limit (:meth:`entry_scale_db`); once it enters,
        minus the rise it causes."""
        return self.entry_scale_db() if self.excluded else -self.increase_db

    def deciding_point(self) -> int | None:
        """Index of the point that decides the check: where the proposal raises the limit most,
        or, while it is excluded, where its product comes nearest the limit."""
        if not self.lat.size:
            return None
        if not self.excluded:
            return int(np.argmax(self.with_dbu - self.without_dbu))
        return int(np.argmax(self.proposal_dbu - self.without_dbu))

    @property
    def excluded(self) -> bool:
        """True when the proposal raises the limit nowhere (the exclusion rule leaves it out,
        or the limit stays at the class level)."""
        return not bool(np.any(self.with_dbu > self.without_dbu + 1e-9))


class _EntryColumns:
    """The points of one or more night limits, ready for trial changes of the proposal's
    products: per point the other stations' linear values sorted largest first, the proposal
    [dBµV/m], the limit without it + 1e-9 dB, the class level, the limit's number and the
    change below which the point cannot raise its limit."""

    def __init__(self, srt, prop, bar, fixed, owner, need, exclusion):
        self.srt, self.prop, self.bar, self.fixed = srt, prop, bar, fixed
        self.owner, self.need, self.exclusion = owner, need, exclusion
        n, npts = srt.shape
        self._rank = np.arange(n + 1)[:, None, None]
        self._pad = np.concatenate([srt, np.zeros((1, npts))])[:, None, :]  # value at rank r
        self._before = np.concatenate([np.zeros((1, npts)), srt])[:, None, :]  # … at r − 1

    @classmethod
    def of(cls, cols, need, exclusion: int):
        """From per-limit (others' linear values (n, P), proposal (P,), limit without it +
        1e-9 dB (P,), class level (P,))."""
        owner = np.repeat(np.arange(len(cols)), [c[1].size for c in cols])
        n_rows = max(c[0].shape[0] for c in cols)
        lin = np.concatenate([np.vstack([c[0], np.zeros((n_rows - c[0].shape[0], c[1].size))])
                              for c in cols], axis=1)
        prop, bar, fixed = (np.concatenate([c[i] for c in cols]) for i in (1, 2, 3))
        srt = -np.sort(-lin, axis=0)  # (n, P), largest first
        return cls(srt, prop, bar, fixed, owner, np.asarray(need, dtype=float), exclusion)

    def only(self, mask) -> _EntryColumns:
        return _EntryColumns(self.srt[:, mask], self.prop[mask], self.bar[mask],
                             self.fixed[mask], self.owner[mask], self.need[mask],
                             self.exclusion)

    def raising(self, xs):
        """(len(xs), P): does the proposal's product changed by x [dB] raise the limit at
        each point? The same arithmetic as :meth:`NeighbourLimit.limit_with` (RSS with the
        exclusion rule, never below the class level), with only the proposal's value slotted
        into its place in every sorted column (after equal values, as a stable sort of the
        stacked rows puts it)."""
        v = _dbu_to_linear(self.prop[None, :] + np.asarray(xs, dtype=float)[:, None])  # (m, P)
        pos = (self.srt[:, None, :] >= v[None]).sum(axis=0)  # the proposal's rank per column
        seq = np.where(self._rank < pos, self._pad,
                       np.where(self._rank == pos, v[None], self._before))
        limit = _limit_dbu(_rss_sorted(seq, self.exclusion)[0], self.fixed[None, :])
        return limit > self.bar[None, :]


def first_entry_db(limits) -> tuple[float, int]:
    """The smallest change [dB] of the proposal's products at which it raises any of these
    neighbours' night limits, within ±80 dB and to 4e-5 dB, and which limit that is (the first
    of them where several are reached within that step; the first when none is).

    The points of every limit are searched together, 16 sub-intervals a round, with the same
    arithmetic as :meth:`NeighbourLimit.limit_with` (RSS with the exclusion rule, never below
    the class level): the other stations' values are sorted once, and for each trial change
    only the proposal's value is slotted into its place in every column (after equal values,
    as a stable sort of the stacked rows puts it). The search starts from a bracket that the
    rule gives per point: the proposal cannot be kept below ``exclusion`` × the largest other
    value there, and it surely raises the limit once it exceeds the limit without it; points
    whose lower end lies beyond the upper end found elsewhere cannot be first and are left out.
    """
    if not limits:
        return 80.0, 0
    if len({lim.exclusion_percent for lim in limits}) > 1:
        found = [first_entry_db([lim]) for lim in limits]
        k = min(range(len(found)), key=lambda i: found[i][0])
        return found[k][0], k
    exclusion = limits[0].exclusion_percent
    cols, need, surely = [], [], []
    for lim in limits:
        v = np.asarray(lim.proposal_dbu, dtype=float)
        live = np.isfinite(v)
        others = lim.others_dbu if lim.others_dbu is not None else np.empty((0, v.size))
        top = others.max(axis=0) if others.shape[0] else np.full(v.size, -np.inf)
        lower = np.full(v.size, -np.inf)
        if exclusion:
            ok = np.isfinite(top)
            lower[ok] = top[ok] + 20 * np.log10(exclusion / 100.0) - v[ok]
        need.append(np.where(live, lower, np.inf))
        surely.append(np.where(live, lim.without_dbu - v, np.inf) + 1e-6)
        cols.append((_dbu_to_linear(others), v, lim.without_dbu + 1e-9,
                     np.full(v.size, lim.fixed_dbu)))
    need, surely = np.concatenate(need), np.concatenate(surely)
    if not (need < np.inf).any():  # no proposal field at any point
        return 80.0, 0
    lo = max(-80.0, float(need.min()) - 1e-6)
    hi = min(80.0, float(surely.min()))
    pts = _EntryColumns.of(cols, need, exclusion)
    pts = pts.only(pts.need <= hi)

    def which(x):
        hit = pts.raising([x])[0]
        return int(pts.owner[hit].min()) if hit.any() else 0

    if pts.owner.size == 0:
        return 80.0, 0
    if lo <= -80.0 and pts.raising([-80.0]).any():
        return -80.0, which(-80.0)
    if hi >= 80.0 and not pts.raising([80.0]).any():
        return 80.0, 0
    while hi - lo > 4e-5:  # 16 sub-intervals a round
        xs = np.linspace(lo, hi, 17)[1:-1]
        hit = pts.raising(xs).any(axis=1)
        if not hit.any():
            lo = float(xs[-1])
            continue
        first = int(np.argmax(hit))
        hi = float(xs[first])
        lo = float(xs[first - 1]) if first > 0 else lo
        if (pts.need > hi).any():  # points that can no longer be first
            pts = pts.only(pts.need <= hi)
    return lo, which(hi)


def skywave_service_points(n: Station, level_mv_m: float, bearings, night: NightSettings):
    """Points (bearing, km, lat, lon) of a station's 50 % sky-wave service contour at
    ``level_mv_m``: along each bearing the farthest distance where its 50 % sky wave (the
    night method's, with its radiation at the departure angle) is still at the level."""
    lo, hi = METHOD_DISTANCE_KM[night.method]
    dist = np.arange(max(lo, 10.0), hi + 1e-9, 10.0)
    bearings = np.asarray(bearings, dtype=float)
    bb, dd = np.meshgrid(bearings, dist, indexing="ij")
    plat, plon = fwd_points(n.lat, n.lon, bb.ravel(), dd.ravel())
    half = dataclasses.replace(night, percent=50)
    f = sky_dbu_from(n.lat, n.lon, n.freq_khz, n.night_antenna, n.power_night_kw, plat, plon,
                     half).reshape(bb.shape)
    level = float(mv_m_to_dbu(level_mv_m))
    above = np.where(np.isnan(f), False, f >= level)
    out_b, out_d = [], []
    for i in range(bearings.size):
        idx = np.flatnonzero(above[i])
        if idx.size == 0:
            continue
        j = idx[-1]
        if j + 1 < dist.size:  # interpolate in dB to the crossing
            f0, f1 = f[i, j], f[i, j + 1]
            t = (f0 - level) / (f0 - f1) if f0 != f1 else 0.0
            out_d.append(dist[j] + t * (dist[j + 1] - dist[j]))
        else:
            out_d.append(dist[j])
        out_b.append(bearings[i])
    b, d = np.array(out_b), np.array(out_d)
    plat, plon = fwd_points(n.lat, n.lon, b, d) if b.size else (np.array([]), np.array([]))
    return b, d, np.atleast_1d(plat), np.atleast_1d(plon)


def _neighbour_night_points(n: Neighbour, level_dbu, rad, max_km):
    """Points of n's night ground-wave contour at a level per bearing (end of the radial where
    it is still above)."""
    first, _ = first_crossings(rad, level_dbu)
    dist = np.where(np.isinf(first), max_km, first)
    ok = np.isfinite(dist)
    plat, plon = fwd_points(n.lat, n.lon, rad.bearings_deg[ok], dist[ok])
    return ok, np.atleast_1d(plat), np.atleast_1d(plon)


@dataclass(frozen=True)
class NeighbourNightBase:
    """A class B/C neighbour's night contour and its night limit from the other listed stations
    (without the proposal): independent of where the proposal is."""

    neighbour: str
    bearings_deg: np.ndarray
    lat: np.ndarray
    lon: np.ndarray
    without_dbu: np.ndarray
    others_dbu: np.ndarray  # (n_others, n_points) ratio × interfering field
    fixed_dbu: float
    exclusion_percent: int

    def with_proposal(self, proposal_dbu) -> NeighbourLimit:
        """The limit with the proposal's ratio × field [dBµV/m] at the points added."""
        prods = np.vstack([self.others_dbu, np.asarray(proposal_dbu, float)[None, :]])
        with_p, _, _, used = _rss_limit(prods, None, None, self.exclusion_percent,
                                        self.fixed_dbu, want_names=False)
        return NeighbourLimit(self.neighbour, self.bearings_deg, self.lat, self.lon,
                              self.without_dbu, with_p, used[-1], np.asarray(proposal_dbu, float),
                              self.others_dbu, self.fixed_dbu, self.exclusion_percent)


def neighbour_night_base(n: Neighbour, others, spec, plan: InterferencePlan, bearings,
                         level_mv_m: float, skipped: set | None = None) -> NeighbourNightBase:
    """A class B/C neighbour's night contour at the higher of ``level_mv_m`` and its own night
    limit from ``others`` ((station, ratio dB) of the listed stations that interfere with it),
    iterated (contour → limit on it → contour) until the limit moves less than CONVERGED_DB."""
    e1 = n.night_antenna.field_mv_m(bearings, 0.0, n.power_night_kw)
    max_km = radial_length_km(n.freq_khz, spec.ground, level_mv_m, float(e1.max()), spec.earth_k)
    rad = radial_fields(n.freq_khz, spec.ground, n.lat, n.lon, bearings, e1, max_km, 0.5,
                        spec.mixed_path, spec.earth_k)
    fixed = float(mv_m_to_dbu(level_mv_m))
    exclusion = plan.night.exclusion_percent
    ratios = np.array([r for _, r in others])[:, None] if others else np.zeros((0, 1))

    def others_at(plat, plon):
        f, _g = night_fields([o for o, _ in others], plat, plon, spec, plan.night, skipped)
        prods = f + ratios
        limit = (_rss_limit(prods, None, None, exclusion, fixed, want_names=False)[0]
                 if others else np.full(np.size(plat), fixed))
        return prods, limit

    level = np.full(bearings.shape, fixed)
    for _ in range(MAX_ITERATIONS):
        ok, plat, plon = _neighbour_night_points(n, level, rad, max_km)
        prods, without = others_at(plat, plon)
        new = np.full(bearings.shape, fixed)
        new[ok] = without
        done = np.max(np.abs(new - level)) < CONVERGED_DB
        level = new
        if done:
            break
    return NeighbourNightBase(n.name, bearings[ok], plat, plon, without,
                              np.asarray(prods).reshape(len(others), plat.size), fixed, exclusion)
