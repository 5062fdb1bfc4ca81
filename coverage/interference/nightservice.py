"""The proposal's own night limit and night service contour: RSS of the interferers along the
contour, never below the class level (47 CFR 73.182, from memory), iterated contour → limit →
contour; docs/methods.md §5.
"""

from __future__ import annotations

import numpy as np

from ..classes import STATION_CLASSES
from ..contours import (
    contour_geometry,
    first_crossings,
    polar_region,
    radial_fields,
    radial_length_km,
)
from ..geodesy import fwd_points, local_projection
from ..groundwave import mv_m_to_dbu
from .fields import night_fields
from .records import InterferencePlan, NightResult
from .rss import _rss_limit


#: Night limits are iterated (contour → limit on the contour → contour …) until no bearing's
#: limit moves by more than this [dB], at most MAX_ITERATIONS times.
CONVERGED_DB = 0.01


MAX_ITERATIONS = 8


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
    e1 = st.night_antenna.field_mv_m(bearings, 0.0, p)
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
