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

from dataclasses import dataclass, field, fields

import numpy as np

from .antenna import Array
from .contours import (
    contour_geometry,
    first_crossings,
    polar_region,
    level_contour,
    radial_fields,
    radial_length_km,
)
from .geodesy import check_site, fwd_points, inverse, local_projection
from .ground import GroundMap
from .groundwave import model, mv_m_to_dbu
from .mixedpath import path_field_db
from .skywave import METHOD_DISTANCE_KM, SkyPath, in_method_range, sky_field_dbu, sky_path
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
]

ORDINALS = ("co_channel", "adjacent_1", "adjacent_2", "adjacent_3")
_P73_37 = "47 CFR 73.37 / 73.182"
DEFAULT_RATIOS = {
    ("day", 0): (26.0, f"co-channel 26 dB: {_P73_37}; Rio 1981 plan"),
    ("day", 1): (6.0, "first adjacent 6 dB: 47 CFR 73.37 / 73.183(c)"),
    ("night", 0): (26.0, f"co-channel 26 dB: {_P73_37}; Rio 1981 plan"),
    ("night", 1): (6.0, "first adjacent 6 dB: 47 CFR 73.37 / 73.183(c)"),
}


@dataclass(frozen=True)
class ProtectionTable:
    """Protection (D/U) ratios [dB] by period and channel offset (0 = co-channel … 3).

    An offset without a ratio contributes nothing; the report says so.
    """

    raster_khz: float = 10.0
    ratios: dict = field(default_factory=lambda: dict(DEFAULT_RATIOS))

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
                out.append({"period": p, "offset_channels": i,
                            "ratio_db": None if r is None else r[0],
                            "source": "not defined: contributes nothing" if r is None else r[1]})
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
    iterations: int = 3

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

    protected_day_mv_m: float = 0.5  # daytime protected contour (docs/methods.md §5, US practice)
    protected_night_mv_m: float = 2.0  # night protected service contour (common practice)
    antenna_desc: dict = field(default_factory=dict, compare=False, repr=False)


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
    out = np.full(d.shape, np.nan)
    if d.size == 0:
        return out
    e1 = array.field_mv_m(az, 0.0, power_kw)
    secs = ground.radial_sections(lat, lon, az, float(d.max()) + 1.0)
    lam = model(freq_khz, ground.default, earth_k).wavelength_km
    for i in range(d.size):
        if d[i] < lam:
            continue
        out[i] = path_field_db(method, secs[i], [d[i]], freq_khz, earth_k)[0] + mv_m_to_dbu(e1[i])
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

    @property
    def limit_mv_m(self) -> np.ndarray:
        return 10 ** (self.limit_dbu / 20) / 1e3


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

    def worst(self, kind: str | None = None, neighbour: str | None = None):
        rows = [r for r in self.rows if (kind is None or r.kind == kind)
                and (neighbour is None or r.neighbour == neighbour)]
        return min(rows, key=lambda r: r.margin_db) if rows else None

    def neighbour_summary(self) -> list[dict]:
        """Worst margin per neighbour and kind."""
        out = []
        for name in dict.fromkeys(r.neighbour for r in self.rows):
            for kind in ("day received", "day caused", "night caused"):
                w = self.worst(kind, name)
                if w is not None:
                    out.append({"neighbour": name, "kind": kind, "offset_channels": w.offset_channels,
                                "ratio_db": w.ratio_db, "worst_margin_db": w.margin_db,
                                "passed": w.passed, "lat": w.lat, "lon": w.lon})
        return out


def describe_max_power(period: str, mp: dict | None) -> str:
    """One line for reports: the maximum power and what limits it."""
    if mp is None:
        return f"Maximum {period} power: no neighbour with a {period} protection ratio limits it"
    where = f"{mp['limiting_neighbour']} at {mp['limiting_lat']:.4f}, {mp['limiting_lon']:.4f}"
    if mp["max_power_kw"] > 100 * mp["current_power_kw"]:
        return (f"Maximum {period} power: more than 100 × the present {mp['current_power_kw']:g} kW "
                f"({mp['max_power_kw']:.3g} kW by the worst margin, {where}); other limits apply")
    return (f"Maximum {period} power: {mp['max_power_kw']:.3g} kW (now {mp['current_power_kw']:g} "
            f"kW), limited by {where}")


def _limit_at(points_lat, points_lon, plan: InterferencePlan, interferers, skipped=None):
    """Night limit [dBµV/m] at points: RSS of (ratio × 10 % sky wave) of the interferers.

    An interferer whose path to a point lies outside the sky-wave method's range contributes
    nothing there; its name goes into ``skipped``.
    """
    n_pts = np.size(points_lat)
    if not interferers:
        return np.full(n_pts, float(mv_m_to_dbu(plan.night.floor_mv_m))), [[] for _ in range(n_pts)]
    prods = []
    for n, ratio in interferers:
        u = sky_dbu_from(n.lat, n.lon, n.freq_khz, n.antenna, n.power_night_kw, points_lat,
                         points_lon, plan.night)
        if np.isnan(u).any() and skipped is not None:
            skipped.add(n.name)
        with np.errstate(over="ignore"):
            prods.append(np.nan_to_num(10 ** ((u + ratio) / 20.0), nan=0.0))  # µV/m
    prods = np.array(prods)  # (n_interferers, n_pts)
    limits = np.empty(n_pts)
    used_names = []
    floor = float(mv_m_to_dbu(plan.night.floor_mv_m))
    for j in range(n_pts):
        total, used = rss(prods[:, j], plan.night.exclusion_percent)
        limits[j] = max(20 * np.log10(total) if total > 0 else -np.inf, floor)
        used_names.append([interferers[i][0].name for i in np.flatnonzero(used)])
    return limits, used_names


def night_service(spec, plan: InterferencePlan, interferers, skipped=None) -> NightResult:
    """Night limit per bearing and the night service contour (iterated to the contour)."""
    st = spec.station
    p = st.power_night_kw
    bearings = np.arange(0.0, 360.0 - 1e-9, plan.night.bearing_step_deg)
    e1 = st.antenna.field_mv_m(bearings, 0.0, p)
    max_km = radial_length_km(st.freq_khz, spec.ground, plan.night.floor_mv_m, float(e1.max()),
                              spec.earth_k)
    rad = radial_fields(st.freq_khz, spec.ground, st.lat, st.lon, bearings, e1, max_km,
                        max(spec.step_km, 0.25), spec.mixed_path, spec.earth_k)
    limit, used = _limit_at(np.full(bearings.shape, st.lat), np.full(bearings.shape, st.lon),
                            plan, interferers, skipped)
    first = np.full(bearings.shape, np.nan)
    further = [[] for _ in bearings]
    for _ in range(plan.night.iterations):
        first, further = first_crossings(rad, limit)
        reach = np.where(np.isnan(first), 0.0, np.where(np.isinf(first), max_km, first))
        plat, plon = fwd_points(st.lat, st.lon, bearings, reach)
        limit, used = _limit_at(plat, plon, plan, interferers, skipped)
    first, further = first_crossings(rad, limit)
    proj = local_projection(st.lat, st.lon)
    poly = polar_region(rad.bearings_deg, rad.dist_km, rad.field_dbu, limit)
    poly_ll, area, _ = contour_geometry(poly, proj)
    return NightResult(p, bearings, limit, first, poly, poly_ll, area, used)


def run_interference(spec, plan: InterferencePlan) -> InterferenceResult:
    """Day and night D/U margins to and from every neighbour, night limit and maximum powers."""
    st = spec.station
    prot = plan.protection
    notes = []
    day_ok, night_ok = [], []
    for n in plan.neighbours:
        off = channel_offset(st.freq_khz, n.freq_khz, prot.raster_khz)
        if off is None:
            notes.append(f"{n.name} ({n.freq_khz:g} kHz) is off the {prot.raster_khz:g} kHz "
                         "raster: no protection ratio applies; it contributes nothing")
            continue
        rd, rn = prot.ratio_db("day", off), prot.ratio_db("night", off)
        if rd is None and rn is None:
            notes.append(f"{n.name} ({n.freq_khz:g} kHz, offset {off:+d} channels): no protection "
                         "ratio defined for this offset; it contributes nothing")
            continue
        if rd is not None:
            day_ok.append((n, off, rd[0]))
        if rn is not None and n.power_night_kw <= 0:
            notes.append(f"{n.name} has no night power (daytime only): no night checks")
        elif rn is not None:
            night_ok.append((n, off, rn[0]))

    if plan.night.method == "itu":
        notes.append("ITU-R P.1147 constants (k, A, b, L_p) are recalled from memory, not read in "
                     "the published text (docs/methods.md §4.2); check them before filing")
    rows: list[MarginRow] = []
    protected: dict = {}  # (neighbour, "day" | "night") → lon/lat polygon of its protected contour
    step = plan.contour_step_deg
    brg = np.arange(0.0, 360.0 - 1e-9, step)
    common = dict(method=spec.mixed_path, earth_k=spec.earth_k)
    if day_ok:
        # interference received by day on the proposed station's protected contour
        ob, _, olat, olon = protected_contour_points(
            st.freq_khz, spec.ground, st.lat, st.lon, st.antenna, st.power_day_kw,
            plan.protected_day_mv_m, brg, step_km=max(spec.step_km, 0.25), **common)
        wanted = float(mv_m_to_dbu(plan.protected_day_mv_m))
        for n, off, ratio in day_ok:
            u = point_ground_dbu(n.freq_khz, spec.ground, n.lat, n.lon, n.antenna, n.power_day_kw,
                                 olat, olon, **common)
            rows += [MarginRow("day received", n.name, off, ratio, float(b), float(a), float(o),
                               wanted, float(x)) for b, a, o, x in zip(ob, olat, olon, u)
                     if np.isfinite(x)]
        # interference caused by day on each neighbour's protected contour
        for n, off, ratio in day_ok:
            nb, _, nlat, nlon = protected_contour_points(
                n.freq_khz, spec.ground, n.lat, n.lon, n.antenna, n.power_day_kw,
                n.protected_day_mv_m, brg, step_km=0.5, polygons=protected,
                key=(n.name, "day"), **common)
            u = point_ground_dbu(st.freq_khz, spec.ground, st.lat, st.lon, st.antenna,
                                 st.power_day_kw, nlat, nlon, **common)
            wanted = float(mv_m_to_dbu(n.protected_day_mv_m))
            rows += [MarginRow("day caused", n.name, off, ratio, float(b), float(a), float(o),
                               wanted, float(x)) for b, a, o, x in zip(nb, nlat, nlon, u)
                     if np.isfinite(x)]

    night = None
    skipped: list[dict] = []
    if st.power_night_kw <= 0:
        notes.append(f"{st.name} has no night power (daytime only): no night service contour "
                     "and no night interference caused")
    else:
        interferers = [(n, ratio) for n, _, ratio in night_ok]
        out_of_range: set = set()
        night = night_service(spec, plan, interferers, out_of_range)
        lo, hi = METHOD_DISTANCE_KM[plan.night.method]
        for name in sorted(out_of_range):
            skipped.append({"neighbour": name, "check": "night received",
                            "reason": f"sky-wave path outside {lo:g}–{hi:g} km"})
        for n, off, ratio in night_ok:
            nb, _, nlat, nlon = protected_contour_points(
                n.freq_khz, spec.ground, n.lat, n.lon, n.antenna, n.power_night_kw,
                n.protected_night_mv_m, brg, step_km=0.5, polygons=protected,
                key=(n.name, "night"), **common)
            u = sky_dbu_from(st.lat, st.lon, st.freq_khz, st.antenna, st.power_night_kw, nlat,
                             nlon, plan.night)
            if np.isnan(u).any():
                skipped.append({"neighbour": n.name, "check": "night caused",
                                "reason": f"sky-wave path outside {lo:g}–{hi:g} km at "
                                          f"{int(np.isnan(u).sum())} of {u.size} points"})
            wanted = float(mv_m_to_dbu(n.protected_night_mv_m))
            rows += [MarginRow("night caused", n.name, off, ratio, float(b), float(a), float(o),
                               wanted, float(x)) for b, a, o, x in zip(nb, nlat, nlon, u)
                     if np.isfinite(x)]
        for sk in skipped:
            notes.append(f"{sk['neighbour']}: {sk['check']} skipped where the "
                         f"{sk['reason']} (the method does not cover it)")

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
                             "margin_db_now": w.margin_db}
    return InterferenceResult(tuple(rows), night, max_power, tuple(notes), prot, plan.night,
                              tuple(skipped), protected)
