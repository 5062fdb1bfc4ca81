"""Geodesics on WGS84 (pyproj) and a local azimuthal-equidistant map projection.

All geodesic work goes through :data:`GEOD` (Karney's algorithms, as in GeographicLib); nothing
here is hand-written spherical trigonometry, except the short series for the area of a region
given in a site's plane (:meth:`LocalProjection.plane_area_km2`), checked against GEOD.
"""

from __future__ import annotations

import threading

import numpy as np
from pyproj import Geod

from .validate import check_finite

__all__ = [
    "GEOD",
    "check_site",
    "radial_points",
    "fwd_points",
    "inverse",
    "midpoint",
    "geodesic_area_km2",
    "LocalProjection",
    "xy_to_lonlat_geometry",
    "local_projection",
    "dms",
]

GEOD = Geod(ellps="WGS84")


def check_site(lat_deg, lon_deg, where: str = "", names=("lat", "lon")):
    """Validate a site: latitude −90..90, longitude −180..360; returns floats.

    ``names`` are the field names used in messages (``("--from LAT", "--from LON")`` …).
    """
    return (
        check_finite(names[0], lat_deg, -90.0, 90.0, where=where),
        check_finite(names[1], lon_deg, -180.0, 360.0, where=where),
    )


def radial_points(lat_deg, lon_deg, bearing_deg, dist_km):
    """Points at ``dist_km`` along geodesics leaving the site at ``bearing_deg``.

    Parameters
    ----------
    lat_deg, lon_deg : site [deg]
    bearing_deg : (nb,) bearings [deg true]
    dist_km : (nd,) distances [km]

    Returns
    -------
    lat, lon : (nb, nd) arrays [deg]
    """
    b = np.atleast_1d(np.asarray(bearing_deg, dtype=float))
    d = np.atleast_1d(np.asarray(dist_km, dtype=float))
    bb, dd = np.meshgrid(b, d, indexing="ij")
    lon, lat, _ = GEOD.fwd(
        np.full(bb.size, lon_deg), np.full(bb.size, lat_deg), bb.ravel(), dd.ravel() * 1e3
    )
    return np.asarray(lat).reshape(bb.shape), np.asarray(lon).reshape(bb.shape)


def fwd_points(lat_deg, lon_deg, bearing_deg, dist_km):
    """Pairwise version of :func:`radial_points`: one point per (bearing, distance) pair."""
    b, d = np.broadcast_arrays(np.asarray(bearing_deg, float), np.asarray(dist_km, float))
    lon, lat, _ = GEOD.fwd(np.full(b.size, lon_deg), np.full(b.size, lat_deg), b.ravel(),
                           d.ravel() * 1e3)
    return np.asarray(lat).reshape(b.shape), np.asarray(lon).reshape(b.shape)


def inverse(lat1, lon1, lat2, lon2):
    """Geodesic distance [km] and forward/back azimuths [deg true] between points (broadcast)."""
    lat1, lon1, lat2, lon2 = np.broadcast_arrays(
        *(np.asarray(v, dtype=float) for v in (lat1, lon1, lat2, lon2))
    )
    az12, az21, dist = GEOD.inv(lon1.ravel(), lat1.ravel(), lon2.ravel(), lat2.ravel())
    shape = lat1.shape
    return (
        np.asarray(dist).reshape(shape) / 1e3,
        np.mod(np.asarray(az12).reshape(shape), 360.0),
        np.mod(np.asarray(az21).reshape(shape), 360.0),
    )


def midpoint(lat1, lon1, lat2, lon2):
    """Midpoint (lat, lon) [deg] of the geodesic between two points (broadcast)."""
    dist_km, az12, _ = inverse(lat1, lon1, lat2, lon2)
    lat1b, lon1b = np.broadcast_arrays(np.asarray(lat1, float), np.asarray(lon1, float))
    lat1b = np.broadcast_to(lat1b, dist_km.shape)
    lon1b = np.broadcast_to(lon1b, dist_km.shape)
    lon, lat, _ = GEOD.fwd(lon1b.ravel(), lat1b.ravel(), az12.ravel(), dist_km.ravel() * 500.0)
    return np.asarray(lat).reshape(dist_km.shape), np.asarray(lon).reshape(dist_km.shape)


def geodesic_area_km2(geometry) -> float:
    """Area [km²] of a shapely (multi)polygon in lon/lat on the WGS84 ellipsoid."""
    if geometry is None or geometry.is_empty:
        return 0.0
    area, _ = GEOD.geometry_area_perimeter(geometry)
    return abs(area) / 1e6


class LocalProjection:
    """Azimuthal-equidistant projection centred on a site, in km (x east, y north).

    Distances and bearings from the centre are true: a point at geodesic distance d and
    azimuth β maps to (d sin β, d cos β). This is the ellipsoidal azimuthal equidistant
    projection (as PROJ's ``aeqd`` defines it), evaluated with GeographicLib geodesics through
    pyproj's ``Geod``, which, unlike PROJ transformer objects, is safe to share between threads.
    """

    def __init__(self, lat_deg: float, lon_deg: float):
        self.lat, self.lon = check_site(lat_deg, lon_deg)

    def to_xy(self, lon, lat):
        """(lon, lat) [deg] → (x, y) [km]."""
        lon = np.asarray(lon, float)
        lat = np.asarray(lat, float)
        lon_b, lat_b = np.broadcast_arrays(lon, lat)
        az, _, dist = GEOD.inv(np.full(lon_b.size, self.lon), np.full(lon_b.size, self.lat),
                               lon_b.ravel(), lat_b.ravel())
        d = np.asarray(dist) / 1e3
        a = np.radians(np.asarray(az))
        return (d * np.sin(a)).reshape(lon_b.shape), (d * np.cos(a)).reshape(lon_b.shape)

    def to_lonlat(self, x_km, y_km):
        """(x, y) [km] → (lon, lat) [deg]."""
        x, y = np.broadcast_arrays(np.asarray(x_km, float), np.asarray(y_km, float))
        az = np.degrees(np.arctan2(x, y)).ravel()
        d = np.hypot(x, y).ravel() * 1e3
        lon, lat, _ = GEOD.fwd(np.full(d.size, self.lon), np.full(d.size, self.lat), az, d)
        return np.asarray(lon).reshape(x.shape), np.asarray(lat).reshape(x.shape)

    @property
    def gaussian_radius_km(self) -> float:
        """√(M·N) at the site [km]: M and N, the ellipsoid's principal radii of curvature (the
        meridian's and the prime vertical's), give its Gaussian curvature 1/(M·N)."""
        a, f = GEOD.a / 1e3, GEOD.f
        e2 = f * (2 - f)
        w = 1.0 - e2 * np.sin(np.radians(self.lat)) ** 2
        return float(np.sqrt((a * (1 - e2) / w**1.5) * (a / np.sqrt(w))))

    def plane_area_km2(self, geom_xy) -> float:
        """Area [km²] on the ellipsoid of a (multi)polygon given in this plane, without taking
        its vertices back to lon/lat (the site search's fast path; full runs use
        :func:`geodesic_area_km2`).

        In geodesic polar coordinates (ρ, φ) about the site the area is ∮ F(ρ) dφ along the
        rings, with F(ρ) = ∫ m(r) dr and m the reduced length. On the sphere of the site's
        Gaussian curvature (radius √(M·N), M and N the principal radii of curvature),
        F = ρ²/2 − ρ⁴/(24 R²) + ρ⁶/(720 R⁴) − …: the first term is the plane area (shoelace),
        the small rest is summed edge by edge at each edge's middle. Within 1e-6 of the
        geodesic area for regions within 1000 km of the site with edges of a few km
        (tests/test_geodesy_ground.py).
        """
        import shapely

        if geom_xy is None or geom_xy.is_empty:
            return 0.0
        r2 = self.gaussian_radius_km ** 2
        total = 0.0
        for poly in shapely.get_parts(geom_xy):
            if poly.geom_type != "Polygon" or poly.is_empty:
                continue
            for k, ring in enumerate((poly.exterior, *poly.interiors)):
                c = np.asarray(ring.coords)[:, :2]
                x0, y0, x1, y1 = c[:-1, 0], c[:-1, 1], c[1:, 0], c[1:, 1]
                plane = 0.5 * float(np.sum(x0 * y1 - x1 * y0))  # signed, counter-clockwise > 0
                dphi = np.angle(np.exp(1j * (np.arctan2(y1, x1) - np.arctan2(y0, x0))))
                q = (0.25 * ((x0 + x1) ** 2 + (y0 + y1) ** 2)) / r2  # (ρ/R)² at the middle
                rest = r2 * float(np.sum(q * q * (-1 / 24 + q * (1 / 720 - q / 40320)) * dphi))
                total += abs(plane + rest) * (1 if k == 0 else -1)
        return total

    def geom_to_xy(self, geometry):
        """A shapely geometry in lon/lat → the same in local (x, y) [km]."""
        import shapely

        return shapely.transform(geometry, lambda c: np.column_stack(self.to_xy(c[:, 0], c[:, 1])))

    def geom_to_lonlat(self, geometry):
        """A shapely geometry in local (x, y) [km] → the same in lon/lat."""
        import shapely

        return shapely.transform(geometry, lambda c: np.column_stack(self.to_lonlat(c[:, 0], c[:, 1])))


def _ring_lonlat(ring_xy, projection: LocalProjection):
    """Vertices of a ring in local xy → (lon, lat) with longitudes unwrapped (continuous, not
    folded into ±180) and the first vertex within 180° of the site's longitude."""
    lon, lat = projection.to_lonlat(ring_xy[:, 0], ring_xy[:, 1])
    lon = np.unwrap(np.asarray(lon, float), period=360.0)
    site = ((projection.lon + 180.0) % 360.0) - 180.0
    lon = lon - 360.0 * np.round((lon[0] - site) / 360.0)
    return lon, np.asarray(lat, float)


def _split_antimeridian(geom):
    """A geometry in unwrapped longitudes → parts within −180..180 (RFC 7946 §3.1.9)."""
    import shapely
    from shapely.geometry import box

    x0, _, x1, _ = geom.bounds
    pieces = []
    for k in range(int(np.floor((x0 + 180.0) / 360.0)), int(np.floor((x1 + 180.0) / 360.0)) + 1):
        part = geom.intersection(box(-180.0 + 360.0 * k, -90.0, 180.0 + 360.0 * k, 90.0))
        if not part.is_empty:
            pieces.append(shapely.affinity.translate(part, xoff=-360.0 * k))
    polys = [g for p in pieces for g in shapely.get_parts(p)
             if g.geom_type == "Polygon" and g.area > 0]
    return polys


def wrap_lonlat_polygons(geom):
    """A (multi)polygon drawn in lon/lat whose rings cross the antimeridian (an edge from
    179° E to 179° W, or longitudes written past 180°) → the same area on the sphere as parts
    within −180..180 (RFC 7946 §3.1.9). Each ring's longitudes are unwrapped, so an edge takes
    the short way round; a geometry that crosses nothing is returned as it is.

    Without this a ring from 179° E to 179° W reads as a band round the whole earth."""
    import shapely
    import shapely.affinity  # noqa: F401  (used by _split_antimeridian)
    from shapely.geometry import MultiPolygon, Polygon

    def unwrapped(ring):
        c = np.asarray(ring.coords, float)
        lon = np.unwrap(c[:, 0], period=360.0)
        return np.column_stack([lon - 360.0 * np.round(lon[0] / 360.0), c[:, 1]])

    parts = [g for g in shapely.get_parts(geom) if g.geom_type == "Polygon" and not g.is_empty]
    crosses = any(np.abs(np.diff(np.asarray(r.coords)[:, 0])).max(initial=0) > 180.0
                  or np.asarray(r.coords)[:, 0].max() > 180.0
                  for g in parts for r in [g.exterior, *g.interiors])
    if not crosses:
        return geom
    out = []
    for g in parts:
        shell = unwrapped(g.exterior)
        holes = []
        for r in g.interiors:
            h = unwrapped(r)
            h[:, 0] -= 360.0 * np.round((h[:, 0].mean() - shell[:, 0].mean()) / 360.0)
            holes.append(h)
        p = Polygon(shell, holes)
        out.extend(_split_antimeridian(p if p.is_valid else shapely.make_valid(p)))
    merged = shapely.union_all(out) if len(out) > 1 else out[0]
    polys = [g for g in shapely.get_parts(merged) if g.geom_type == "Polygon"]
    return polys[0] if len(polys) == 1 else MultiPolygon(polys)


def xy_to_lonlat_geometry(geom_xy, projection: LocalProjection):
    """A (multi)polygon in the site's local plane [km] → lon/lat [deg] as RFC 7946 asks.

    Longitudes are unwrapped along each ring and the result is split at the antimeridian into
    a MultiPolygon; an exterior ring that encloses a pole is closed along the pole's latitude;
    exteriors are counter-clockwise and holes clockwise; the result is valid. A Polygon is
    returned when there is one part.
    """
    import shapely
    import shapely.affinity  # noqa: F401  (used by _split_antimeridian)
    from shapely.geometry import MultiPolygon, Point, Polygon

    if geom_xy is None or geom_xy.is_empty:
        return Polygon()
    poles = []
    for pole_lat in (90.0, -90.0):
        px, py = projection.to_xy(0.0, pole_lat)
        poles.append((pole_lat, Point(float(px), float(py))))
    out = []
    for poly in shapely.get_parts(geom_xy):
        if poly.geom_type != "Polygon" or poly.is_empty:
            continue
        lon, lat = _ring_lonlat(np.asarray(poly.exterior.coords), projection)
        shell = np.column_stack([lon, lat])
        turn = lon[-1] - lon[0]
        if abs(turn) > 180.0:  # the ring goes round a pole: close it along the pole's latitude
            inside = [pl for pl, pt in poles if poly.contains(pt)]
            pole_lat = inside[0] if inside else (90.0 if lat.mean() > 0 else -90.0)
            shell = np.vstack([shell, [[lon[-1], pole_lat], [lon[0], pole_lat]]])
        holes = []
        for ring in poly.interiors:
            hl, ht = _ring_lonlat(np.asarray(ring.coords), projection)
            # a hole sits inside its shell: keep it on the shell's side of the antimeridian
            shift = 360.0 * np.round((np.mean(hl) - np.mean(shell[:, 0])) / 360.0)
            if abs(hl[-1] - hl[0]) < 180.0:
                holes.append(np.column_stack([hl - shift, ht]))
        p = Polygon(shell, holes)
        if not p.is_valid:
            p = shapely.make_valid(p)
        out.extend(_split_antimeridian(p))
    if not out:
        return Polygon()
    geom = shapely.union_all(out) if len(out) > 1 else out[0]
    parts = [g for g in shapely.get_parts(geom) if g.geom_type == "Polygon"]
    geom = parts[0] if len(parts) == 1 else MultiPolygon(parts)
    return shapely.orient_polygons(geom, exterior_cw=False)


_THREAD = threading.local()


def local_projection(lat_deg: float, lon_deg: float) -> LocalProjection:
    """Cached :class:`LocalProjection` for a site (one small cache per thread)."""
    cache = getattr(_THREAD, "projections", None)
    if cache is None:
        cache = _THREAD.projections = {}
    key = (float(lat_deg), float(lon_deg))
    proj = cache.get(key)
    if proj is None:
        if len(cache) >= 64:
            cache.pop(next(iter(cache)))
        proj = cache[key] = LocalProjection(*key)
    return proj


def dms(value_deg: float, pos: str, neg: str) -> str:
    """Decimal degrees → ``41°12′33.4″ N`` style text."""
    hemi = pos if value_deg >= 0 else neg
    v = abs(value_deg)
    d = int(v)
    m = int((v - d) * 60)
    s = (v - d - m / 60) * 3600
    if s >= 59.95:
        s = 0.0
        m += 1
    if m == 60:
        m = 0
        d += 1
    return f"{d}°{m:02d}′{s:04.1f}″ {hemi}"
