"""Second- and third-adjacent day contour overlap (47 CFR 73.37(a), read: 5 mV/m against 5 mV/m, 25
against 25); docs/methods.md §5.
"""

from __future__ import annotations

import numpy as np
import shapely

from ..contours import (
    bearing_arc,
    first_distance_km,
    level_contour,
    polar_region,
    radial_fields,
    radial_length_km,
)
from ..geodesy import geodesic_area_km2, local_projection
from ..groundwave import model
from ..station import Station


#: Bearings of the day contours that second/third adjacent channels compare (every 2°).
OVERLAP_BEARINGS = np.arange(0.0, 360.0, 2.0)


def _day_radials(s: Station, level_mv_m: float, spec, bearings=OVERLAP_BEARINGS,
                 max_km: float | None = None):
    """A station's day radial fields on the given bearings (0.25 km steps), long enough for a
    contour at ``level_mv_m`` unless ``max_km`` is given."""
    brg = np.asarray(bearings, dtype=float)
    if max_km is None:
        e1 = s.day_antenna.field_mv_m(OVERLAP_BEARINGS, 0.0, s.power_day_kw)
        max_km = radial_length_km(s.freq_khz, spec.ground, level_mv_m, float(e1.max()),
                                  spec.earth_k, min_km=2.0)
    return radial_fields(s.freq_khz, spec.ground, s.lat, s.lon, brg,
                         s.day_antenna.field_mv_m(brg, 0.0, s.power_day_kw), max_km, 0.25,
                         spec.mixed_path, spec.earth_k)


def _day_polygon(s: Station, level_mv_m: float, spec):
    """A station's day contour at ``level_mv_m`` as lon/lat geometry (2° radials), with the
    radial fields it came from."""

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

    from ..geodesy import xy_to_lonlat_geometry

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

    from ..ground import ray_intervals

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
