"""Ground electrical constants: the `Ground` record and the ITU-R P.368 ground classes.

Conductivity zones (:class:`GroundMap`) are read from GeoJSON by
:func:`mwreach.coverage.inputs.load_zones`.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

import numpy as np

from .validate import check_finite

__all__ = ["Ground", "GROUND_CLASSES", "ground_class", "Zone", "Section", "SectionTable",
           "GroundMap", "ray_intervals", "ray_intervals_many"]

# Validity window of the ground-wave method (ITU-R P.368 covers 10 kHz to 30 MHz).
SIGMA_RANGE_MS_M = (1e-4, 1e7)  # from very dry ice to (practically) a perfect conductor
EPS_R_RANGE = (1.0, 100.0)


@dataclass(frozen=True)
class Ground:
    """Homogeneous ground: conductivity and relative permittivity.

    Parameters
    ----------
    sigma_ms_m : conductivity [mS/m], 1e-4 .. 1e7
    eps_r : relative permittivity [-], 1 .. 100
    name : label for reports
    source : where the constants come from
    """

    sigma_ms_m: float
    eps_r: float
    name: str = ""
    source: str = ""

    def __post_init__(self):
        where = f"ground {self.name!r}" if self.name else ""
        object.__setattr__(
            self,
            "sigma_ms_m",
            check_finite("sigma_ms_m", self.sigma_ms_m, *SIGMA_RANGE_MS_M, where=where),
        )
        object.__setattr__(
            self, "eps_r", check_finite("eps_r", self.eps_r, *EPS_R_RANGE, where=where)
        )

    @property
    def sigma_s_m(self) -> float:
        """Conductivity [S/m]."""
        return self.sigma_ms_m * 1e-3

    @property
    def key(self) -> tuple[float, float]:
        """What the physics depends on (used for caching and merging sections)."""
        return (self.sigma_ms_m, self.eps_r)

    def label(self) -> str:
        """Short human label: ``"land 3 mS/m, εr 22"``."""
        head = f"{self.name} " if self.name else ""
        return f"{head}{self.sigma_ms_m:g} mS/m, εr {self.eps_r:g}"


_P368 = "ITU-R P.368 ground classes (docs/methods.md §1; from memory, four corroborated)"

#: Named ground classes of ITU-R P.368, keyed by a short identifier.
GROUND_CLASSES: dict[str, Ground] = {
    g.name: g
    for g in (
        Ground(1000.0, 80.0, "sea-low-salinity", _P368),
        Ground(5000.0, 70.0, "sea", _P368),
        Ground(3.0, 80.0, "fresh-water", _P368),
        Ground(30.0, 40.0, "land-30", _P368),
        Ground(10.0, 30.0, "wet-ground", _P368),
        Ground(3.0, 22.0, "land", _P368),
        Ground(1.0, 15.0, "medium-dry", _P368),
        Ground(0.3, 7.0, "dry", _P368),
        Ground(0.1, 3.0, "very-dry", _P368),
        Ground(0.03, 3.0, "ice-1c", _P368),
        Ground(0.01, 3.0, "ice-10c", _P368),
    )
}


def ground_class(name: str, *, where: str = "") -> Ground:
    """Look up a ground class by name; the error lists the valid names."""
    try:
        return GROUND_CLASSES[name]
    except KeyError:
        suffix = f" in {where}" if where else ""
        raise ValueError(
            f"unknown ground class {name!r}{suffix}; valid: {', '.join(GROUND_CLASSES)}"
        ) from None


# --- conductivity zones --------------------------------------------------------------------

# Zone edges are straight in lon/lat and curved in a site's plane; they are densified to this
# step before projection. A 0.05° chord departs from the projected curve by under a metre, and
# radial boundaries move by under 10 m against a 0.01° step (demo zones, three sites, 720
# radials to 900 km): far below anything a field figure shows, at a fifth of the vertices.
ZONE_EDGE_STEP_DEG = 0.05
#: Sites whose projected zones are kept: the study's own and every neighbour's (a crowded
#: channel lists a thousand; each entry is the demo's few zones, some kilobytes)
ZONES_XY_CACHE = 4096

def ray_intervals(geom_xy, bearings_deg, max_km: float):
    """Where radials from the origin run inside a (multi)polygon: (radial index, start, end).

    Every radial is cast against every ring edge at once (numpy): an edge is tested only by the
    radials whose bearing lies in the edge's angular span (half-open, so that a ray through a
    vertex counts once or, grazing, twice), the crossing distance is r = (P × D)/(u × D) for an
    edge P → P + D and the radial's unit vector u, and inside/outside alternates from the
    origin's side (even-odd rule, which holds across the rings of a valid MultiPolygon). Gives
    the same boundaries as intersecting each radial line with the polygon (to about 1e-9 km)
    at a small fraction of the cost.

    Parameters
    ----------
    geom_xy : shapely Polygon or MultiPolygon in the site's local plane [km]
    bearings_deg : (nb,) [deg true]
    max_km : radial length [km]
    """
    return [(i, a, e) for i, _z, a, e in ray_intervals_many([geom_xy], bearings_deg, max_km)]


def ray_intervals_many(geoms_xy, bearings_deg, max_km: float):
    """:func:`ray_intervals` for several (multi)polygons in one cast: (radial index, polygon
    index, start, end), the even-odd rule applied to each polygon on its own."""
    r, z, a, e = _ray_interval_arrays(geoms_xy, bearings_deg, max_km)
    return list(zip(r.tolist(), z.tolist(), a.tolist(), e.tolist()))


def _ray_interval_arrays(geoms_xy, bearings_deg, max_km: float):
    """:func:`ray_intervals_many` as four arrays (radial, polygon, start, end), ordered by
    radial, then polygon, then start."""
    none = (np.empty(0, dtype=int), np.empty(0, dtype=int), np.empty(0), np.empty(0))
    b = np.mod(np.atleast_1d(np.asarray(bearings_deg, dtype=float)), 360.0)
    e, ap, aq, zone_of_edge, inside0 = _edge_tables(geoms_xy)
    nz = len(geoms_xy)
    if b.size == 0 or e.shape[0] == 0:
        return none
    p, q = e[:, :2], e[:, 2:]
    lo, hi = np.minimum(ap, aq), np.maximum(ap, aq)
    wraps = hi - lo > 180.0  # the edge spans north: bearings in [hi, 360) and [0, lo)
    order = np.argsort(b, kind="stable")
    bs = b[order]
    # candidate (edge, radial) pairs from sorted bearings: [lo, hi) or, wrapping, [hi, 360) ∪ [0, lo)
    start1 = np.where(wraps, np.searchsorted(bs, hi, "left"), np.searchsorted(bs, lo, "left"))
    stop1 = np.where(wraps, bs.size, np.searchsorted(bs, hi, "left"))
    start2 = np.zeros_like(start1)
    stop2 = np.where(wraps, np.searchsorted(bs, lo, "left"), 0)
    edge_idx, rad_idx = [], []
    for s0, s1 in ((start1, stop1), (start2, stop2)):
        n = np.maximum(s1 - s0, 0)
        ei = np.repeat(np.arange(e.shape[0]), n)
        offs = np.arange(ei.size) - np.repeat(np.cumsum(n) - n, n)
        edge_idx.append(ei)
        rad_idx.append(np.repeat(s0, n) + offs)
    ei = np.concatenate(edge_idx)
    ri = order[np.concatenate(rad_idx)]
    if ei.size:
        th = np.radians(b[ri])
        ux, uy = np.sin(th), np.cos(th)
        dx, dy = q[ei, 0] - p[ei, 0], q[ei, 1] - p[ei, 1]
        den = ux * dy - uy * dx
        with np.errstate(divide="ignore", invalid="ignore"):
            r = (p[ei, 0] * dy - p[ei, 1] * dx) / den
        ok = np.isfinite(r) & (r > 0)
        grp, r = ri[ok] * nz + zone_of_edge[ei[ok]], r[ok]
    else:
        grp, r = np.empty(0, dtype=int), np.empty(0)
    # every (radial, polygon) group's crossings in order, with 0 first where the origin is
    # inside that polygon and +inf last; consecutive pairs (0,1), (2,3), … are the stretches
    # inside
    every = np.arange(b.size * nz)
    starts_inside = every[np.tile(inside0, b.size)]
    grp = np.concatenate([grp, every, starts_inside])
    r = np.concatenate([r, np.full(every.size, np.inf), np.zeros(starts_inside.size)])
    srt = np.lexsort((r, grp))
    grp, r = grp[srt], r[srt]
    rank = np.arange(grp.size) - np.searchsorted(grp, grp)
    start = (rank % 2 == 0) & (np.arange(grp.size) + 1 < grp.size)
    start[:-1] &= grp[1:] == grp[:-1]
    start[-1] = False
    a = r[start]
    z = np.minimum(r[np.flatnonzero(start) + 1], max_km)
    g = grp[start]
    keep = (a < max_km) & (z - a > 1e-9)
    g = g[keep]
    return g // nz, g % nz, a[keep], z[keep]


_EDGE_CACHE: dict = {}


def _edge_tables(geoms_xy):
    """Ring edges of several (multi)polygons (None or empty allowed) as (n, 4)
    [x0, y0, x1, y1] in order (polygon by polygon, ring by ring), their end angles from the
    origin [deg], the polygon of each edge, and whether the origin is inside each polygon;
    cached per list of geometry objects."""
    import shapely

    key = tuple(id(g) for g in geoms_xy)
    hit = _EDGE_CACHE.get(key)
    if hit is not None and all(a is b for a, b in zip(hit[0], geoms_xy)):
        return hit[1]
    arr = np.empty(len(geoms_xy), dtype=object)
    arr[:] = [g if g is not None else shapely.Polygon() for g in geoms_xy]
    parts, owner = shapely.get_parts(arr, return_index=True)
    poly = shapely.get_type_id(parts) == 3  # Polygon
    rings, ring_part = shapely.get_rings(parts[poly], return_index=True)
    c, ring = shapely.get_coordinates(rings, return_index=True)
    same = ring[1:] == ring[:-1]  # consecutive vertices of one ring make an edge
    e = np.column_stack([c[:-1][same], c[1:][same]]) if c.size else np.empty((0, 4))
    zone_of_edge = owner[poly][ring_part][ring[:-1][same]] if c.size else np.empty(0, int)
    ap = np.mod(np.degrees(np.arctan2(e[:, 0], e[:, 1])), 360.0)
    aq = np.mod(np.degrees(np.arctan2(e[:, 2], e[:, 3])), 360.0)
    inside0 = np.array([not g.is_empty and bool(shapely.contains_xy(g, 0.0, 0.0)) for g in arr],
                       dtype=bool)
    table = (e, ap, aq, zone_of_edge, inside0)
    if len(_EDGE_CACHE) > 512:
        _EDGE_CACHE.clear()
    _EDGE_CACHE[key] = (list(geoms_xy), table)
    return table


@dataclass(frozen=True)
class Zone:
    """A region of uniform ground: a shapely (multi)polygon in lon/lat [deg] and its ground."""

    name: str
    ground: Ground
    geometry: object  # shapely Polygon or MultiPolygon
    buildable: bool = True  # a site search may put a tower here
    fit: bool = False  # its conductivity is unknown: fitted to field-strength measurements
    #: (lo, hi) [mS/m]: the 5 %–95 % range of a log-normal conductivity (coverage/uncertainty.py)
    sigma_range: tuple[float, float] | None = None


@dataclass(frozen=True)
class Section:
    """A stretch of one ground along a radial, from ``start_km`` to ``end_km``."""

    start_km: float
    end_km: float
    ground: Ground


class SectionTable:
    """The ground sections of many paths in flat arrays: path k has the sections
    ``ptr[k] .. ptr[k + 1] - 1``, each from ``start_km`` to ``end_km`` on ``grounds[ground]``.

    Reads like a list of :class:`Section` lists (``table[k]``, ``len``, iteration), so callers
    that walk one path's sections are unchanged, while the batch kernels of
    :mod:`~.mixedpath` use the arrays directly.
    """

    __slots__ = ("ptr", "start_km", "end_km", "ground", "grounds")

    def __init__(self, ptr, start_km, end_km, ground, grounds):
        self.ptr = np.asarray(ptr, dtype=np.intp)
        self.start_km = np.asarray(start_km, dtype=float)
        self.end_km = np.asarray(end_km, dtype=float)
        self.ground = np.asarray(ground, dtype=np.intp)
        self.grounds = list(grounds)

    @classmethod
    def of(cls, paths) -> SectionTable:
        """A table from one list of :class:`Section` per path (a table is returned as is)."""
        if isinstance(paths, SectionTable):
            return paths
        grounds: dict = {}
        ptr, start, end, gnum = [0], [], [], []
        for secs in paths:
            for sc in secs:
                start.append(sc.start_km)
                end.append(sc.end_km)
                gnum.append(grounds.setdefault(id(sc.ground), (len(grounds), sc.ground))[0])
            ptr.append(len(start))
        return cls(ptr, start, end, gnum, [g for _, g in grounds.values()])

    def __len__(self):
        return self.ptr.size - 1

    def __getitem__(self, k):
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(len(self)))]
        n = len(self)
        if k < 0:
            k += n
        if not 0 <= k < n:
            raise IndexError(k)
        a, b = int(self.ptr[k]), int(self.ptr[k + 1])
        return [Section(float(self.start_km[i]), float(self.end_km[i]),
                        self.grounds[int(self.ground[i])]) for i in range(a, b)]

    def __iter__(self):
        return (self[k] for k in range(len(self)))

    def keys(self):
        """(number of distinct grounds, the distinct-ground number of each section, one
        Ground per number): grounds equal in what the physics depends on share a number."""
        seen: dict = {}
        per = np.array([seen.setdefault(g.key, (len(seen), g))[0] for g in self.grounds],
                       dtype=np.intp)
        return len(seen), per[self.ground], [g for _, g in seen.values()]

    def check(self):
        """Raise ValueError unless every path starts at 0 km and its sections are contiguous
        and of positive length (as :class:`Section` lists must be)."""
        counts = np.diff(self.ptr)
        if np.any(counts < 1):
            raise ValueError("a path needs at least one ground section")
        if np.any(self.start_km[self.ptr[:-1]] != 0.0):
            raise ValueError("the first section must start at the transmitter (0 km)")
        inner = np.ones(self.start_km.size, dtype=bool)
        inner[self.ptr[:-1]] = False  # each path's first section has no predecessor
        if np.any(np.abs(self.end_km[:-1][inner[1:]] - self.start_km[1:][inner[1:]]) > 1e-9) \
                or np.any(self.end_km[inner] <= self.start_km[inner]):
            raise ValueError("sections must be contiguous and of positive length")


class GroundMap:
    """Default ground plus conductivity zones; where zones overlap, the later one wins.

    Parameters
    ----------
    default : ground outside every zone
    zones : zones in priority order (later wins)
    source : file the zones came from (for messages)
    """

    def __init__(self, default: Ground, zones=(), source: str = "",
                 default_range: tuple[float, float] | None = None):
        self.default = default
        self.zones = tuple(zones)
        self.source = source
        #: (lo, hi) [mS/m] of the default ground's conductivity (5 %–95 %), or None: exact
        self.default_range = default_range
        # GEOS prepares geometries lazily inside queries; the GUI thread (readout, drawing) and a
        # worker thread share these zones, so every GEOS use of them holds this lock.
        self._lock = threading.RLock()
        self.overlaps = self._find_overlaps()

    def __getstate__(self):  # for process pools: the lock and the caches stay behind
        state = dict(self.__dict__)
        state.pop("_lock", None)
        state.pop("_xy_cache", None)
        state.pop("_dense", None)
        return state

    def __setstate__(self, state):
        state.setdefault("default_range", None)
        self.__dict__.update(state)
        self._lock = threading.RLock()

    @property
    def uncertain(self) -> bool:
        """Whether any ground has a conductivity range."""
        return self.default_range is not None or any(z.sigma_range for z in self.zones)

    def _find_overlaps(self) -> list[tuple[str, str]]:
        """Pairs (earlier, later) of zones whose areas overlap; the later one wins there."""
        out = []
        for i, a in enumerate(self.zones):
            for b in self.zones[i + 1 :]:
                if a.geometry.intersects(b.geometry) and a.geometry.intersection(b.geometry).area > 0:
                    out.append((a.name, b.name))
        return out

    @property
    def grounds(self) -> list[Ground]:
        """The default ground followed by each zone's ground."""
        return [self.default] + [z.ground for z in self.zones]

    def zone_index(self, lon, lat):
        """Index into :attr:`grounds` of the ground at each point (0 = default)."""
        import shapely

        lon = np.asarray(lon, dtype=float)
        lat = np.asarray(lat, dtype=float)
        idx = np.zeros(lon.shape, dtype=int)
        with self._lock:
            for i, z in enumerate(self.zones, 1):
                idx[shapely.contains_xy(z.geometry, lon, lat)] = i  # later zones overwrite
        return idx

    def ground_at(self, lon: float, lat: float) -> Ground:
        """Ground at one point."""
        return self.grounds[int(self.zone_index(np.array([lon]), np.array([lat]))[0])]

    def zones_xy(self, projection) -> list:
        """Zone geometries in a site's local projection [km] (edges densified to
        ``ZONE_EDGE_STEP_DEG`` first, so that straight lon/lat edges stay faithful after
        projection)."""
        import shapely

        key = (projection.lat, projection.lon)
        with self._lock:  # the GUI thread draws while a worker computes
            cache = self.__dict__.setdefault("_xy_cache", {})
            if key not in cache:
                if len(cache) >= ZONES_XY_CACHE:
                    cache.pop(next(iter(cache)))
                dense = self.__dict__.get("_dense")
                if dense is None:
                    dense = self._dense = np.array(
                        [shapely.segmentize(z.geometry, ZONE_EDGE_STEP_DEG) for z in self.zones],
                        dtype=object)
                # every zone's vertices in one projection call
                xy = list(projection.geom_to_xy(dense)) if dense.size else []
                # a zone near the antipode of the site folds over in this projection; such a
                # zone is far beyond any radial, and make_valid keeps GEOS queries well-defined
                cache[key] = [g if g.is_valid else shapely.make_valid(g) for g in xy]
            return cache[key]

    def radial_sections(self, lat, lon, bearings_deg, max_km: float):
        """Ordered ground sections along each radial from the site, to ``max_km``.

        Each radial is a straight line in the site's azimuthal-equidistant projection (where
        geodesics from the centre are straight with true length); its exact intersections with
        the projected zones give the boundaries. Later zones override earlier ones; adjacent
        sections of equal ground are merged.

        Returns
        -------
        :class:`SectionTable`: per bearing, a list of :class:`Section`
        """
        from .geodesy import local_projection

        check_finite("max_km", max_km, 0.0, 20_000.0, low_open=True)
        bearings = np.atleast_1d(np.asarray(bearings_deg, dtype=float))
        proj = local_projection(float(lat), float(lon))
        with self._lock:
            zones_xy = self.zones_xy(proj)
            rr, zz, aa, ee = _ray_interval_arrays(zones_xy, bearings, max_km)
        return _sections_from_intervals(bearings.size, rr, zz + 1, aa, ee, float(max_km),
                                        self.grounds)


def _sections_from_intervals(n: int, rr, zz, aa, ee, max_km: float, grounds) -> SectionTable:
    """Sections of ``n`` radials to ``max_km`` from the stretches (radial ``rr``, zone
    ``zz`` ≥ 1, ``aa`` .. ``ee``) inside the zones: the radial is cut at every stretch end,
    each piece takes the last zone (in priority order) covering its middle, or the default
    ground 0, and neighbouring pieces of equal ground are merged. Pieces of 1e-9 km or less are
    dropped, so a section may end up to 1e-9 km before the next one starts."""
    radial = np.concatenate([np.arange(n), np.arange(n), rr, rr])
    cut = np.concatenate([np.zeros(n), np.full(n, max_km), aa, ee])
    order = np.lexsort((cut, radial))
    radial, cut = radial[order], cut[order]
    piece = (radial[1:] == radial[:-1]) & (cut[1:] - cut[:-1] > 1e-9)
    r, a, e = radial[:-1][piece], cut[:-1][piece], cut[1:][piece]
    mid = 0.5 * (a + e)
    zone = np.zeros(r.size, dtype=np.intp)
    span = max_km + 1.0  # stretches of radial k lie in [k·span, k·span + max_km] on one axis
    q = r * span + mid
    for z in np.unique(zz):  # ascending: later zones win
        sel = zz == z
        lo = np.sort(rr[sel] * span + aa[sel])
        hi = np.sort(rr[sel] * span + ee[sel])
        # stretches of one zone on one radial are disjoint: the middle is inside one of them
        # when more of them start at or before it than end before it
        inside = np.searchsorted(lo, q, "right") - np.searchsorted(hi, q, "left") > 0
        zone[inside] = z
    keys: dict = {}
    kid = np.array([keys.setdefault(g.key, len(keys)) for g in grounds], dtype=np.intp)[zone]
    first = np.ones(r.size, dtype=bool)
    first[1:] = (r[1:] != r[:-1]) | (kid[1:] != kid[:-1])
    at = np.flatnonzero(first)
    last = np.append(at[1:] - 1, r.size - 1)  # the last piece of each merged section
    ptr = np.searchsorted(r[at], np.arange(n + 1))
    return SectionTable(ptr, a[at], e[last], zone[at], grounds)
