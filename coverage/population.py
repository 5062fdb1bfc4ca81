"""People inside a region: a population layer of polygons (counted by area share) and points
(counted whole).

Notes
-----
A polygon cut by a contour counts the share of its area inside, as if its people lived at a
uniform density within it (common practice, no published source). A point counts whole when it
is inside. Shares are computed on the lon/lat plane: within one cell of a population grid the
scale of the plane is uniform to well below the precision of a census, so the share of a cell's
area is the share of its true area (the cells of tests/test_population.py are 0.02°; the error
of the share there is below 1e-5).

All counting is vectorised with shapely 2: an STRtree picks the polygons that meet the region,
``contains`` keeps the whole ones, and only the cut ones are intersected; points are tested with
``contains_xy`` after a bounding-box cut.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Population", "DEFAULT_PROPERTY"]

DEFAULT_PROPERTY = "population"


@dataclass(frozen=True)
class Population:
    """A population layer in lon/lat (WGS84).

    Parameters
    ----------
    polygons : shapely (Multi)Polygons, lon/lat
    polygon_people : people in each polygon, ≥ 0
    point_lon, point_lat : points [deg]
    point_people : people at each point, ≥ 0
    source : the file it came from (for messages and outputs)
    key : the property (or CSV column) the counts came from
    """

    polygons: np.ndarray
    polygon_people: np.ndarray
    point_lon: np.ndarray
    point_lat: np.ndarray
    point_people: np.ndarray
    source: str = ""
    key: str = DEFAULT_PROPERTY
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self):
        for name in ("polygons", "polygon_people", "point_lon", "point_lat", "point_people"):
            arr = np.asarray(getattr(self, name), dtype=object if name == "polygons" else float)
            object.__setattr__(self, name, arr)
        if self.polygons.size != self.polygon_people.size:
            raise ValueError("one count per polygon")
        if not (self.point_lon.size == self.point_lat.size == self.point_people.size):
            raise ValueError("one count per point")
        for name in ("polygon_people", "point_people"):
            v = getattr(self, name)
            if v.size and (not np.isfinite(v).all() or v.min() < 0):
                raise ValueError(f"{self.key} must be a finite number >= 0")

    @property
    def total(self) -> float:
        """Everyone in the layer."""
        return float(self.polygon_people.sum() + self.point_people.sum())

    @property
    def _tree(self):
        import shapely

        if "tree" not in self._cache:
            self._cache["tree"] = shapely.STRtree(self.polygons)
            self._cache["area"] = shapely.area(self.polygons)
        return self._cache["tree"]

    def count_in(self, region) -> float:
        """People inside ``region`` (a shapely (Multi)Polygon in lon/lat); 0 for None/empty."""
        import shapely

        if region is None or region.is_empty:
            return 0.0
        total = 0.0
        if self.polygons.size:
            tree = self._tree
            shapely.prepare(region)
            idx = tree.query(region, predicate="intersects")
            if idx.size:
                polys = self.polygons[idx]
                whole = shapely.contains(region, polys)
                total += float(self.polygon_people[idx[whole]].sum())
                cut = idx[~whole]
                if cut.size:
                    inside = shapely.area(shapely.intersection(self.polygons[cut], region))
                    share = np.clip(inside / self._cache["area"][cut], 0.0, 1.0)
                    total += float(np.sum(share * self.polygon_people[cut]))
        if self.point_people.size:
            x0, y0, x1, y1 = region.bounds
            box = ((self.point_lon >= x0) & (self.point_lon <= x1)
                   & (self.point_lat >= y0) & (self.point_lat <= y1))
            sel = np.flatnonzero(box)
            if sel.size:
                shapely.prepare(region)
                inside = shapely.contains_xy(region, self.point_lon[sel], self.point_lat[sel])
                total += float(self.point_people[sel[inside]].sum())
        return total
