"""Geodesics on WGS84 (pyproj) and a local azimuthal-equidistant map projection.

All geodesic work goes through :data:`GEOD` (Karney's algorithms, as in GeographicLib); nothing
here is hand-written spherical trigonometry.
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

    def geom_to_xy(self, geometry):
        """A shapely geometry in lon/lat → the same in local (x, y) [km]."""
        import shapely

        return shapely.transform(geometry, lambda c: np.column_stack(self.to_xy(c[:, 0], c[:, 1])))

    def geom_to_lonlat(self, geometry):
        """A shapely geometry in local (x, y) [km] → the same in lon/lat."""
        import shapely

        return shapely.transform(geometry, lambda c: np.column_stack(self.to_lonlat(c[:, 0], c[:, 1])))


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
