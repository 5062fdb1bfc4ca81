"""Interference to and from neighbouring stations: protection ratios, RSS, night limit, margins.

Day: ground waves (mixed paths over the study's zones). Night: 10 % sky waves (47 CFR 73.190 or
ITU-R P.1147) of the neighbours at the proposed station's service area, combined by RSS into a
night limit; and the proposed station's sky wave at each neighbour's protected contour.

References
----------
Protection ratios and RSS: docs/methods.md §5 (47 CFR 73.37, 73.182, 73.183(c); Rio 1981 plan;
ITU-R BS.560).
"""

from __future__ import annotations

import dataclasses
import functools
import re
from dataclasses import dataclass, field, fields

import numpy as np
import shapely

from .antenna import Array
from .classes import OVERLAP_RULES, PROTECTION_PLANS, STATION_CLASSES, StationClass
from .contours import (
    MAX_RADIAL_KM,
    bearing_arc,
    contour_geometry,
    first_crossings,
    first_distance_km,
    polar_region,
    level_contour,
    radial_fields,
    radial_length_km,
)
from .geodesy import fwd_points, geodesic_area_km2, inverse, local_projection, midpoint
from .ground import GroundMap
from .groundwave import model, mv_m_to_dbu
from .mixedpath import millington_points_db, path_field_db
from .skywave import (
    METHOD_DISTANCE_KM,
    SkyPath,
    cfr_field_dbu,
    cfr_geometry,
    coupling_loss_db,
    departure_deg,
    geomagnetic_lat_deg,
    in_method_range,
    itu_field_dbu,
    sky_field_dbu,
    sky_path,
)
from .station import Station

__all__ = [
    "Neighbour",
    "ProtectionTable",
    "NightSettings",
    "channel_offset",
    "rss",
    "point_ground_dbu",
    "protected_contour_points",
    "describe_max_power",
    "summary_cells",
    "margin_text",
    "citation",
    "field_text",
    "mv_m_text",
    "night_contribution",
    "NeighbourLimit",
    "OverlapCheck",
]

ORDINALS = ("co_channel", "adjacent_1", "adjacent_2", "adjacent_3")
#: The default plan's ratios (47 CFR, the Americas' 10 kHz raster): see classes.PROTECTION_PLANS.
DEFAULT_RATIOS = dict(PROTECTION_PLANS["us"]["ratios"])


@dataclass(frozen=True)
class ProtectionTable:
    """Protection (D/U) ratios [dB] by period and channel offset (0 = co-channel … 3).

    An offset without a ratio contributes nothing; the report says so.
    """

    raster_khz: float = 10.0
    ratios: dict = field(default_factory=lambda: dict(DEFAULT_RATIOS))
    plan: str = "us"

    def adjacent_day_mv_m(self, offset: int | None) -> float | None:
        """The plan's protected day contour for every class at this offset, if it sets one
        (the US plan: 0.5 mV/m on the first adjacent channel, 47 CFR 73.37(a))."""
        if offset is None:
            return None
        row = PROTECTION_PLANS.get(self.plan, {}).get("adjacent_day_mv_m", {}).get(abs(offset))
        return None if row is None else row[0]

    def ratio_db(self, period: str, offset: int | None):
        """(ratio dB, source) or None when no ratio is defined for that offset."""
        if offset is None:
            return None
        return self.ratios.get((period, abs(int(offset))))

    def rows(self) -> list[dict]:
        """Table rows for reports: period, offset, ratio (None if undefined), source."""
        out = []
        for p in ("day", "night"):
            for i in range(4):
                r = self.ratios.get((p, i))
                if r is not None:
                    source = r[1]
                elif p == "day" and i in OVERLAP_RULES:
                    source = f"no ratio: day contour overlap instead — {OVERLAP_RULES[i][2]}"
                else:
                    source = "not defined: contributes nothing"
                out.append({"period": p, "offset_channels": i,
                            "ratio_db": None if r is None else r[0], "source": source})
        return out


@dataclass(frozen=True)
class NightSettings:
    """How night-time sky wave and the night limit are computed."""

    method: str = "cfr"  # "cfr" (47 CFR 73.190) or "itu" (ITU-R P.1147)
    percent: int = 10
    exclusion_percent: int = 50  # 50 or 25 (RSS exclusion rule) or 0 (plain RSS)
    layer_height_km: float = 100.0
    itu_region: int = 2
    solar: str = "elsewhere"
    sunspot: float = 0.0
    floor_mv_m: float = 0.5  # night limit when no interferer is stronger
    bearing_step_deg: float = 5.0

    KEYS = ("method", "percent", "exclusion_percent", "layer_height_km", "itu_region", "solar",
            "sunspot", "floor_mv_m", "bearing_step_deg")

    def to_table(self) -> dict:
        return {k: getattr(self, k) for k in self.KEYS}

    @property
    def itu_kwargs(self) -> dict:
        return {"region": self.itu_region, "solar": self.solar, "sunspot": self.sunspot}


@dataclass(frozen=True)
class Neighbour(Station):
    """A neighbouring station to protect and to be protected from."""

    protected_day_mv_m: float | None = None  # None: from the class (docs/methods.md §5)
    protected_night_mv_m: float | None = None  # None: from the class
    antenna_desc: dict = field(default_factory=dict, compare=False, repr=False)

    def day_level_mv_m(self, table: dict | None = None, offset: int = 0,
                       protection: ProtectionTable | None = None) -> float:
        """The protected day contour: as given, else the plan's level for this channel offset
        (47 CFR 73.37(a): 0.5 mV/m for every class on the first adjacent channel), else the
        class's."""
        if self.protected_day_mv_m is not None:
            return self.protected_day_mv_m
        if protection is not None:
            level = protection.adjacent_day_mv_m(offset)
            if level is not None:
                return level
        return self.klass(table).day_mv_m

    def night_level_mv_m(self, table: dict | None = None) -> float | None:
        """The fixed part of the protected night contour: as given, else the class's (None for
        a class without night protection)."""
        if self.protected_night_mv_m is not None:
            return self.protected_night_mv_m
        return self.klass(table).night_mv_m


def channel_offset(freq_khz: float, other_khz: float, raster_khz: float):
    """Channel offset (0, ±1, …) on the raster, or None when the spacing is off the raster."""
    n = (other_khz - freq_khz) / raster_khz
    k = int(round(n))
    return k if abs(n - k) * raster_khz <= 0.5 else None


def rss(values, exclusion_percent: int = 50):
    """Root-sum-square with the exclusion rule (docs/methods.md §5).

    Values (ratio × field, linear) are sorted in decreasing order and accumulated; with a 50 %
    (25 %) rule, accumulation stops at the first value below 50 % (25 %) of the RSS of the
    larger ones. Returns (rss, used mask in the input order).
    """
    v = np.asarray(values, dtype=float)
    used = np.zeros(v.shape, dtype=bool)
    if v.size == 0:
        return 0.0, used
    order = np.argsort(-v, kind="stable")
    total = 0.0
    for i in order:
        if v[i] <= 0:
            break
        if exclusion_percent and total > 0 and v[i] < exclusion_percent / 100.0 * np.sqrt(total):
            break
        total += v[i] ** 2
        used[i] = True
    return float(np.sqrt(total)), used


def point_ground_dbu(freq_khz, ground: GroundMap, lat, lon, array: Array, power_kw: float,
                     pts_lat, pts_lon, method: str = "millington", earth_k: float = 4 / 3):
    """Ground-wave field [dBµV/m] from a transmitter at (lat, lon) at arbitrary points.

    Each path is the radial from the transmitter toward the point, with its own ground sections.
    Points closer than one wavelength get NaN.
    """
    pts_lat = np.atleast_1d(np.asarray(pts_lat, float))
    pts_lon = np.atleast_1d(np.asarray(pts_lon, float))
    d, az, _ = inverse(lat, lon, pts_lat, pts_lon)
    return ground_dbu_along(freq_khz, ground, lat, lon, array, power_kw, az, d, method, earth_k)


def ground_dbu_along(freq_khz, ground: GroundMap, lat, lon, array: Array, power_kw: float,
                     bearings_deg, dist_km, method: str = "millington", earth_k: float = 4 / 3):
    """Ground-wave field [dBµV/m] from a transmitter at (lat, lon) at points given by bearing
    [deg] and distance [km] from it, each over its own radial's ground sections (NaN closer
    than one wavelength)."""
    az = np.atleast_1d(np.asarray(bearings_deg, float))
    d = np.atleast_1d(np.asarray(dist_km, float))
    out = np.full(d.shape, np.nan)
    if d.size == 0:
        return out
    e1 = array.field_mv_m(az, 0.0, power_kw)
    lam = model(freq_khz, ground.default, earth_k).wavelength_km
    far = np.flatnonzero(d >= lam)
    if far.size == 0:
        return out
    secs = ground.radial_sections(lat, lon, az[far], float(d[far].max()) + 1.0)
    if method == "millington":  # all paths in one pass
        out[far] = millington_points_db(secs, d[far], freq_khz, earth_k) + mv_m_to_dbu(e1[far])
        return out
    for k, i in enumerate(far):
        out[i] = path_field_db(method, secs[k], [d[i]], freq_khz, earth_k)[0] + mv_m_to_dbu(e1[i])
    return out


def protected_contour_points(freq_khz, ground: GroundMap, lat, lon, array: Array,
                             power_kw: float, level_mv_m: float, bearings,
                             method="millington", earth_k=4 / 3, step_km=0.5,
                             max_km: float | None = None, polygons: dict | None = None,
                             key=None):
    """Points (bearing, km, lat, lon) of a station's ground-wave contour at ``level_mv_m``.

    Bearings where the level is not reached are dropped; where it is still exceeded at the end of
    the radial, the end point is used. With ``polygons``, the contour's lon/lat polygon (from
    the same contouring as the study's own contours) is stored under ``key``.
    """
    bearings = np.asarray(bearings, dtype=float)
    e1 = array.field_mv_m(bearings, 0.0, power_kw)
    if max_km is None:
        max_km = radial_length_km(freq_khz, ground, level_mv_m, float(e1.max()), earth_k)
    rad = radial_fields(freq_khz, ground, lat, lon, bearings, e1, max_km, step_km, method, earth_k)
    c = level_contour(rad, level_mv_m, "", local_projection(float(lat), float(lon)))
    if polygons is not None:
        polygons[key] = c.polygon_lonlat
    dist = np.where(np.isinf(c.first_km), max_km, c.first_km)
    ok = np.isfinite(dist)
    plat, plon = fwd_points(lat, lon, bearings[ok], dist[ok])
    return bearings[ok], dist[ok], plat, plon


def sky_dbu_from(tx_lat, tx_lon, freq_khz, array: Array, power_kw: float, pts_lat, pts_lon,
                 night: NightSettings):
    """10 % (or 50 %) sky wave [dBµV/m] of a transmitter at the points, with its antenna's
    radiation toward each point at the departure angle.

    Points whose path lies outside the method's distance range get NaN (the caller skips them
    and says so); a transmitter with no night power gives −inf (no sky wave).
    """
    pts_lat = np.atleast_1d(np.asarray(pts_lat, float))
    pts_lon = np.atleast_1d(np.asarray(pts_lon, float))
    out = np.full(pts_lat.shape, np.nan)
    if power_kw <= 0:
        return np.full(pts_lat.shape, -np.inf)
    path = sky_path(tx_lat, tx_lon, pts_lat, pts_lon, height_km=night.layer_height_km,
                    geometry="cfr" if night.method == "cfr" else "geodesic")
    ok = in_method_range(path.distance_km, night.method)
    if not ok.any():
        return out
    sub = SkyPath(*(np.asarray(getattr(path, f.name))[ok] for f in fields(SkyPath)))
    e_dep = array.field_mv_m(sub.azimuth_deg, sub.departure_deg, power_kw)
    out[ok] = sky_field_dbu(sub, e_dep, night.method, night.percent, freq_khz=freq_khz,
                            tx=(tx_lat, tx_lon), rx=(pts_lat[ok], pts_lon[ok]),
                            **(night.itu_kwargs if night.method == "itu" else {}))
    return out


# --- the analysis ----------------------------------------------------------------------------

@dataclass(frozen=True)
class InterferencePlan:
    """What the interference part of a study needs besides the station and the ground."""

    neighbours: tuple[Neighbour, ...]
    protection: ProtectionTable = field(default_factory=ProtectionTable)
    night: NightSettings = field(default_factory=NightSettings)
    protected_day_mv_m: float = 0.5  # the proposed station's own protected day contour
    contour_step_deg: float = 10.0  # spacing of points on protected contours
    neighbours_file: str = ""
    classes: dict = field(default_factory=dict)  # station classes (empty: STATION_CLASSES)

    KEYS = ("protected_day_mv_m", "contour_step_deg", "neighbours")


@dataclass(frozen=True)
class MarginRow:
    """One D/U check at one point."""

    kind: str  # "day received", "day caused", "night caused"
    neighbour: str
    offset_channels: int
    ratio_db: float
    bearing_deg: float  # from the station whose contour the point lies on
    lat: float
    lon: float
    wanted_dbu: float
    unwanted_dbu: float
    mechanism: str = "ground"  # what carries the unwanted field: "ground" or "sky" (wave)

    @property
    def margin_db(self) -> float:
        """D − U − protection ratio [dB]; ≥ 0 passes."""
        return self.wanted_dbu - self.unwanted_dbu - self.ratio_db

    @property
    def passed(self) -> bool:
        return self.margin_db >= 0.0


@dataclass(frozen=True)
class NightResult:
    """Night limit and night service contour of the proposed station."""

    power_kw: float
    bearings_deg: np.ndarray
    limit_dbu: np.ndarray  # usable field (night limit) per bearing
    contour_km: np.ndarray  # own ground wave at the limit (NaN: not reached)
    polygon_xy: object
    polygon_lonlat: object
    area_km2: float
    contributors: list  # per bearing: names of the interferers the RSS kept
    mechanisms: list = field(default_factory=list)  # per bearing: "sky"/"ground" of each kept

    @property
    def limit_mv_m(self) -> np.ndarray:
        return 10 ** (self.limit_dbu / 20) / 1e3


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


@dataclass(frozen=True)
class OverlapCheck:
    """Day contour overlap with a second- or third-adjacent neighbour."""

    neighbour: str
    offset_channels: int
    own_mv_m: float
    other_mv_m: float
    area_km2: float
    points: tuple  # (lat, lon) inside each overlapping part
    source: str

    @property
    def passed(self) -> bool:
        return self.area_km2 <= 0.0


@dataclass(frozen=True)
class InterferenceResult:
    rows: tuple[MarginRow, ...]
    night: NightResult | None
    max_power: dict
    notes: tuple[str, ...]
    protection: ProtectionTable
    settings: NightSettings
    skipped: tuple = ()  # checks left out because a path is outside the method's range
    protected_contours: dict = field(default_factory=dict)  # (name, period) → lon/lat polygon
    neighbour_limits: tuple = ()  # NeighbourLimit per class B/C neighbour with a night ratio
    overlaps: tuple = ()  # OverlapCheck per second/third-adjacent neighbour

    def worst(self, kind: str | None = None, neighbour: str | None = None):
        rows = [r for r in self.rows if (kind is None or r.kind == kind)
                and (neighbour is None or r.neighbour == neighbour)]
        return min(rows, key=lambda r: r.margin_db) if rows else None

    def neighbour_summary(self) -> list[dict]:
        """Worst margin per neighbour and check, then the night-limit entries and overlaps."""
        out = []
        for name in dict.fromkeys(r.neighbour for r in self.rows):
            for kind in ("day received", "day caused", "night caused"):
                w = self.worst(kind, name)
                if w is not None:
                    out.append({"neighbour": name, "kind": kind, "offset_channels": w.offset_channels,
                                "ratio_db": w.ratio_db, "worst_margin_db": w.margin_db,
                                "passed": w.passed, "lat": w.lat, "lon": w.lon,
                                "mechanism": w.mechanism if kind == "night caused" else "ground"})
        for lim in self.neighbour_limits:
            i = lim.deciding_point()
            out.append({"neighbour": lim.neighbour, "kind": "night limit entry",
                        "offset_channels": None, "ratio_db": None,
                        "worst_margin_db": lim.margin_db(), "passed": lim.excluded,
                        "lat": float(lim.lat[i]) if i is not None else None,
                        "lon": float(lim.lon[i]) if i is not None else None,
                        "mechanism": "RSS"})
        for ov in self.overlaps:
            lat, lon = ov.points[0] if ov.points else (None, None)
            out.append({"neighbour": ov.neighbour, "kind": "day overlap",
                        "offset_channels": ov.offset_channels, "ratio_db": None,
                        "worst_margin_db": None, "overlap_km2": ov.area_km2,
                        "passed": ov.passed, "lat": lat, "lon": lon, "mechanism": "ground"})
        return out


def summary_cells(row: dict) -> dict:
    """Display texts of one :meth:`InterferenceResult.neighbour_summary` row, shared by the
    command line, the sheet and the window: offset, ratio, value, mechanism and result."""
    off = "" if row["offset_channels"] is None else f"{row['offset_channels']:+d}".replace("+0", "0")
    ratio = "" if row["ratio_db"] is None else f"{row['ratio_db']:g}"
    if row["kind"] == "day overlap":
        value = f"{row['overlap_km2']:.1f} km² overlap"
    elif row["kind"] == "night limit entry":
        value = (f"excluded, {margin_text(row['worst_margin_db'], 2)} dB to spare"
                 if row["passed"] else f"raises it {-row['worst_margin_db']:.2f} dB")
    else:
        value = f"{margin_text(row['worst_margin_db'])} dB"
    by = {"ground": "ground wave", "sky": "sky wave", "RSS": "RSS"}.get(row["mechanism"],
                                                                      row["mechanism"])
    where = "" if row["lat"] is None else f"{row['lat']:.3f}, {row['lon']:.3f}"
    return {"offset": off, "ratio": ratio, "value": value, "by": by,
            "result": "pass" if row["passed"] else "FAILS", "at": where}


#: Margins above this are printed as "> 60" where people read them (sheet, window, CSV, the
#: command's table): a far neighbour with no real path by day would otherwise show hundreds of
#: dB; JSON keeps the number. Common practice, no published source: no MF protection ratio
#: exceeds 40 dB (ITU-R BS.560-4 §1, read), so 60 dB is ample room.
SHOWN_MARGIN_MAX_DB = 60.0
#: Fields below this [dBµV/m] (0.1 µV/m, far under the atmospheric noise of the band) are
#: printed as "< −20" for the same reason.
SHOWN_FIELD_MIN_DBU = -20.0


def margin_text(margin_db: float, decimals: int = 1) -> str:
    """A margin [dB] for people: "> 60" above :data:`SHOWN_MARGIN_MAX_DB`."""
    if margin_db > SHOWN_MARGIN_MAX_DB:
        return f"> {SHOWN_MARGIN_MAX_DB:g}"
    return f"{margin_db:.{decimals}f}"


def field_text(dbu: float, decimals: int = 2) -> str:
    """A field [dBµV/m] for people: "< -20" below :data:`SHOWN_FIELD_MIN_DBU`."""
    if dbu < SHOWN_FIELD_MIN_DBU:
        return f"< {SHOWN_FIELD_MIN_DBU:g}"
    return f"{dbu:.{decimals}f}"


def mv_m_text(dbu: float) -> str:
    """The same field in mV/m, four significant digits and never in scientific notation;
    "< 0.0001" below :data:`SHOWN_FIELD_MIN_DBU`."""
    if dbu < SHOWN_FIELD_MIN_DBU:
        return f"< {10 ** (SHOWN_FIELD_MIN_DBU / 20) / 1e3:.4f}"
    return np.format_float_positional(10 ** (dbu / 20) / 1e3, precision=4, unique=False,
                                      fractional=False, trim="-")


def citation(source: str) -> tuple[str, bool]:
    """A source as printed on the sheet: the paragraph without the "(read)" and "(from
    memory…)" markers, and whether every part of it was read in the published text."""
    verified = "from memory" not in source
    text = re.sub(r"\s*\((?:read|from memory[^)]*)\)", "", source)
    text = re.sub(r"\s*\(([^()]*?),\s*from memory[^)]*\)", r"; \1", text)
    text = re.sub(r"^(?:co-channel|first adjacent|second adjacent|third adjacent)"
                  r"(?: \(9 kHz\))?(?: \d+ dB)?: ", "", text)
    return text.strip(), verified


def describe_max_power(period: str, mp: dict | None) -> str:
    """One line for reports: the maximum power and what limits it."""
    if mp is None:
        return f"Maximum {period} power: no neighbour with a {period} protection ratio limits it"
    where = f"{mp['limiting_neighbour']} at {mp['limiting_lat']:.4f}, {mp['limiting_lon']:.4f}"
    check = mp.get("check", "")
    by = f" ({check})" if check else ""
    rng = mp.get("class_range_kw")
    if mp.get("passes") is False:
        if check == "day overlap" and not mp.get("neighbours_allow_kw"):
            return (f"Maximum {period} power: no power passes: the site is inside the contour "
                    f"of {mp['limiting_neighbour']} that the overlap rule protects")
        return (f"Maximum {period} power: no power in the class range ({format_kw(rng[0])}–"
                f"{format_kw(rng[1])} kW) passes: the neighbours allow at most "
                f"{format_kw(mp['neighbours_allow_kw'])} kW, limited by {where}{by}")
    if check == "class range":
        allow = mp.get("neighbours_allow_kw")
        more = ("no neighbour limits it" if allow is None else
                f"the neighbours would allow {format_kw(allow)} kW")
        return (f"Maximum {period} power: {format_kw(mp['max_power_kw'])} kW (now "
                f"{format_kw(mp['current_power_kw'])} kW), the top of the "
                f"{mp['limiting_neighbour']} ({more})")
    if mp["max_power_kw"] > 100 * mp["current_power_kw"]:
        return (f"Maximum {period} power: more than 100 × the present "
                f"{format_kw(mp['current_power_kw'])} kW ({format_kw(mp['max_power_kw'])} kW by "
                f"the worst margin, {where}); other limits apply")
    return (f"Maximum {period} power: {format_kw(mp['max_power_kw'])} kW (now "
            f"{format_kw(mp['current_power_kw'])} kW), limited by {where}{by}")


def format_kw(kw: float) -> str:
    """A power for reports, never in scientific notation: 8850 → "8,850", 0.871 → "0.871"."""
    if kw >= 1000:
        return f"{kw:,.0f}"
    if kw >= 100:
        return f"{kw:.0f}"
    return f"{kw:.3g}" if kw >= 1e-3 else f"{kw:.6f}"


#: Night limits are iterated (contour → limit on the contour → contour …) until no bearing's
#: limit moves by more than this [dB], at most MAX_ITERATIONS times.
CONVERGED_DB = 0.01
MAX_ITERATIONS = 8


@functools.lru_cache(maxsize=4096)
def _max_horizontal_mv_m(antenna: Array, power_kw: float) -> float:
    """Strongest horizontal radiation [mV/m at 1 km] (cached per antenna and power)."""
    return float(antenna.horizontal_summary(power_kw, step_deg=1.0)["max_mv_m"])


def night_fields(txs, pts_lat, pts_lon, spec, night: NightSettings, skipped: set | None = None):
    """Interfering fields at night of several transmitters at several points, in one pass.

    For every (transmitter, point) pair: the larger of its 10 % (or 50 %) sky wave and its
    night ground wave (mixed paths over the study's zones, night power and antenna). The path
    geometry, the sky-wave formula and the antenna patterns are evaluated for all pairs at once
    (transmitters with the same antenna, power and frequency share one call). The ground wave
    is computed only for pairs where an upper bound exceeds the sky wave: first the homogeneous
    curve of the best ground of the whole map, then that of the best ground the path crosses,
    both with the strongest horizontal radiation; so the result is exact while distant stations
    cost no ground-wave work. Ground wave beyond 2000 km (``MAX_RADIAL_KM``) is taken as
    negligible. Pairs a sky-wave method cannot reach get no sky wave, and the transmitter's name
    goes into ``skipped``.

    Returns
    -------
    field_dbu : (n_tx, n_pts) [dBµV/m], −inf where a transmitter has no night power
    ground : (n_tx, n_pts) bool, True where the ground wave is the larger
    """
    pts_lat = np.atleast_1d(np.asarray(pts_lat, float))
    pts_lon = np.atleast_1d(np.asarray(pts_lon, float))
    n_tx, n_pts = len(txs), pts_lat.size
    out = np.full((n_tx, n_pts), -np.inf)
    if n_tx == 0 or n_pts == 0:
        return out, np.zeros(out.shape, dtype=bool)
    tlat = np.array([t.lat for t in txs])[:, None]
    tlon = np.array([t.lon for t in txs])[:, None]
    if night.method == "cfr":
        d, az, back, mlat, mlon = cfr_geometry(tlat, tlon, pts_lat[None, :], pts_lon[None, :])
    else:
        d, az, back = inverse(tlat, tlon, pts_lat[None, :], pts_lon[None, :])
        mlat, mlon = midpoint(tlat, tlon, pts_lat[None, :], pts_lon[None, :])
    phi = geomagnetic_lat_deg(mlat, mlon)
    dep = np.maximum(departure_deg(d, 1, night.layer_height_km), 0.0)
    ok = in_method_range(d, night.method)
    if skipped is not None:
        for i in np.flatnonzero(~ok.all(axis=1)):
            skipped.add(txs[i].name)
    groups: dict = {}
    for i, t in enumerate(txs):
        if t.power_night_kw > 0:
            groups.setdefault((t.antenna, float(t.power_night_kw), float(t.freq_khz)), []).append(i)
    sky = np.full((n_tx, n_pts), -np.inf)
    for (antenna, power, freq), rows in groups.items():
        rows = np.array(rows)
        m = ok[rows]
        if not m.any():
            continue
        e_dep = antenna.field_mv_m(az[rows][m], dep[rows][m], power)
        with np.errstate(divide="ignore"):
            gain = 20 * np.log10(e_dep)
        if night.method == "cfr":
            f = cfr_field_dbu(d[rows][m], phi[rows][m], night.percent) + gain - 40.0  # /100 mV/m
        else:
            ri, pj = np.nonzero(m)
            lp = (coupling_loss_db(tlat[rows][ri, 0], tlon[rows][ri, 0], az[rows][m])
                  + coupling_loss_db(pts_lat[pj], pts_lon[pj], back[rows][m]))
            f = gain - float(mv_m_to_dbu(300.0)) + 60.0 + itu_field_dbu(
                d[rows][m], freq, phi[rows][m], night.percent, lp_db=lp, **night.itu_kwargs)
        block = sky[rows]
        block[m] = f
        sky[rows] = block
    # ground wave where it can matter: first a bound for all pairs at once (best ground of the
    # map, strongest horizontal radiation), per frequency
    best = max(spec.ground.grounds, key=lambda g: g.sigma_ms_m)
    ground = np.full((n_tx, n_pts), -np.inf)
    bound = np.full((n_tx, n_pts), -np.inf)
    e_max = np.array([_max_horizontal_mv_m(t.antenna, float(t.power_night_kw))
                      if t.power_night_kw > 0 else 0.0 for t in txs])
    for freq in {float(t.freq_khz) for t in txs}:
        rows = np.array([i for i, t in enumerate(txs)
                         if float(t.freq_khz) == freq and t.power_night_kw > 0], dtype=int)
        if rows.size == 0:
            continue
        mod = model(freq, best, spec.earth_k)
        dd = d[rows]
        near = (dd >= mod.wavelength_km) & (dd <= MAX_RADIAL_KM)
        blk = np.full(dd.shape, -np.inf)
        blk[near] = mod.curve_db(dd[near]) + mv_m_to_dbu(np.broadcast_to(e_max[rows][:, None],
                                                                         dd.shape)[near])
        bound[rows] = blk
    for i in np.flatnonzero((bound > sky).any(axis=1)):
        t = txs[i]
        need = np.flatnonzero(bound[i] > sky[i])
        secs = spec.ground.radial_sections(t.lat, t.lon, az[i][need], float(d[i][need].max()) + 1.0)
        # the best ground on each path (the first of equal conductivity, as max() picks)
        sig = np.array([g.sigma_ms_m for g in secs.grounds])[secs.ground]
        owner = np.repeat(np.arange(len(secs)), np.diff(secs.ptr))
        top = np.full(len(secs), -np.inf)
        np.maximum.at(top, owner, sig)
        pick = np.flatnonzero(sig == top[owner])
        best_on_path = secs.ground[pick[np.searchsorted(owner[pick], np.arange(len(secs)))]]
        tight = np.empty(need.size)
        for gi in np.unique(best_on_path):
            sel = best_on_path == gi
            tight[sel] = model(t.freq_khz, secs.grounds[gi], spec.earth_k).curve_db(d[i][need[sel]])
        need = need[tight + mv_m_to_dbu(e_max[i]) > sky[i][need]]
        if need.size:
            ground[i, need] = point_ground_dbu(t.freq_khz, spec.ground, t.lat, t.lon, t.antenna,
                                               t.power_night_kw, pts_lat[need], pts_lon[need],
                                               spec.mixed_path, spec.earth_k)
    ground = np.where(np.isnan(ground), -np.inf, ground)
    return np.maximum(sky, ground), ground > sky


def night_contribution(tx: Station, pts_lat, pts_lon, spec, night: NightSettings,
                       skipped: set | None = None):
    """One transmitter's interfering field at night [dBµV/m] at the points and what carries it
    (``"sky"`` or ``"ground"``); see :func:`night_fields`."""
    f, g = night_fields([tx], pts_lat, pts_lon, spec, night, skipped)
    return f[0], np.where(g[0], "ground", "sky").astype(object)


def _rss_sorted(v, exclusion_percent: int):
    """The RSS rule on values sorted largest first along axis 0 (any further axes are
    columns): the RSS of each column with the exclusion rule and how many values it keeps."""
    csum = np.cumsum(v**2, axis=0)
    prev = np.sqrt(np.concatenate([np.zeros((1,) + v.shape[1:]), csum[:-1]]))
    stop = v <= 0
    if exclusion_percent:
        stop |= (prev > 0) & (v < exclusion_percent / 100.0 * prev)
    stop = np.concatenate([stop, np.ones((1,) + v.shape[1:], dtype=bool)])
    k = np.argmax(stop, axis=0)  # values kept per column
    total = np.where(k > 0, np.sqrt(np.take_along_axis(
        csum, np.maximum(k - 1, 0)[None], axis=0)[0]), 0.0)
    return total, k


def _dbu_to_linear(dbu):
    """dB values → linear (relative to 0 dB); −inf, inf and NaN (no field) give 0."""
    dbu = np.asarray(dbu, dtype=float)
    finite = np.isfinite(dbu)
    return np.where(finite, 10 ** (np.where(finite, dbu, 0.0) / 20.0), 0.0)


def _limit_dbu(total, floor_dbu):
    """A linear RSS → dBµV/m, never below ``floor_dbu`` (−inf where nothing is kept)."""
    with np.errstate(divide="ignore"):
        return np.maximum(np.where(total > 0, 20 * np.log10(np.maximum(total, 1e-300)),
                                   -np.inf), floor_dbu)


def rss_columns(lin, exclusion_percent: int):
    """Column-wise :func:`rss` of a (n_values, n_points) array of linear values: the RSS of
    each column with the exclusion rule and the mask of the values it keeps."""
    lin = np.asarray(lin, dtype=float)
    if lin.size == 0:
        return np.zeros(lin.shape[1:]), np.zeros(lin.shape, dtype=bool)
    order = np.argsort(-lin, axis=0, kind="stable")
    total, k = _rss_sorted(np.take_along_axis(lin, order, axis=0), exclusion_percent)
    kept_sorted = np.arange(lin.shape[0])[:, None] < k[None, :]
    used = np.zeros(lin.shape, dtype=bool)
    np.put_along_axis(used, order, kept_sorted, axis=0)
    return total, used


def _rss_limit(products_dbu, names, mechs, exclusion_percent: int, floor_dbu: float,
               want_names: bool = True):
    """Per point: the RSS (with exclusion) of ratio × field [dBµV/m] of several stations, never
    below ``floor_dbu``; with the names and mechanisms the rule kept (empty lists unless
    ``want_names``)."""
    prods = np.asarray(products_dbu, dtype=float)  # (n_stations, n_points)
    if prods.ndim != 2 or prods.shape[0] == 0:
        n_pts = prods.shape[1] if prods.ndim == 2 else 0
        return (np.full(n_pts, floor_dbu), [[] for _ in range(n_pts)],
                [[] for _ in range(n_pts)], np.zeros(prods.shape, dtype=bool))
    lin = _dbu_to_linear(prods)
    total, used = rss_columns(lin, exclusion_percent)
    limits = _limit_dbu(total, floor_dbu)
    used_names, used_mechs = [], []
    if not want_names:
        return limits, used_names, used_mechs, used
    mechs = np.asarray(mechs, dtype=object).reshape(prods.shape)
    for j in range(prods.shape[1]):
        idx = np.flatnonzero(used[:, j])
        used_names.append([names[i] for i in idx])
        used_mechs.append([mechs[i, j] for i in idx])
    return limits, used_names, used_mechs, used


def night_floor_mv_m(spec, plan: InterferencePlan) -> float:
    """The lowest night limit of the study's own station: its class's night level where the
    class is protected to the higher of that level and its night interference-free limit
    (class B 2.5 mV/m, class C 4 mV/m; 47 CFR 73.182, from memory), else ``[night]
    floor_mv_m`` (classes A and D, and classes without a night level)."""
    k = spec.station.klass(plan.classes or STATION_CLASSES)
    if k.night == "nif" and k.night_mv_m is not None:
        return k.night_mv_m
    return plan.night.floor_mv_m


def _limit_at(points_lat, points_lon, spec, plan: InterferencePlan, interferers, skipped=None):
    """Night limit [dBµV/m] at points: RSS of ratio × (10 % sky wave or night ground wave,
    whichever is larger) of the interferers, never below the floor."""
    n_pts = np.size(points_lat)
    floor = float(mv_m_to_dbu(night_floor_mv_m(spec, plan)))
    if not interferers:
        empty = [[] for _ in range(n_pts)]
        return np.full(n_pts, floor), empty, empty
    f, g = night_fields([n for n, _ in interferers], points_lat, points_lon, spec, plan.night,
                        skipped)
    prods = f + np.array([r for _, r in interferers])[:, None]
    mechs = np.where(g, "ground", "sky")
    limits, names, used_mechs, _ = _rss_limit(prods, [n.name for n, _ in interferers], mechs,
                                              plan.night.exclusion_percent, floor)
    return limits, names, used_mechs


def night_service(spec, plan: InterferencePlan, interferers, skipped=None) -> NightResult:
    """Night limit per bearing and the night service contour (iterated to the contour)."""
    st = spec.station
    p = st.power_night_kw
    bearings = np.arange(0.0, 360.0 - 1e-9, plan.night.bearing_step_deg)
    e1 = st.antenna.field_mv_m(bearings, 0.0, p)
    max_km = radial_length_km(st.freq_khz, spec.ground, night_floor_mv_m(spec, plan),
                              float(e1.max()), spec.earth_k)
    rad = radial_fields(st.freq_khz, spec.ground, st.lat, st.lon, bearings, e1, max_km,
                        max(spec.step_km, 0.25), spec.mixed_path, spec.earth_k)
    limit, used, mechs = _limit_at(np.full(bearings.shape, st.lat),
                                   np.full(bearings.shape, st.lon), spec, plan, interferers,
                                   skipped)
    for _ in range(MAX_ITERATIONS):  # until the limit moves less than CONVERGED_DB
        first, _further = first_crossings(rad, limit)
        reach = np.where(np.isnan(first), 0.0, np.where(np.isinf(first), max_km, first))
        plat, plon = fwd_points(st.lat, st.lon, bearings, reach)
        new, used, mechs = _limit_at(plat, plon, spec, plan, interferers, skipped)
        done = np.max(np.abs(new - limit)) < CONVERGED_DB
        limit = new
        if done:
            break
    first, _further = first_crossings(rad, limit)
    proj = local_projection(st.lat, st.lon)
    poly = polar_region(rad.bearings_deg, rad.dist_km, rad.field_dbu, limit)
    poly_ll, area, _ = contour_geometry(poly, proj)
    return NightResult(p, bearings, limit, first, poly, poly_ll, area, used, mechs)


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
    f = sky_dbu_from(n.lat, n.lon, n.freq_khz, n.antenna, n.power_night_kw, plat, plon,
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
    e1 = n.antenna.field_mv_m(bearings, 0.0, n.power_night_kw)
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


#: Bearings of the day contours that second/third adjacent channels compare (every 2°).
OVERLAP_BEARINGS = np.arange(0.0, 360.0, 2.0)


def _day_radials(s: Station, level_mv_m: float, spec, bearings=OVERLAP_BEARINGS,
                 max_km: float | None = None):
    """A station's day radial fields on the given bearings (0.25 km steps), long enough for a
    contour at ``level_mv_m`` unless ``max_km`` is given."""
    brg = np.asarray(bearings, dtype=float)
    if max_km is None:
        e1 = s.antenna.field_mv_m(OVERLAP_BEARINGS, 0.0, s.power_day_kw)
        max_km = radial_length_km(s.freq_khz, spec.ground, level_mv_m, float(e1.max()),
                                  spec.earth_k, min_km=2.0)
    return radial_fields(s.freq_khz, spec.ground, s.lat, s.lon, brg,
                         s.antenna.field_mv_m(brg, 0.0, s.power_day_kw), max_km, 0.25,
                         spec.mixed_path, spec.earth_k)


def _day_polygon(s: Station, level_mv_m: float, spec):
    """A station's day contour at ``level_mv_m`` as lon/lat geometry (2° radials), with the
    radial fields it came from."""
    from .contours import level_contour

    rad = _day_radials(s, level_mv_m, spec)
    return level_contour(rad, level_mv_m, "", local_projection(s.lat, s.lon)).polygon_lonlat, rad


def _bearings_toward(g, bearings=OVERLAP_BEARINGS):
    """The bearings of ``bearings`` (plus one on each side) that can reach a geometry in a
    site's plane, seen from the site; all of them when the geometry surrounds the site."""
    import shapely

    if g.is_empty:
        return np.array([])
    if g.contains(shapely.Point(0.0, 0.0)) or g.distance(shapely.Point(0.0, 0.0)) < 1e-6:
        return np.asarray(bearings, dtype=float)
    start, span = bearing_arc(shapely.get_coordinates(g))
    step = float(bearings[1] - bearings[0]) if len(bearings) > 1 else 360.0
    rel = np.mod(np.asarray(bearings, dtype=float) - start + step, 360.0)
    return np.asarray(bearings, dtype=float)[rel <= span + 2 * step]


def _overlap_area(own_rad, proj, level_dbu: float, other_xy):
    """Overlap [km², geodesic] of the proposal's contour at ``level_dbu`` (from its radial
    fields) with another station's contour (both in the proposal's plane ``proj``), and a point
    in each overlapping part (lat, lon)."""
    import shapely

    from .geodesy import xy_to_lonlat_geometry

    own_xy = polar_region(own_rad.bearings_deg, own_rad.dist_km, own_rad.field_dbu, level_dbu)
    if own_xy.is_empty or other_xy.is_empty:
        return 0.0, ()
    inter = own_xy.intersection(other_xy)
    if inter.is_empty or inter.area <= 0:
        return 0.0, ()
    area = geodesic_area_km2(xy_to_lonlat_geometry(inter, proj))
    pts = []
    for part in shapely.get_parts(inter):
        if part.area > 0:
            c = part.representative_point()
            lon, lat = proj.to_lonlat(c.x, c.y)
            pts.append((float(lat), float(lon)))
    return area, tuple(pts)


def _overlap_entries(st: Station, spec, other_xy):
    """Where the proposal's radials (2°, those that can reach it) enter another station's
    contour (``other_xy``, in the proposal's plane; ray cast against its polygon): (bearings
    [deg], distances [km]), or None if no radial reaches it. The strongest own field at these
    points is the level at or below which the own contour overlaps the other one. Where the
    other contour covers the site, the point is at the first distance of a radial grid (one
    wavelength)."""
    import shapely

    from .ground import ray_intervals

    brg = _bearings_toward(other_xy)
    if brg.size == 0:
        return None
    xy = shapely.get_coordinates(other_xy)
    far = float(np.hypot(xy[:, 0], xy[:, 1]).max()) + 1.0
    hits = ray_intervals(other_xy, brg, far)
    if not hits:
        return None
    which = np.array([i for i, _a, _e in hits])
    # the first distance of a radial grid, never below the wavelength as the curves compute it
    near = max(first_distance_km(st.freq_khz),
               model(st.freq_khz, spec.ground.default, spec.earth_k).wavelength_km)
    return brg[which], np.maximum(np.array([a for _i, a, _e in hits]), near)


def _margin_rows(kind, name, off, ratio, brg, lat, lon, wanted, unwanted, mech=None,
                 every: bool = True) -> list:
    """MarginRows at the points where the unwanted field is known; with ``every`` False only
    the first point of least margin."""
    u = np.asarray(unwanted, dtype=float)
    w = np.broadcast_to(np.asarray(wanted, dtype=float), u.shape)
    idx = np.flatnonzero(np.isfinite(u))
    if not every and idx.size > 1:
        idx = idx[[int(np.argmin(w[idx] - u[idx] - ratio))]]
    return [MarginRow(kind, name, off, ratio, float(brg[i]), float(lat[i]), float(lon[i]),
                      float(w[i]), float(u[i]),
                      "ground" if mech is None or mech[i] else "sky") for i in idx]


class NeighbourChecks:
    """The neighbour side of the interference checks, built once per study: which neighbour
    gets which check, their protected day contours, their night contours and night limits
    without the proposal, class A sky-wave service contours, and the contours that second and
    third adjacent channels must not overlap. None of it depends on where the proposal is, so a
    site search builds it once (per worker) and calls :meth:`assess` for every candidate."""

    def __init__(self, spec, plan: InterferencePlan):
        st = spec.station
        self.plan = plan
        prot = plan.protection
        classes = self.classes = plan.classes or STATION_CLASSES
        notes = self.notes = []
        self.day_ok, self.night_ok, self.overlap_ok = [], [], []
        for n in plan.neighbours:
            off = channel_offset(st.freq_khz, n.freq_khz, prot.raster_khz)
            if off is None:
                notes.append(f"{n.name} ({n.freq_khz:g} kHz) is off the {prot.raster_khz:g} kHz "
                             "raster: no protection ratio applies; it contributes nothing")
                continue
            rd, rn = prot.ratio_db("day", off), prot.ratio_db("night", off)
            if rd is None and rn is None:
                if abs(off) in OVERLAP_RULES:
                    self.overlap_ok.append((n, off))
                    continue
                notes.append(f"{n.name} ({n.freq_khz:g} kHz, offset {off:+d} channels): no "
                             "protection ratio defined for this offset; it contributes nothing")
                continue
            if rd is not None:
                self.day_ok.append((n, off, rd[0]))
            if rn is not None and n.power_night_kw <= 0:
                notes.append(f"{n.name} has no night power (daytime only): no night checks")
            elif rn is not None:
                self.night_ok.append((n, off, rn[0]))
        if plan.night.method == "itu":
            notes.append("ITU-R P.1147 constants (k, A, b, L_p) are recalled from memory, not "
                         "read in the published text (docs/methods.md §4.2); check them before "
                         "filing. Its sea gain G_S is taken as 0 dB (the text was not found): "
                         "with either terminal on a coast the sky-wave field may be higher")
        self.brg = np.arange(0.0, 360.0 - 1e-9, plan.contour_step_deg)
        common = dict(method=spec.mixed_path, earth_k=spec.earth_k)
        self.protected: dict = {}
        # neighbours' protected day contours
        self.day_points = {}
        self.day_level = {}
        for n, off, ratio in self.day_ok:
            level = self.day_level[n.name] = n.day_level_mv_m(classes, off, prot)
            self.day_points[n.name] = protected_contour_points(
                n.freq_khz, spec.ground, n.lat, n.lon, n.antenna, n.power_day_kw, level,
                self.brg, step_km=0.5, polygons=self.protected, key=(n.name, "day"), **common)
        # neighbours' night protection
        lo, hi = METHOD_DISTANCE_KM[plan.night.method]
        self.range_text = f"{lo:g}–{hi:g} km"
        self.night_targets = {}  # name → ("fixed", points, wanted) or ("nif", base)
        self.base_skipped: set = set()
        listed = [n for n in plan.neighbours if n.power_night_kw > 0]
        for n, off, ratio in self.night_ok:
            k = n.klass(classes)
            if k.night == "none":
                notes.append(f"{n.name} is class {k.name}: no night protection, no night check")
            elif k.night == "skywave50" and off == 0:
                level = n.night_level_mv_m(classes)
                nb, _, nlat, nlon = skywave_service_points(n, level, self.brg, plan.night)
                self.night_targets[n.name] = ("fixed", (nb, nlat, nlon),
                                              np.full(nb.shape, float(mv_m_to_dbu(level))))
            elif k.night == "skywave50":
                # 47 CFR 73.21(a)(1) (read): the secondary (sky-wave) service is protected from
                # the same channel only; on an adjacent channel the primary service is, here
                # its night ground-wave contour at the day level of that offset
                level = n.day_level_mv_m(classes, off, prot)
                nb, _, nlat, nlon = protected_contour_points(
                    n.freq_khz, spec.ground, n.lat, n.lon, n.antenna, n.power_night_kw, level,
                    self.brg, step_km=0.5, **common)
                self.night_targets[n.name] = ("fixed", (nb, nlat, nlon),
                                              np.full(nb.shape, float(mv_m_to_dbu(level))))
                notes.append(f"{n.name} is class {k.name} on an adjacent channel: at night its "
                             f"primary service ({level:g} mV/m ground wave) is protected, not "
                             "its sky-wave secondary service (co-channel only, 47 CFR "
                             "73.21(a)(1))")
            else:
                others = []
                for o in listed:
                    if o.name == n.name:
                        continue
                    r = prot.ratio_db("night", channel_offset(n.freq_khz, o.freq_khz,
                                                              prot.raster_khz))
                    if r is not None:
                        others.append((o, r[0]))
                self.night_targets[n.name] = ("nif", neighbour_night_base(
                    n, others, spec, plan, self.brg, n.night_level_mv_m(classes),
                    self.base_skipped))
        # the contours second and third adjacent neighbours protect
        self.overlap_polygons = {n.name: _day_polygon(n, OVERLAP_RULES[abs(off)][1], spec)[0]
                                 for n, off in self.overlap_ok}

    def assess(self, spec, night_service_too: bool = True, received: bool = True,
               overlap_area: bool = True, all_rows: bool = True) -> InterferenceResult:
        """All checks for the study's station where it stands now (without the interference it
        receives by day, or its own night service contour, when not asked for; with only the
        point of least margin per neighbour and check among the caused rows when
        ``all_rows`` is False, which is all the maximum powers need)."""
        st = spec.station
        plan = self.plan
        common = dict(method=spec.mixed_path, earth_k=spec.earth_k)
        notes = list(self.notes)
        rows: list[MarginRow] = []
        if self.day_ok and received:
            # received by day on the proposal's protected contour
            ob, _, olat, olon = protected_contour_points(
                st.freq_khz, spec.ground, st.lat, st.lon, st.antenna, st.power_day_kw,
                plan.protected_day_mv_m, self.brg, step_km=max(spec.step_km, 0.25), **common)
            wanted = float(mv_m_to_dbu(plan.protected_day_mv_m))
            for n, off, ratio in self.day_ok:
                u = point_ground_dbu(n.freq_khz, spec.ground, n.lat, n.lon, n.antenna,
                                     n.power_day_kw, olat, olon, **common)
                rows += [MarginRow("day received", n.name, off, ratio, float(b), float(a),
                                   float(o), wanted, float(x))
                         for b, a, o, x in zip(ob, olat, olon, u) if np.isfinite(x)]
        # the proposal's own day field, in one pass, at each neighbour's protected contour
        # (caused by day) and where its radials enter the contours second and third adjacent
        # neighbours protect (the power at which an overlap begins)
        own_proj = local_projection(st.lat, st.lon)
        pts = [self.day_points[n.name] for n, _, _ in self.day_ok]
        brgs, dists = [np.empty(0)], [np.empty(0)]
        if pts:
            d, az, _ = inverse(st.lat, st.lon, np.concatenate([p[2] for p in pts]),
                               np.concatenate([p[3] for p in pts]))
            brgs.append(np.atleast_1d(az))
            dists.append(np.atleast_1d(d))
        n_caused = sum(b.size for b in brgs)
        others_xy, entries = [], []
        for n, off in self.overlap_ok:
            other = own_proj.geom_to_xy(self.overlap_polygons[n.name])  # once per neighbour
            others_xy.append(other)
            hit = _overlap_entries(st, spec, other)
            entries.append(0 if hit is None else hit[0].size)
            if hit is not None:
                brgs.append(hit[0])
                dists.append(hit[1])
        u_all = ground_dbu_along(st.freq_khz, spec.ground, st.lat, st.lon, st.antenna,
                                 st.power_day_kw, np.concatenate(brgs), np.concatenate(dists),
                                 **common)
        k = 0
        for (n, off, ratio), (nb, _, nlat, nlon) in zip(self.day_ok, pts):
            u = u_all[k:k + nb.size]
            k += nb.size
            wanted = float(mv_m_to_dbu(self.day_level[n.name]))
            rows += _margin_rows("day caused", n.name, off, ratio, nb, nlat, nlon, wanted, u,
                                 every=all_rows)
        overlaps, overlap_power = [], None
        own_rad = None
        k = n_caused
        for (n, off), other, m in zip(self.overlap_ok, others_xy, entries):
            own_mv, other_mv, source = OVERLAP_RULES[abs(off)]
            lvl = float(mv_m_to_dbu(own_mv))
            if overlap_area:
                if own_rad is None:
                    own_rad = _day_radials(st, min(r[0] for r in OVERLAP_RULES.values()), spec)
                area, points = _overlap_area(own_rad, own_proj, lvl, other)
            else:
                area, points = float("nan"), ()
            overlaps.append(OverlapCheck(n.name, off, own_mv, other_mv, area, points, source))
            # the day power at which the overlap begins: the largest own field where a radial
            # first enters the other contour, against the level (fields ∝ √P)
            onset = float(np.nanmax(u_all[k:k + m])) if m else None
            k += m
            inside = bool(shapely.contains_xy(other, 0.0, 0.0))
            if inside:  # the site stands inside the other contour: no power avoids overlap
                if overlap_power is None or overlap_power[0] > 0.0:
                    overlap_power = (0.0, n.name, (st.lat, st.lon))
            elif onset is not None:
                p_max = st.power_day_kw * 10 ** ((lvl - onset) / 10.0)
                if overlap_power is None or p_max < overlap_power[0]:
                    where = points[0] if points else (st.lat, st.lon)
                    overlap_power = (p_max, n.name, where)
        night = None
        skipped: list[dict] = []
        limits: list[NeighbourLimit] = []
        for name in sorted(self.base_skipped):
            skipped.append({"neighbour": name, "check": "night limit of a neighbour",
                            "reason": f"sky-wave path outside {self.range_text}"})
        if st.power_night_kw <= 0:
            notes.append(f"{st.name} has no night power (daytime only): no night service contour "
                         "and no night interference caused")
        else:
            if night_service_too:
                out_of_range: set = set()
                night = night_service(spec, plan,
                                      [(n, ratio) for n, _, ratio in self.night_ok], out_of_range)
                for name in sorted(out_of_range):
                    skipped.append({"neighbour": name, "check": "night received",
                                    "reason": f"sky-wave path outside {self.range_text}"})
            # everything the proposal causes at night, in one pass over all points
            targets = [(n, off, ratio) for n, off, ratio in self.night_ok
                       if n.name in self.night_targets]
            plist = []
            for n, _, _ in targets:
                kind, data, *rest = self.night_targets[n.name]
                plist.append(data[1:] if kind == "fixed" else (data.lat, data.lon))
            caused_skip: set = set()
            if plist:
                alat = np.concatenate([p[0] for p in plist])
                alon = np.concatenate([p[1] for p in plist])
                f, g = night_fields([st], alat, alon, spec, plan.night, caused_skip)
                u_all, g_all = f[0], g[0]
                geo = (cfr_geometry(st.lat, st.lon, alat, alon)[0] if plan.night.method == "cfr"
                       else inverse(st.lat, st.lon, alat, alon)[0])
                reach = in_method_range(geo, plan.night.method)
            k = 0
            for (n, off, ratio), (plat, plon) in zip(targets, plist):
                u, mech = u_all[k:k + plat.size], g_all[k:k + plat.size]
                k += plat.size
                kind, data, *rest = self.night_targets[n.name]
                if kind == "fixed":
                    nb, wanted = data[0], rest[0]
                else:
                    lim = data.with_proposal(u + ratio)
                    limits.append(lim)
                    nb, wanted = data.bearings_deg, data.without_dbu
                    if not lim.excluded:
                        notes.append(f"{st.name} enters {n.name}'s night limit (RSS, "
                                     f"{plan.night.exclusion_percent} % exclusion): raises it by "
                                     f"up to {lim.increase_db:.2f} dB")
                out = int((~reach[k - plat.size:k]).sum())
                if out:
                    skipped.append({"neighbour": n.name, "check": "night caused",
                                    "reason": f"sky-wave path outside {self.range_text} at {out} "
                                              f"of {plat.size} points"})
                rows += _margin_rows("night caused", n.name, off, ratio, nb, plat, plon, wanted,
                                     u, mech, every=all_rows)
        for sk in skipped:
            notes.append(f"{sk['neighbour']}: {sk['check']} skipped where the "
                         f"{sk['reason']} (the method does not cover it)")
        max_power = _max_powers(st, rows, limits, overlap_power, st.klass(self.classes))
        return InterferenceResult(tuple(rows), night, max_power, tuple(notes), plan.protection,
                                  plan.night, tuple(skipped), dict(self.protected),
                                  tuple(limits), tuple(overlaps))


def _max_powers(st, rows, limits, overlap_power, klass=None) -> dict:
    """The largest day and night powers every check allows, and what limits each; within the
    power range of the station's class (:func:`_class_range`)."""
    max_power = {}
    for period, kind, p0 in (("day", "day caused", st.power_day_kw),
                             ("night", "night caused", st.power_night_kw)):
        caused = [r for r in rows if r.kind == kind]
        if not caused:
            max_power[period] = None
            continue
        w = min(caused, key=lambda r: r.margin_db)
        # the caused field scales with sqrt(P): margin falls by 10·log10(P/P0)
        max_power[period] = {"max_power_kw": p0 * 10 ** (w.margin_db / 10.0),
                             "current_power_kw": p0, "limiting_neighbour": w.neighbour,
                             "limiting_lat": w.lat, "limiting_lon": w.lon,
                             "margin_db_now": w.margin_db, "mechanism": w.mechanism,
                             "check": kind}
    if overlap_power is not None:
        p_max, name, (lat, lon) = overlap_power
        cur = max_power.get("day")
        if cur is None or p_max < cur["max_power_kw"]:
            max_power["day"] = {"max_power_kw": p_max, "current_power_kw": st.power_day_kw,
                                "limiting_neighbour": name, "limiting_lat": lat,
                                "limiting_lon": lon,
                                "margin_db_now": (10 * np.log10(p_max / st.power_day_kw)
                                                  if p_max > 0 else -np.inf),
                                "mechanism": "ground", "check": "day overlap"}
            if p_max == 0.0:  # the site is inside the contour the overlap rule protects
                max_power["day"]["passes"] = False
    live = [lim for lim in limits if lim.proposal_dbu.size]
    if live and max_power.get("night") is not None:
        # the proposal must also stay out of each neighbour's RSS night limit: the power at
        # which it would first raise one of them (its fields scale with sqrt(P))
        p0 = st.power_night_kw
        scale, k = first_entry_db(live)
        p_entry = p0 * 10 ** (scale / 10.0)
        if p_entry < max_power["night"]["max_power_kw"]:
            lim = live[k]
            i = int(np.argmax(lim.proposal_dbu - lim.without_dbu))
            max_power["night"] = {
                "max_power_kw": p_entry, "current_power_kw": p0,
                "limiting_neighbour": lim.neighbour, "limiting_lat": float(lim.lat[i]),
                "limiting_lon": float(lim.lon[i]), "margin_db_now": float(scale),
                "mechanism": "RSS", "check": "night limit entry"}
    if klass is not None:
        _class_range(max_power, st, klass)
    return max_power


def _class_range(max_power: dict, st, klass) -> None:
    """Keep each period's maximum power inside the class's range (47 CFR 73.21, read): above
    the range the class is what limits; below it no power of the class passes (the power the
    neighbours allow is kept as ``neighbours_allow_kw``). A class B station may also go below
    0.25 kW if its RMS field is at least 141 mV/m at 1 km; a class D station at night must
    stay below both."""
    rms_1kw = None
    for period, p0 in (("day", st.power_day_kw), ("night", st.power_night_kw)):
        rng = klass.power_range_kw(period, st.freq_khz)
        if rng is None or p0 <= 0:
            continue
        lo, hi = rng
        if klass.min_rms_mv_m is not None:
            if rms_1kw is None:
                rms_1kw = float(st.antenna.horizontal_summary(1.0)["rms_mv_m"])
            p_rms = (klass.min_rms_mv_m / rms_1kw) ** 2  # power giving that RMS field
            if period == "night" and lo == 0.0:
                hi = min(hi, p_rms)  # class D at night: below 0.25 kW and below 141 mV/m
            else:
                lo = min(lo, p_rms)  # class B: 0.25 kW, or less with 141 mV/m
        mp = max_power.get(period)
        allow = float("inf") if mp is None else mp["max_power_kw"]
        base = {"current_power_kw": p0, "limiting_lat": st.lat, "limiting_lon": st.lon,
                "mechanism": "", "class_range_kw": [lo, hi],
                "neighbours_allow_kw": None if mp is None else allow}
        if allow > hi:
            max_power[period] = base | {
                "max_power_kw": hi, "limiting_neighbour": f"class {klass.name} range",
                "margin_db_now": 10 * np.log10(hi / p0), "check": "class range"}
        elif allow < lo:
            max_power[period] = mp | {"max_power_kw": 0.0, "class_range_kw": [lo, hi],
                                      "neighbours_allow_kw": allow, "passes": False}


def run_interference(spec, plan: InterferencePlan) -> InterferenceResult:
    """Day and night checks to and from every neighbour, night limits and maximum powers.

    Day: D/U of ground waves on the protected contours both ways (co-channel and first
    adjacent), and contour overlap for second and third adjacent channels. Night: the station's
    night limit and service contour; for each neighbour by its class — none (D), its 50 %
    sky-wave service contour (A), or its night contour at the higher of the class level and its
    own night limit (B, C) — the D/U of the station's larger of 10 % sky wave and night ground
    wave, and whether the station enters the neighbour's RSS night limit.
    """
    return NeighbourChecks(spec, plan).assess(spec)
