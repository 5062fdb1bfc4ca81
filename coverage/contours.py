"""Fields along radials, contour distances and crossings, contour polygons, field raster.

A radial is a geodesic from the site at a bearing; the field along it comes from the ground
sections it crosses (mixed paths) and the antenna's field at 1 km toward that bearing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .geodesy import LocalProjection, geodesic_area_km2, xy_to_lonlat_geometry
from .ground import GroundMap
from .groundwave import model, mv_m_to_dbu
from .mixedpath import millington_radials_db, path_field_db

__all__ = [
    "RadialFields",
    "LevelContour",
    "distance_grid",
    "first_distance_km",
    "radial_length_km",
    "radial_fields",
    "crossings",
    "level_contour",
    "first_crossings",
    "contour_geometry",
    "polar_region",
    "polar_regions",
    "polar_area_km2",
    "polar_shares",
    "share_window",
    "bearing_arc",
    "window_shares",
    "arc_step_deg",
    "field_raster",
]


@dataclass(frozen=True)
class RadialFields:
    """Field along each radial on a shared distance grid.

    Attributes
    ----------
    bearings_deg : (nb,) [deg true]
    dist_km : (nd,) [km]
    field_dbu : (nb, nd) [dBµV/m]
    e1km_mv_m : (nb,) unattenuated field at 1 km toward each bearing [mV/m]
    sections : one list of :class:`Section` per bearing
    """

    bearings_deg: np.ndarray
    dist_km: np.ndarray
    field_dbu: np.ndarray
    e1km_mv_m: np.ndarray
    sections: list = field(repr=False)

    def field_at(self, bearing_index: int, dist_km):
        """Field [dBµV/m] along one radial, interpolated in distance."""
        return np.interp(dist_km, self.dist_km, self.field_dbu[bearing_index])


#: Longest radial computed [km].
MAX_RADIAL_KM = 2000.0


def radial_length_km(freq_khz: float, ground_map: GroundMap, level_mv_m: float,
                     e1km_max_mv_m: float, earth_k: float = 4 / 3, min_km: float = 10.0) -> float:
    """How far radials must run to reach ``level_mv_m``: its distance on the best ground of the
    map with the strongest radiation, plus 20 %, within ``min_km`` .. 2000 km."""
    best = max(ground_map.grounds, key=lambda g: g.sigma_ms_m)
    m = model(freq_khz, best, earth_k)
    if not (np.isfinite(level_mv_m) and level_mv_m > 0):
        raise ValueError(f"level_mv_m must be > 0 and finite (got {level_mv_m!r})")
    # the curve's own table is ample for a length with 20 % to spare
    rel = float(mv_m_to_dbu(level_mv_m) - mv_m_to_dbu(e1km_max_mv_m))  # [dB re E at 1 km]
    if rel > float(m.curve_db(m.wavelength_km)) or rel < float(m.curve_db(MAX_RADIAL_KM)):
        return MAX_RADIAL_KM  # not reached even at one wavelength, or still beyond the longest
    d = float(m.distance_for_curve_db(rel))
    return float(np.clip(1.2 * d, min_km, MAX_RADIAL_KM))


def first_distance_km(freq_khz: float) -> float:
    """The first distance of every radial grid [km]: one wavelength, at least 50 m."""
    return max(299.792458 / freq_khz, 0.05)


def distance_grid(freq_khz: float, max_km: float, step_km: float) -> np.ndarray:
    """Distances [km] for radial fields: geometric from one wavelength to 10 km (100 points),
    then every ``step_km`` to ``max_km``."""
    d0 = first_distance_km(freq_khz)
    near_end = min(10.0, max_km)
    near = np.geomspace(d0, near_end, 100) if near_end > d0 else np.array([d0])
    far = np.arange(near_end + step_km, max_km + step_km / 2, step_km)
    return np.concatenate([near, far])


def radial_fields(
    freq_khz: float,
    ground_map: GroundMap,
    lat: float,
    lon: float,
    bearings_deg,
    e1km_mv_m,
    max_km: float,
    step_km: float = 0.25,
    method: str = "millington",
    earth_k: float = 4 / 3,
    progress=None,
    dist_km=None,
) -> RadialFields:
    """Ground-wave field along every radial (mixed paths), vectorised over distance.

    Parameters
    ----------
    freq_khz : [kHz]
    ground_map : default ground and zones
    lat, lon : site [deg]
    bearings_deg : (nb,) [deg true]
    e1km_mv_m : (nb,) unattenuated field at 1 km toward each bearing [mV/m]
    max_km : radial length [km]
    step_km : ground sampling and distance step [km]
    method : ``"millington"`` or ``"kirke"``
    earth_k : effective earth-radius factor
    progress : optional callable(done, total)
    dist_km : the distance grid [km], increasing (default: :func:`distance_grid` of
        ``max_km`` and ``step_km``)
    """
    bearings = np.atleast_1d(np.asarray(bearings_deg, dtype=float))
    e1 = np.broadcast_to(np.asarray(e1km_mv_m, dtype=float), bearings.shape)
    d = distance_grid(freq_khz, max_km, step_km) if dist_km is None else np.asarray(dist_km,
                                                                                   dtype=float)
    sections = ground_map.radial_sections(lat, lon, bearings, max_km)
    out = np.empty((bearings.size, d.size))
    for g in sections.grounds:
        _ = model(freq_khz, g, earth_k).table  # build each curve once, up front
    if method == "millington":  # all radials in one grouped look-up per ground
        out[:] = millington_radials_db(sections, d, freq_khz, earth_k) + mv_m_to_dbu(e1)[:, None]
        if progress is not None:
            progress(bearings.size, bearings.size)
    else:
        for i, secs in enumerate(sections):
            out[i] = path_field_db(method, secs, d, freq_khz, earth_k) + mv_m_to_dbu(e1[i])
            if progress is not None:
                progress(i + 1, bearings.size)
    return RadialFields(bearings, d, out, np.array(e1), sections)


def crossings(dist_km, field_dbu, level_dbu):
    """Where a field profile crosses a level: (distances [km], +1 rising / −1 falling).

    Linear interpolation in dB between grid points.
    """
    above = field_dbu >= level_dbu
    idx = np.flatnonzero(above[1:] != above[:-1])
    f0, f1 = field_dbu[idx], field_dbu[idx + 1]
    t = (f0 - level_dbu) / (f0 - f1)
    dist = dist_km[idx] + t * (dist_km[idx + 1] - dist_km[idx])
    direction = np.where(above[idx + 1], 1, -1)
    return dist, direction


@dataclass(frozen=True)
class LevelContour:
    """One contour level over all bearings.

    Attributes
    ----------
    level_mv_m, label : the level and its label
    first_km : (nb,) distance where the field first falls below the level; NaN where it is
        below the level already at the first grid distance, ``inf`` where it is still above at
        the end of the radial
    further : per bearing, list of (start km, end km) stretches beyond ``first_km`` where the
        field is above the level again (recovery over water)
    polygon_xy : shapely geometry in the site's local projection [km]
    polygon_lonlat : the same in lon/lat [deg]
    area_km2 : geodesic area [km²]
    community_share : share of the community area inside the contour (None without one)
    """

    level_mv_m: float
    label: str
    first_km: np.ndarray
    further: list
    polygon_xy: object
    polygon_lonlat: object
    area_km2: float
    community_share: float | None

    @property
    def multiple(self) -> np.ndarray:
        """(nb,) True where the radial crosses the level more than once."""
        return np.array([bool(f) for f in self.further])


def first_crossings(radials: RadialFields, level_dbu):
    """First falling crossing per bearing and the further stretches above the level.

    ``level_dbu`` is a scalar or one level per bearing. Returns (first_km (nb,), further list);
    NaN where the field is below the level already at the first distance, ``inf`` where it is
    still above at the end of the radial.
    """
    d = radials.dist_km
    f = radials.field_dbu
    nb = radials.bearings_deg.size
    levels = np.broadcast_to(np.asarray(level_dbu, dtype=float), (nb,))[:, None]
    above = f >= levels
    ii, jj = np.nonzero(above[:, 1:] != above[:, :-1])  # every crossing, by bearing then distance
    f0, f1 = f[ii, jj], f[ii, jj + 1]
    lev = levels[ii, 0]
    dist = d[jj] + (f0 - lev) / (f0 - f1) * (d[jj + 1] - d[jj])  # linear in dB
    rising = above[ii, jj + 1]
    bounds = np.searchsorted(ii, np.arange(nb + 1))
    first = np.where(above[:, 0], np.inf, np.nan)
    has = bounds[1:] > bounds[:-1]
    first[has & above[:, 0]] = dist[bounds[:-1][has & above[:, 0]]]
    further = [[] for _ in range(nb)]
    for i in np.flatnonzero((bounds[1:] - bounds[:-1] > 1) & above[:, 0]):
        rest = dist[bounds[i] + 1:bounds[i + 1]]
        rdir = rising[bounds[i] + 1:bounds[i + 1]]
        spans = []
        for k in range(0, rest.size, 2):  # rising then falling
            if not rdir[k]:
                continue
            end = rest[k + 1] if k + 1 < rest.size else d[-1]
            if end - rest[k] > 1e-6:  # a profile that only touches the level is no recovery
                spans.append((float(rest[k]), float(end)))
        further[i] = spans
    return first, further


def _densify_bearing(ring, max_deg: float):
    """Insert vertices so that no edge of a (distance, bearing) ring spans more than
    ``max_deg`` of bearing (an edge along a fixed distance becomes an arc on the ground)."""
    d, b = ring[:, 0], ring[:, 1]
    n = np.maximum(1, np.ceil(np.abs(np.diff(b)) / max_deg).astype(int))
    if n.max() == 1:
        return ring
    idx = np.repeat(np.arange(n.size), n)
    starts = np.repeat(np.cumsum(n) - n, n)
    t = (np.arange(idx.size) - starts) / np.repeat(n, n)
    out_d = d[idx] + t * (d[idx + 1] - d[idx])
    out_b = b[idx] + t * (b[idx + 1] - b[idx])
    return np.column_stack([np.append(out_d, d[-1]), np.append(out_b, b[-1])])


def _ring_xy(ring, max_deg):
    r = _densify_bearing(ring, max_deg)
    a = np.radians(np.mod(r[:, 1], 360.0))
    return np.column_stack([r[:, 0] * np.sin(a), r[:, 0] * np.cos(a)])


def polar_region(bearings_deg, dist_km, field_dbu, level_dbu):
    """The area where the field is at or above the level, as geometry in the site's local
    azimuthal-equidistant plane [km].

    The field on the polar grid (bearings × distances) is contoured with contourpy's filled
    marching squares in (distance, bearing) space, so that recoveries (islands) and holes come
    out as they are. The bearing axis wraps: it is contoured in two overlapping halves, each
    mapped to the ground through x = d sin β, y = d cos β (edges along a fixed distance
    densified to arcs), and the halves are united. Inside the first distance the field there is
    taken as it is at the first distance.

    Parameters
    ----------
    bearings_deg : (nb,) [deg true], any order, at least 3
    dist_km : (nd,) increasing [km]
    field_dbu : (nb, nd) [dBµV/m]
    level_dbu : scalar or (nb,) level per bearing [dBµV/m]

    Returns
    -------
    shapely Polygon or MultiPolygon (empty when the level is nowhere reached)
    """
    lev = np.asarray(level_dbu, dtype=float)
    if lev.ndim == 0:
        return polar_regions(bearings_deg, dist_km, field_dbu, [float(lev)])[0]
    return _polar_regions(bearings_deg, dist_km, field_dbu, lev, [0.0])[0]


def polar_regions(bearings_deg, dist_km, field_dbu, levels_dbu):
    """:func:`polar_region` for several scalar levels of one field, contoured from one
    grid (one list of geometries, in the order of ``levels_dbu``)."""
    return _polar_regions(bearings_deg, dist_km, field_dbu, 0.0,
                          [float(v) for v in levels_dbu])


def _polar_regions(bearings_deg, dist_km, field_dbu, shift, levels):
    """The regions where field − ``shift`` (scalar or per bearing) ≥ each of ``levels``."""
    import contourpy
    from shapely.geometry import Polygon

    b = np.asarray(bearings_deg, dtype=float)
    if b.size < 3 or not levels:
        return [Polygon() for _ in levels]
    order = np.argsort(b, kind="stable")
    f = np.asarray(field_dbu, dtype=float)
    lev = np.asarray(shift, dtype=float)
    if not np.array_equal(order, np.arange(b.size)):
        b, f = b[order], f[order]
        lev = lev[order] if lev.ndim else lev
    dist = np.asarray(dist_km, dtype=float)
    z = f - (lev if lev.ndim == 0 else lev[:, None])
    # only the distances up to one step beyond the last point at or above the lowest level
    reached = np.flatnonzero(z.max(axis=0) >= min(levels))
    if reached.size == 0:
        return [Polygon() for _ in levels]
    end = min(int(reached[-1]) + 2, dist.size)
    z = z[:, :end]
    z = np.column_stack([z[:, :1], z])  # the field at the first distance, down to the site
    d = np.concatenate([[0.0], dist[:end]])
    k = 2  # rows wrapped onto each side, so that both halves overlap the seams
    bb = np.concatenate([b[-k:] - 360.0, b, b[:k] + 360.0])
    zz = np.vstack([z[-k:], z, z[:k]])
    gen = contourpy.contour_generator(d, bb, zz, fill_type=contourpy.FillType.OuterOffset)
    max_deg = arc_step_deg(b)
    step = 2.0 * max(float(np.max(np.diff(bb))), 1e-6)  # overlap of the halves [deg]
    halves = [(b[0] - step, 180.0 + step), (180.0 - step, b[0] + 360.0 + step)]
    return [_region_xy(*gen.filled(level, np.inf), halves, d[-1], max_deg) for level in levels]


def bearing_arc(xy) -> tuple[float, float]:
    """The smallest arc of bearings from the origin that holds every point of ``xy`` ((n, 2),
    x east, y north): (its first bearing [deg, 0..360), its span [deg]); it starts after the
    widest gap between the points' bearings."""
    ang = np.mod(np.degrees(np.arctan2(xy[:, 0], xy[:, 1])), 360.0)
    srt = np.sort(ang)
    gaps = np.diff(np.concatenate([srt, srt[:1] + 360.0]))
    k = int(np.argmax(gaps))
    return float(srt[(k + 1) % srt.size]), float(360.0 - gaps[k])


def share_window(bearings_deg, target_xy, first_km: float):
    """The bearings whose radials reach ``target_xy`` (a region in the site's plane), for
    :func:`polar_shares`: ``(rows, unwrapped)`` — the indices into the sorted ``bearings_deg``
    from one bearing before the target's arc to one after, in order, and those bearings
    unwrapped to increase — or None when no window serves (the target surrounds the site, its
    arc with two bearings each side is half a turn or more, or it comes within ``first_km``
    of the site), and the whole turn must be contoured."""
    import shapely

    b = np.sort(np.asarray(bearings_deg, dtype=float))
    xy = shapely.get_coordinates(target_xy)
    if b.size < 3 or xy.size == 0:
        return None
    start, span = bearing_arc(xy)
    step = float(np.max(np.diff(np.append(b, b[0] + 360.0))))
    if span + 4 * step >= 180.0 or target_xy.distance(shapely.Point(0.0, 0.0)) <= first_km:
        return None
    rel = np.mod(b - start + step, 360.0)
    rows = np.flatnonzero(rel <= span + 2 * step)
    rows = rows[np.argsort(rel[rows], kind="stable")]
    return rows, start - step + rel[rows]


def window_shares(unwrapped_deg, dist_km, field_dbu, levels_dbu, target_xy, max_deg: float,
                  from_site: bool = True):
    """The shares of :func:`polar_shares` from the rows of one :func:`share_window` only:
    ``field_dbu`` holds those rows (in its order) on ``dist_km``, which must reach past the
    target's farthest point. ``max_deg`` is the densifying step along arcs [deg].

    ``dist_km`` may also be the tail of the grid from a point nearer than the target
    (``from_site=False``): the cells beyond it are contoured as in the whole grid, and the
    region's cut at its first distance lies outside the target."""
    import contourpy
    import shapely
    from shapely.geometry import Polygon

    total = target_xy.area
    dist = np.asarray(dist_km, dtype=float)
    far = float(np.hypot(*shapely.get_coordinates(target_xy).T).max())
    end = min(int(np.searchsorted(dist, far)) + 2, dist.size)
    z = np.asarray(field_dbu, dtype=float)[:, :end]
    d = dist[:end]
    if from_site:
        z = np.column_stack([z[:, :1], z])  # the field at the first distance, down to the site
        d = np.concatenate([[0.0], d])
    gen = None
    shares = []
    for level in levels_dbu:
        # the window holds the target with a bearing and two distances to spare on each side:
        # all of it above the level fills it, all below leaves it empty
        if (z >= level).all():
            shares.append(1.0)
            continue
        if (z < level).all():
            shares.append(0.0)
            continue
        if gen is None:
            gen = contourpy.contour_generator(d, np.asarray(unwrapped_deg, dtype=float), z,
                                              fill_type=contourpy.FillType.OuterOffset)
        points, offsets = gen.filled(float(level), np.inf)
        inside = 0.0
        for pts, off in zip(points, offsets):  # disjoint polygons of one level
            rings = [_ring_xy(pts[a:e], max_deg) for a, e in zip(off[:-1], off[1:])]
            poly = Polygon(rings[0], rings[1:])
            if not poly.is_valid:
                poly = shapely.make_valid(poly)
            inside += poly.intersection(target_xy).area
        shares.append(min(1.0, inside / total))
    return shares


def polar_shares(bearings_deg, dist_km, field_dbu, levels_dbu, target_xy):
    """For each level, the share of ``target_xy`` (a region in the site's plane, such as a
    community) where the field is at or above it: the same regions as :func:`polar_regions`,
    but contoured only over the bearings and distances that reach the target when it lies
    within less than a half turn of bearings (one window then maps to the plane one to one).
    Marching squares is local to each cell, so the regions inside the window are those of the
    whole grid."""
    total = target_xy.area
    if total <= 0:
        return [0.0 for _ in levels_dbu]
    b = np.asarray(bearings_deg, dtype=float)
    f = np.asarray(field_dbu, dtype=float)
    order = np.argsort(b, kind="stable")
    b, f = b[order], f[order]
    dist = np.asarray(dist_km, dtype=float)
    window = share_window(b, target_xy, float(dist[0]))
    if window is None:
        return [min(1.0, r.intersection(target_xy).area / total)
                for r in polar_regions(b, dist, f, levels_dbu)]
    rows, unwrapped = window
    return window_shares(unwrapped, dist, f[rows], levels_dbu, target_xy, arc_step_deg(b))


def arc_step_deg(sorted_bearings) -> float:
    """The densifying step along arcs between radials [deg]: the finest bearing step."""
    b = sorted_bearings
    return max(0.5, float(np.min(np.diff(b))) if b.size > 1 else 1.0)


def polar_area_km2(bearings_deg, dist_km, field_dbu, level_dbu, projection) -> float:
    """Area [km², on the ellipsoid] where the field is at or above ``level_dbu``, straight from
    the filled marching squares in (distance, bearing) space, without building the region.

    The grid is contoured over exactly one turn (the first bearing repeated at +360°), and the
    area is the line integral ∮ F(ρ) dφ along the rings (Green's theorem in geodesic polar
    coordinates; F as in :meth:`~.geodesy.LocalProjection.plane_area_km2`), with each ring edge
    straight in (distance, bearing): between radials the contour then follows the bearing like
    the arcs of :func:`polar_region`, rather than cutting across as a chord."""
    import contourpy

    b = np.asarray(bearings_deg, dtype=float)
    f = np.asarray(field_dbu, dtype=float)
    order = np.argsort(b, kind="stable")
    b, f = b[order], f[order]
    dist = np.asarray(dist_km, dtype=float)
    z = f - float(level_dbu)
    reached = np.flatnonzero(z.max(axis=0) >= 0.0)
    if b.size < 3 or reached.size == 0:
        return 0.0
    end = min(int(reached[-1]) + 2, dist.size)
    z = np.column_stack([z[:, :1], z[:, :end]])  # the field at the first distance, to the site
    d = np.concatenate([[0.0], dist[:end]])
    gen = contourpy.contour_generator(d, np.append(b, b[0] + 360.0), np.vstack([z, z[:1]]),
                                      fill_type=contourpy.FillType.OuterOffset)
    points, offsets = gen.filled(0.0, np.inf)
    r2 = projection.gaussian_radius_km ** 2
    total = 0.0
    for pts, off in zip(points, offsets):
        for k, (a, e) in enumerate(zip(off[:-1], off[1:])):
            rho, beta = pts[a:e, 0], np.radians(pts[a:e, 1])
            r0, r1, dphi = rho[:-1], rho[1:], -np.diff(beta)  # φ counter-clockwise from east
            q = (0.5 * (r0 + r1)) ** 2 / r2
            ring = float(np.sum(((r0 * r0 + r0 * r1 + r1 * r1) / 6.0
                                 + r2 * q * q * (-1 / 24 + q * (1 / 720 - q / 40320))) * dphi))
            total += abs(ring) * (1 if k == 0 else -1)
    return total


def _region_xy(points, offsets, halves, d_end, max_deg):
    """Filled (distance, bearing) polygons from contourpy → one geometry in the plane: each
    polygon cut into the two halves (each maps to the ground one to one), mapped, united."""
    import shapely
    from shapely.geometry import Polygon

    parts = []
    for pts, off in zip(points, offsets):
        poly_db = Polygon(pts[off[0]:off[1]], [pts[a:e] for a, e in zip(off[1:-1], off[2:])])
        for lo, hi in halves:  # each half spans less than 360°: it maps to the ground one to one
            clipped = shapely.clip_by_rect(poly_db, -1.0, lo, d_end + 1.0, hi)
            for piece in shapely.get_parts(clipped):
                if piece.geom_type != "Polygon" or piece.is_empty:
                    continue
                rings = [_ring_xy(np.asarray(piece.exterior.coords), max_deg)]
                rings += [_ring_xy(np.asarray(r.coords), max_deg) for r in piece.interiors]
                poly = Polygon(rings[0], rings[1:])
                if not poly.is_valid:
                    poly = shapely.make_valid(poly)
                if poly.area > 0:
                    parts.append(poly)
    if not parts:
        return Polygon()
    geom = shapely.union_all(parts)
    polys = [g for g in shapely.get_parts(geom) if g.geom_type == "Polygon" and g.area > 1e-9]
    return shapely.union_all(polys) if polys else Polygon()


def contour_geometry(region_xy, projection: LocalProjection, community_lonlat=None):
    """A contour region in local xy [km] → (lon/lat geometry, geodesic area [km²], community
    share or None). The lon/lat geometry follows RFC 7946 (see
    :func:`~.geodesy.xy_to_lonlat_geometry`)."""
    poly_ll = xy_to_lonlat_geometry(region_xy, projection)
    area = geodesic_area_km2(poly_ll)
    share = None
    if community_lonlat is not None:
        comm_xy = projection.geom_to_xy(community_lonlat)
        inside = xy_to_lonlat_geometry(comm_xy.intersection(region_xy), projection)
        total = geodesic_area_km2(community_lonlat)
        share = min(1.0, geodesic_area_km2(inside) / total) if total > 0 else 0.0
    return poly_ll, area, share


def level_contour(
    radials: RadialFields,
    level_mv_m: float,
    label: str,
    projection: LocalProjection,
    community_lonlat=None,
) -> LevelContour:
    """Contour distances, polygon, area and community share for one level."""
    level_dbu = float(mv_m_to_dbu(level_mv_m))
    first, further = first_crossings(radials, level_dbu)
    poly = polar_region(radials.bearings_deg, radials.dist_km, radials.field_dbu, level_dbu)
    poly_ll, area, share = contour_geometry(poly, projection, community_lonlat)
    return LevelContour(float(level_mv_m), label, first, further, poly, poly_ll, area, share)


def field_raster(radials: RadialFields, extent_km: float, n: int = 201, centre_km=(0.0, 0.0),
                 half_km: float | None = None):
    """Field [dBµV/m] on a regular (x, y) grid [km] in the site's local projection.

    The grid spans ±``extent_km`` around the site (or ±``half_km`` around ``centre_km``).
    Bilinear interpolation of the radial fields in (bearing, distance); NaN inside one
    wavelength and beyond the radials. Returns (x_km (n,), y_km (n,), field (n, n) [y, x]).
    """
    from scipy.interpolate import RegularGridInterpolator

    h = extent_km if half_km is None else half_km
    x = np.linspace(centre_km[0] - h, centre_km[0] + h, n)
    y = np.linspace(centre_km[1] - h, centre_km[1] + h, n)
    xx, yy = np.meshgrid(x, y)
    dist = np.hypot(xx, yy)
    brg = np.mod(np.degrees(np.arctan2(xx, yy)), 360.0)
    b = radials.bearings_deg
    order = np.argsort(b)
    b_ext = np.concatenate([b[order][-1:] - 360.0, b[order], b[order][:1] + 360.0])
    f = radials.field_dbu[order]
    f_ext = np.vstack([f[-1:], f, f[:1]])
    interp = RegularGridInterpolator((b_ext, radials.dist_km), f_ext, bounds_error=False,
                                     fill_value=np.nan)
    vals = interp(np.column_stack([brg.ravel(), dist.ravel()])).reshape(xx.shape)
    return x, y, vals
