"""The validated study: its contour levels, community and everything a run needs
(:class:`StudySpec`), nothing computed.

The reader (:mod:`.inputs`) builds these records and the runner (:mod:`.study`) runs them; this
module sits below both, so that neither imports the other's records.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

from .geodesy import check_site
from .ground import GroundMap
from .interference import InterferencePlan
from .station import Station

__all__ = ["Level", "Community", "StudySpec"]


@dataclass(frozen=True)
class Level:
    """A contour level [mV/m] and its label."""

    field_mv_m: float
    label: str = ""
    community_goal: float | None = None  # share of the community this level should cover

    @property
    def text(self) -> str:
        return self.label or f"{self.field_mv_m:g} mV/m"


@dataclass(frozen=True)
class Community:
    """A community boundary (shapely geometry in lon/lat) with its name and file."""

    name: str
    geometry: object
    path: str = ""


@dataclass(frozen=True)
class StudySpec:
    """A validated study: everything a run needs, nothing computed."""

    title: str
    station: Station
    ground: GroundMap
    levels: tuple[Level, ...]
    mixed_path: str = "millington"
    earth_k: float = 4.0 / 3.0
    bearing_step_deg: float = 1.0
    extra_bearings: tuple[float, ...] = ()
    max_km: float = 0.0  # 0: automatic
    step_km: float = 0.25
    community: Community | None = None
    population: object = None  # a Population layer (coverage/population.py), or None
    population_table: dict | None = None  # [population] as written, for saving
    output: dict = field(default_factory=dict)
    path: str = ""  # study file, for messages and relative paths
    zones_path: str = ""  # as written in the file (relative to it)
    ground_class: str = ""  # default ground class name, if given by name
    interference: InterferencePlan | None = None
    neighbour_tables: tuple = ()  # [[neighbour]] tables as written, for saving
    input_notes: tuple[str, ...] = ()  # repairs made while reading (self-intersections …)
    input_files: tuple[str, ...] = ()  # every file the study reads (resolved paths)
    uncertainty: object = None  # UncertaintySettings when grounds have ranges (bands drawn)
    exposure: dict | None = None  # [exposure]: {"standard": [names], "height_m": m}

    @property
    def bearings(self) -> np.ndarray:
        """Regular bearings [deg true] plus the extra ones, sorted and unique."""
        regular = np.arange(0.0, 360.0 - 1e-9, self.bearing_step_deg)
        return np.unique(np.round(np.concatenate([regular, self.extra_bearings]), 6) % 360.0)

    def with_site(self, lat: float, lon: float) -> StudySpec:
        """The same study with the transmitter moved."""
        lat, lon = check_site(lat, lon)
        return dataclasses.replace(self, station=dataclasses.replace(self.station, lat=lat, lon=lon))
