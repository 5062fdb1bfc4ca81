"""The :class:`Study` that runs a whole job from a validated :class:`~.spec.StudySpec`.

The CLI, the desktop application and the PDF sheet all read studies with
:func:`mwreach.coverage.inputs.load_study` and run them with :meth:`Study.run`; nothing else
computes coverage.
"""

from __future__ import annotations

import datetime as _dt
import pathlib
import time
from dataclasses import dataclass

import numpy as np

from .contours import (
    distance_grid,
    LevelContour,
    RadialFields,
    level_contour,
    radial_fields,
    radial_length_km,
)
from .geodesy import local_projection
from .interference import InterferenceResult, run_interference
from .spec import StudySpec

__all__ = ["StudyResult", "Study"]



# --- running -------------------------------------------------------------------------------

def population_summary(spec: StudySpec, contours, inter=None) -> dict | None:
    """People inside each contour, the community and the night interference-free contour, from
    the study's population layer (None without one)."""
    pop = spec.population
    if pop is None:
        return None
    night = None
    if inter is not None and inter.night is not None:
        night = pop.count_in(inter.night.polygon_lonlat)
    return {
        # the file as the study names it (relative to the study), never a machine's path
        "source": (spec.population_table or {}).get("file", pathlib.Path(pop.source).name),
        "property": pop.key, "total": pop.total,
        "levels": [pop.count_in(c.polygon_lonlat) for c in contours],
        "community": (pop.count_in(spec.community.geometry) if spec.community is not None
                      else None),
        "night_service": night,
    }


@dataclass(frozen=True)
class StudyResult:
    """Everything a run produced, for the writers, the GUI and the sheet."""

    spec: StudySpec
    radials: RadialFields
    contours: tuple[LevelContour, ...]
    antenna_summary: dict
    max_km: float
    elapsed_s: float
    created: str
    interference: InterferenceResult | None = None
    population: dict | None = None  # people per level and more (:func:`population_summary`)
    bands: tuple | None = None  # LevelBand per level when grounds have ranges (uncertainty.py)

    def level_rows(self) -> list[dict]:
        """One summary row per level (distance statistics over all computed bearings)."""
        rows = []
        for c in self.contours:
            finite = c.first_km[np.isfinite(c.first_km)]
            rows.append({
                "level_mv_m": c.level_mv_m,
                "label": c.label,
                "min_km": float(finite.min()) if finite.size else None,
                "max_km": float(finite.max()) if finite.size else None,
                "mean_km": float(finite.mean()) if finite.size else None,
                "area_km2": c.area_km2,
                "community_share": c.community_share,
                "population": (None if self.population is None
                               else self.population["levels"][len(rows)]),
                "radials_beyond_range": int(np.isinf(c.first_km).sum()),
                "radials_not_reached": int(np.isnan(c.first_km).sum()),
                "radials_with_further_crossings": int(c.multiple.sum()),
            })
        for row, band in zip(rows, self.bands or ()):  # the ground draws' 5/50/95 % contours
            for b in ("p05", "p50", "p95"):
                row[f"area_km2_{b}"] = band.area_km2[b]
            if band.share_goal is not None:
                row["community_goal"] = band.share_goal
                row["community_goal_probability"] = band.share_goal_probability
        return rows


#: field points of one run (bearings × distances) above which a study is refused: each value
#: in the range of step_km, max_km and bearing_step_deg is sensible alone, but together they
#: can ask for more memory than a desktop has (0.01 km to 2000 km on 361 bearings is 72 million
#: points, about 1.4 GiB in the arrays of one pass); 20 million is about 35 times the demo
MAX_GRID_POINTS = 20_000_000


def check_grid_size(n_bearings: int, n_distances: int, spec) -> None:
    """Refuse a run whose bearings × distances exceed :data:`MAX_GRID_POINTS`, naming the keys."""
    n = n_bearings * n_distances
    if n > MAX_GRID_POINTS:
        raise ValueError(
            f"{n_bearings} bearings × {n_distances} distances = {n:.3g} field points, more "
            f"than {MAX_GRID_POINTS:.3g}: use a larger step_km or bearing_step_deg, or a "
            f"smaller max_km, in [study] of {spec.path}")


class Study:
    """Runs a whole daytime coverage job from a :class:`StudySpec`.

    Parameters
    ----------
    spec : the validated study
    """

    def __init__(self, spec: StudySpec):
        self.spec = spec

    @classmethod
    def from_file(cls, path) -> Study:
        from .inputs import load_study

        return cls(load_study(path))

    def auto_max_km(self, e1km_max_mv_m: float) -> float:
        """Radial length: where the lowest level falls on the best ground with the strongest
        radiation, plus 20 %, within 20 .. 2000 km."""
        spec = self.spec
        if spec.max_km:
            return spec.max_km
        lowest = min(lv.field_mv_m for lv in spec.levels)
        return radial_length_km(spec.station.freq_khz, spec.ground, lowest, e1km_max_mv_m,
                                spec.earth_k, min_km=20.0)

    def run(self, bearings=None, power_kw: float | None = None, progress=None,
            interference: bool = True, bands: bool | None = None) -> StudyResult:
        """Compute radial fields, contour distances and polygons.

        Parameters
        ----------
        bearings : bearings [deg true] (default: the study's)
        power_kw : antenna input power (default: the day power)
        progress : optional callable(done, total) called per bearing
        interference : also run the night and interference work when the study has neighbours
            or night settings
        bands : the 5 %/50 %/95 % contours over the grounds' conductivity ranges (default: in
            a run on the study's own bearings, when a ground has a range)
        """
        t0 = time.perf_counter()
        spec = self.spec
        st = spec.station
        power = st.power_day_kw if power_kw is None else power_kw
        b = spec.bearings if bearings is None else np.asarray(bearings, dtype=float)
        e1 = st.day_antenna.field_mv_m(b, 0.0, power)
        summary = st.day_antenna.horizontal_summary(power)
        max_km = self.auto_max_km(summary["max_mv_m"])
        if bands is None:
            bands = bearings is None
        bands = bool(bands and spec.uncertainty is not None and spec.ground.uncertain)
        if bands and not spec.max_km:  # long enough for the draws of the best grounds
            from .uncertainty import top_grounds

            lowest = min(lv.field_mv_m for lv in spec.levels)
            max_km = max(max_km, radial_length_km(st.freq_khz, top_grounds(spec), lowest,
                                                  summary["max_mv_m"], spec.earth_k,
                                                  min_km=20.0))
        check_grid_size(b.size, distance_grid(st.freq_khz, max_km, spec.step_km).size, spec)
        radials = radial_fields(st.freq_khz, spec.ground, st.lat, st.lon, b, e1, max_km,
                                spec.step_km, spec.mixed_path, spec.earth_k, progress)
        proj = local_projection(st.lat, st.lon)
        community = spec.community.geometry if spec.community else None
        contours = tuple(
            level_contour(radials, lv.field_mv_m, lv.text, proj, community) for lv in spec.levels
        )
        level_bands = None
        if bands:
            from .uncertainty import ground_bands

            level_bands = tuple(ground_bands(
                spec, radials, [lv.field_mv_m for lv in spec.levels], max_km, spec.uncertainty,
                proj.geom_to_xy(community) if community is not None else None,
                {lv.field_mv_m: lv.community_goal for lv in spec.levels}))
        inter = None
        if interference and spec.interference is not None:
            inter = run_interference(spec, spec.interference)
        people = population_summary(spec, contours, inter)
        return StudyResult(
            spec=spec,
            radials=radials,
            contours=contours,
            antenna_summary=summary | {"power_kw": power},
            max_km=max_km,
            elapsed_s=time.perf_counter() - t0,
            created=_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
            interference=inter,
            population=people,
            bands=level_bands,
        )
