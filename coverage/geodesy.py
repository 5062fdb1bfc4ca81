"""Geodesics on WGS84 (pyproj) and a local azimuthal-equidistant map projection.

All geodesic work goes through :data:`GEOD` (Karney's algorithms, as in GeographicLib); nothing
here is hand-written spherical trigonometry.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from pyproj import Geod, Transformer

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


def check_site(lat_deg, lon_deg, where: str = ""):
    """Validate a site: latitude −90..90, longitude −180..360; returns floats."""
    return (
        check_finite("lat", lat_deg, -90.0, 90.0, where=where),
        check_finite("lon", lon_deg, -180.0, 360.0, where=where),
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

    Distances and bearings from the centre are true on this projection, so a radial at
    bearing β and distance d lands at (d sin β, d cos β).
    """

    def __init__(self, lat_deg: float, lon_deg: float):
        self.lat, self.lon = check_site(lat_deg, lon_deg)
        # a PROJ pipeline string needs no database lookup (from_crs costs ~13 ms per site)
        self._tr = Transformer.from_pipeline(
            "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad "
            f"+step +proj=aeqd +lat_0={self.lat!r} +lon_0={self.lon!r} +x_0=0 +y_0=0 "
            "+ellps=WGS84 +units=km"
        )

    def to_xy(self, lon, lat):
        """(lon, lat) [deg] → (x, y) [km]."""
        x, y = self._tr.transform(np.asarray(lon, float), np.asarray(lat, float))
        return np.asarray(x), np.asarray(y)

    def geom_to_xy(self, geometry):
        """A shapely geometry in lon/lat → the same in local (x, y) [km]."""
        import shapely

        return shapely.transform(geometry, lambda c: np.column_stack(self.to_xy(c[:, 0], c[:, 1])))

    def geom_to_lonlat(self, geometry):
        """A shapely geometry in local (x, y) [km] → the same in lon/lat."""
        import shapely

        return shapely.transform(geometry, lambda c: np.column_stack(self.to_lonlat(c[:, 0], c[:, 1])))

    def to_lonlat(self, x_km, y_km):
        """(x, y) [km] → (lon, lat) [deg]."""
        lon, lat = self._tr.transform(np.asarray(x_km, float), np.asarray(y_km, float),
                                      direction="INVERSE")
        return np.asarray(lon), np.asarray(lat)


@lru_cache(maxsize=32)
def local_projection(lat_deg: float, lon_deg: float) -> LocalProjection:
    """Cached :class:`LocalProjection` for a site."""
    return LocalProjection(lat_deg, lon_deg)


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
