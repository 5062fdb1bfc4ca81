"""All checks to and from every neighbour, built once per study (NeighbourChecks) and assessed for
the station where it stands; run_interference is the whole job.
"""

from __future__ import annotations

import math

import numpy as np
import shapely

from ..classes import OVERLAP_RULES, STATION_CLASSES
from ..contours import radial_length_km
from ..geodesy import inverse, local_projection
from ..groundwave import mv_m_to_dbu
from ..skywave import cfr_geometry, in_method_range, METHOD_DISTANCE_KM
from .fields import ground_dbu_along, night_fields, point_ground_dbu, protected_contour_points
from .maxpower import _max_powers
from .nightlimit import neighbour_night_base, NeighbourLimit, skywave_service_points
from .nightservice import night_service
from .overlap import _day_polygon, _day_radials, _overlap_area, _overlap_entries
from .records import InterferencePlan, InterferenceResult, MarginRow, OverlapCheck


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
    site search builds it once (per worker) and calls :meth:`assess` for every candidate.

    Nor does any of it depend on the proposal's channel, only on which neighbours it meets and
    at which level: the channel search passes one ``memo`` dict to the checks of every channel
    of a study (the same ground, neighbours and settings), so that a neighbour's contours and
    night limit are computed once however many channels meet it."""

    def __init__(self, spec, plan: InterferencePlan, memo: dict | None = None):
        st = spec.station
        memo = {} if memo is None else memo
        self.plan = plan
        prot = plan.protection
        classes = self.classes = plan.classes or STATION_CLASSES
        notes = self.notes = []
        self.day_ok, self.night_ok, self.overlap_ok = [], [], []
        far, off_raster = [], []
        for n in plan.neighbours:
            off = prot.offset(st.freq_khz, n.freq_khz)
            on_raster = isinstance(off, int)
            rd, rn = prot.ratio_db("day", off), prot.ratio_db("night", off)
            if not on_raster and (rd or rn):
                off_raster.append(f"{n.name} ({n.freq_khz:g} kHz, "
                                  f"{abs(n.freq_khz - st.freq_khz):g} kHz away)")
            if rd is None and rn is None:
                if on_raster and abs(off) in OVERLAP_RULES:
                    self.overlap_ok.append((n, off))
                elif on_raster and abs(off) <= len(OVERLAP_RULES):
                    notes.append(f"{n.name} ({n.freq_khz:g} kHz, offset {off:+d} channels): no "
                                 "protection ratio defined for this offset; it contributes "
                                 "nothing")
                else:
                    far.append(n)
                continue
            if rd is not None:
                self.day_ok.append((n, off, rd[0]))
            if rn is not None and n.power_night_kw <= 0:
                notes.append(f"{n.name} has no night power (daytime only): no night checks")
            elif rn is not None:
                self.night_ok.append((n, off, rn[0]))
        if off_raster:
            notes.append(f"off the {prot.raster_khz:g} kHz raster, protected at their carrier "
                         f"spacing ({prot.curve_source}): " + "; ".join(off_raster))
        if far:
            span = prot.curve[-1][0]
            notes.append(f"{len(far)} neighbour(s) farther than {len(OVERLAP_RULES)} channels or "
                         f"{span:g} kHz in frequency: no protection ratio or overlap rule applies; they "
                         "contribute nothing (" + ", ".join(
                             f"{n.name} {n.freq_khz:g} kHz" for n in far[:5])
                         + (", …)" if len(far) > 5 else ")"))
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
            key = ("day", n.name, level)
            if key not in memo:
                polygon: dict = {}
                memo[key] = (protected_contour_points(
                    n.freq_khz, spec.ground, n.lat, n.lon, n.day_antenna, n.power_day_kw, level,
                    self.brg, step_km=0.5, polygons=polygon, key=0, **common), polygon[0])
            self.day_points[n.name], self.protected[(n.name, "day")] = memo[key]
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
            elif k.night == "skywave50" and abs(off) < 0.5:  # within half a channel: co-channel
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
                    n.freq_khz, spec.ground, n.lat, n.lon, n.night_antenna, n.power_night_kw, level,
                    self.brg, step_km=0.5, **common)
                self.night_targets[n.name] = ("fixed", (nb, nlat, nlon),
                                              np.full(nb.shape, float(mv_m_to_dbu(level))))
                notes.append(f"{n.name} is class {k.name} on an adjacent channel: at night its "
                             f"primary service ({level:g} mV/m ground wave) is protected, not "
                             "its sky-wave secondary service (co-channel only, 47 CFR "
                             "73.21(a)(1))")
            else:
                key = ("nif", n.name)
                if key not in memo:  # the neighbour's own night limit from the others listed
                    others = []
                    for o in listed:
                        if o.name == n.name:
                            continue
                        r = prot.ratio_db("night", prot.offset(n.freq_khz, o.freq_khz))
                        if r is not None:
                            others.append((o, r[0]))
                    skipped: set = set()
                    memo[key] = (neighbour_night_base(n, others, spec, plan, self.brg,
                                                      n.night_level_mv_m(classes), skipped),
                                 skipped)
                base, skipped = memo[key]
                self.night_targets[n.name] = ("nif", base)
                self.base_skipped |= skipped
        # the contours second and third adjacent neighbours protect: drawn when first needed
        # (a search skips those too far away to meet the proposal's contour at any power of
        # its class, :meth:`_beyond_reach`)
        self.memo = memo
        self.overlap_polygons = {}

    def _overlap_polygon(self, n, off, spec):
        """The contour neighbour ``n`` protects against overlap at this offset (lon/lat)."""
        level = OVERLAP_RULES[abs(off)][1]
        key = ("overlap", n.name, level)
        if key not in self.memo:
            self.memo[key] = _day_polygon(n, level, spec)[0]
        self.overlap_polygons[n.name] = self.memo[key]
        return self.memo[key]

    def _beyond_reach(self, n, off, spec) -> bool:
        """Whether the proposal's overlap contour, at the largest day power of its class,
        cannot reach the contour ``n`` protects: the sites are farther apart than the two
        contours' radii on the best ground of the map with the strongest radiation
        (:func:`~..contours.radial_length_km`, which adds 20 %). Such a neighbour never limits
        the day power, so a search leaves it out; a full run keeps every overlap row."""
        st = spec.station
        rng = st.klass(self.classes).power_range_kw("day", st.freq_khz)
        if rng is None:
            return False
        own_mv, other_mv, _ = OVERLAP_RULES[abs(off)]
        key = ("reach", n.name, other_mv)
        if key not in self.memo:
            e_n = n.max_horizontal_mv_m("day")
            self.memo[key] = radial_length_km(n.freq_khz, spec.ground, other_mv, e_n,
                                              spec.earth_k, min_km=2.0)
        e_p = st.max_horizontal_mv_m("day") * math.sqrt(rng[1] / st.power_day_kw)
        r_p = radial_length_km(st.freq_khz, spec.ground, own_mv, e_p, spec.earth_k, min_km=2.0)
        dist = float(inverse(st.lat, st.lon, n.lat, n.lon)[0])
        return dist > self.memo[key] + r_p

    def assess(self, spec, night_service_too: bool = True, received: bool = True,
               overlap_area: bool = True, all_rows: bool = True) -> InterferenceResult:
        """All checks for the study's station where it stands now (without the interference it
        receives by day, or its own night service contour, when not asked for; with only the
        point of least margin per neighbour and check among the caused rows when
        ``all_rows`` is False, which is all the maximum powers need)."""
        st = spec.station
        plan = self.plan
        notes = list(self.notes)
        rows: list[MarginRow] = []
        if self.day_ok and received:
            rows += self._day_received(spec)
        caused, overlaps, overlap_power = self._day_caused(spec, overlap_area, all_rows)
        rows += caused
        skipped: list[dict] = [{"neighbour": name, "check": "night limit of a neighbour",
                                "reason": f"sky-wave path outside {self.range_text}"}
                               for name in sorted(self.base_skipped)]
        night, limits = None, []
        if st.power_night_kw <= 0:
            notes.append(f"{st.name} has no night power (daytime only): no night service contour "
                         "and no night interference caused")
        else:
            night, limits, night_rows = self._night(spec, night_service_too, all_rows, notes,
                                                    skipped)
            rows += night_rows
        for sk in skipped:
            notes.append(f"{sk['neighbour']}: {sk['check']} skipped where the "
                         f"{sk['reason']} (the method does not cover it)")
        max_power = _max_powers(st, rows, limits, overlap_power, st.klass(self.classes))
        return InterferenceResult(tuple(rows), night, max_power, tuple(notes), plan.protection,
                                  plan.night, tuple(skipped), dict(self.protected),
                                  tuple(limits), tuple(overlaps))

    def _day_received(self, spec) -> list[MarginRow]:
        """Interference received by day on the proposal's protected contour."""
        st, plan = spec.station, self.plan
        common = dict(method=spec.mixed_path, earth_k=spec.earth_k)
        rows: list[MarginRow] = []
        # received by day on the proposal's protected contour
        ob, _, olat, olon = protected_contour_points(
            st.freq_khz, spec.ground, st.lat, st.lon, st.day_antenna, st.power_day_kw,
            plan.protected_day_mv_m, self.brg, step_km=max(spec.step_km, 0.25), **common)
        wanted = float(mv_m_to_dbu(plan.protected_day_mv_m))
        for n, off, ratio in self.day_ok:
            u = point_ground_dbu(n.freq_khz, spec.ground, n.lat, n.lon, n.day_antenna,
                                 n.power_day_kw, olat, olon, **common)
            rows += [MarginRow("day received", n.name, off, ratio, float(b), float(a),
                               float(o), wanted, float(x))
                     for b, a, o, x in zip(ob, olat, olon, u) if np.isfinite(x)]
        return rows

    def _day_caused(self, spec, overlap_area: bool, all_rows: bool):
        """Interference caused by day at each neighbour's protected contour, and the second-
        and third-adjacent overlaps with the day power at which each begins. Returns (rows,
        overlap checks, (largest power, neighbour, (lat, lon)) or None)."""
        st = spec.station
        common = dict(method=spec.mixed_path, earth_k=spec.earth_k)
        rows: list[MarginRow] = []
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
        overlap_ok = [(n, off) for n, off in self.overlap_ok
                      if overlap_area or not self._beyond_reach(n, off, spec)]
        for n, off in overlap_ok:
            other = own_proj.geom_to_xy(self._overlap_polygon(n, off, spec))  # once each
            others_xy.append(other)
            hit = _overlap_entries(st, spec, other)
            entries.append(0 if hit is None else hit[0].size)
            if hit is not None:
                brgs.append(hit[0])
                dists.append(hit[1])
        u_all = ground_dbu_along(st.freq_khz, spec.ground, st.lat, st.lon, st.day_antenna,
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
        for (n, off), other, m in zip(overlap_ok, others_xy, entries):
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
        return rows, overlaps, overlap_power

    def _night(self, spec, night_service_too: bool, all_rows: bool, notes: list, skipped: list):
        """The proposal's night service contour (when asked) and everything it causes at night:
        the neighbours' fixed targets and their RSS night limits. Returns (night service,
        neighbour limits, rows); appends to ``notes`` and ``skipped``."""
        st, plan = spec.station, self.plan
        night = None
        limits: list[NeighbourLimit] = []
        rows: list[MarginRow] = []
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
        return night, limits, rows


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
