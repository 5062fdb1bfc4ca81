"""What a change gains and loses: the contours of two runs of a station (a new site, power or
antenna) compared level by level.

For each level both runs have, the gained region is the new contour less the old one and the
lost region the old less the new (shapely differences of the lon/lat polygons); their areas are
geodesic (:func:`~.geodesy.geodesic_area_km2`) and their people come from the population layer
of the new study (else the old one's).
"""

from __future__ import annotations

import pathlib

import shapely

from .geodesy import geodesic_area_km2

__all__ = ["compare_results", "compare_geojson", "NO_COMMON_LEVEL"]

NO_COMMON_LEVEL = ("the two studies have no contour level in common; give both the same "
                   "[[contour]] levels")


def _people(layer, region):
    return None if layer is None else layer.count_in(region)


def compare_results(before, after) -> dict:
    """Gains and losses per level of two :class:`~.study.StudyResult` runs.

    Returns ``{"before", "after", "population_source", "levels": [...]}`` with one entry per
    level both have: ``level_mv_m``, ``label``, ``before_km2``, ``after_km2``, ``gain_km2``,
    ``loss_km2``, ``gain_population``, ``loss_population`` (None without a population layer)
    and the regions themselves under ``gain``/``loss`` (shapely, lon/lat).
    """
    layer = after.spec.population or before.spec.population
    old = {round(c.level_mv_m, 9): c for c in before.contours}
    rows = []
    for c in after.contours:
        b = old.get(round(c.level_mv_m, 9))
        if b is None:
            continue
        new_poly, old_poly = c.polygon_lonlat, b.polygon_lonlat
        gain = shapely.difference(new_poly, old_poly)
        loss = shapely.difference(old_poly, new_poly)
        rows.append({"level_mv_m": c.level_mv_m, "label": c.label,
                     "before_km2": b.area_km2, "after_km2": c.area_km2,
                     "gain_km2": geodesic_area_km2(gain), "loss_km2": geodesic_area_km2(loss),
                     "gain_population": _people(layer, gain),
                     "loss_population": _people(layer, loss),
                     "gain": gain, "loss": loss})
    if not rows:
        raise ValueError(NO_COMMON_LEVEL)
    return {"before": before.spec.path, "after": after.spec.path,
            "population_source": None if layer is None else pathlib.Path(layer.source).name,
            "levels": rows}


def compare_geojson(comparison: dict) -> dict:
    """The gained and lost regions as GeoJSON features (``level_mv_m``, ``change``)."""
    from .export import geojson_geometry

    feats = []
    for row in comparison["levels"]:
        for change in ("gain", "loss"):
            geom = row[change]
            if geom is None or geom.is_empty:
                continue
            feats.append({"type": "Feature",
                          "properties": {"level_mv_m": row["level_mv_m"], "label": row["label"],
                                         "change": change,
                                         "area_km2": round(row[f"{change}_km2"], 3),
                                         "population": (None if row[f"{change}_population"]
                                                        is None else
                                                        round(row[f"{change}_population"], 1))},
                          "geometry": geojson_geometry(geom)})
    return {"type": "FeatureCollection", "features": feats}
