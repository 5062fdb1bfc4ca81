"""A transmitting station: site, frequency, and the antenna and power of each operating period.

A station has a day facility (``antenna``, ``pattern``, ``augmentations``, ``power_day_kw``) and
may have its own night facility and its own facility for the critical hours (the two hours after
local sunrise and before local sunset, 47 CFR 73.187(a)). A period without its own facility uses
the day antenna; the night power is always its own (``power_night_kw``).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

from .antenna import Array
from .pattern import Augmentation, Facility

__all__ = ["Station", "PERIODS", "period_rows"]

PERIODS = ("day", "night", "critical")


@dataclass(frozen=True)
class Station:
    """A station: site [deg, WGS84], frequency [kHz], powers [kW] and antennas per period.

    ``pattern`` and ``augmentations`` belong to the day antenna; ``night`` and ``critical`` are
    the other periods' own facilities (None: the day antenna), ``power_critical_kw`` the
    critical-hours power (None: the day power).
    """

    name: str
    lat: float
    lon: float
    freq_khz: float
    power_day_kw: float
    power_night_kw: float
    antenna: Array
    station_class: str = "B"  # a row of the class table: its protection and power range
    pattern: str = ""  # day pattern kind: "standard" (2+ towers) or "theoretical"; "" = default
    augmentations: tuple[Augmentation, ...] = ()
    night: Facility | None = None
    critical: Facility | None = None
    power_critical_kw: float | None = None

    def __post_init__(self):
        for period in PERIODS:  # refuse a bad pattern (kind, augmentations) now, not mid-run
            if self.has_own(period) and self.power_kw(period) > 0:
                _ = self.radiator(period)

    def klass(self, table: dict | None = None):
        """The station's :class:`~.classes.StationClass` from ``table`` (default: built-in)."""
        from .classes import STATION_CLASSES

        return (table or STATION_CLASSES)[self.station_class]

    def facility(self, period: str = "day") -> Facility:
        """The antenna of ``period`` ("day", "night" or "critical"): its own, else the day's."""
        if period not in PERIODS:
            raise ValueError(f"period must be one of {', '.join(PERIODS)} (got {period!r})")
        own = None if period == "day" else getattr(self, period)
        return own or Facility(self.antenna, self.pattern, self.augmentations)

    def has_own(self, period: str) -> bool:
        """Whether ``period`` has a facility of its own (the day always has)."""
        return period == "day" or getattr(self, period) is not None

    def power_kw(self, period: str = "day") -> float:
        """The power of ``period`` [kW]."""
        if period == "night":
            return self.power_night_kw
        if period == "critical" and self.power_critical_kw is not None:
            return self.power_critical_kw
        return self.power_day_kw

    def radiator(self, period: str = "day"):
        """The pattern the rules use in ``period``. A period with its own facility has it built
        at its own power; a period without one uses the day pattern as filed (built at the day
        power), which callers scale to their power (fields ∝ √P). Built once per station (the
        night checks ask for it for every pair of stations)."""
        cache = self.__dict__.setdefault("_radiators", {})  # not a field: not compared
        hit = cache.get(period)
        if hit is None:
            own = period if self.has_own(period) else "day"
            power = self.power_kw(own)
            if not power > 0:  # a period without power (a daytime-only station at night):
                hit = self.facility(own).array  # its towers' shape; no field of it is used
            else:
                hit = self.facility(own).radiator(power)
            cache[period] = hit
        return hit

    def max_horizontal_mv_m(self, period: str = "night") -> float:
        """The strongest horizontal radiation of ``period`` at its power [mV/m at 1 km], 0
        without power (1° steps; cached)."""
        cache = self.__dict__.setdefault("_max_horizontal", {})
        hit = cache.get(period)
        if hit is None:
            power = self.power_kw(period)
            hit = cache[period] = (_max_horizontal(self.radiator(period), float(power))
                                   if power > 0 else 0.0)
        return hit

    @property
    def day_antenna(self):
        """The day radiator (standard pattern of a directional array, else the towers)."""
        return self.radiator("day")

    @property
    def night_antenna(self):
        """The night radiator (the night facility, else the day antenna, at night power)."""
        return self.radiator("night")


@functools.lru_cache(maxsize=4096)
def _max_horizontal(radiator, power_kw: float) -> float:
    """Strongest horizontal radiation [mV/m at 1 km], shared by equal radiators."""
    return float(radiator.horizontal_summary(power_kw, step_deg=1.0)["max_mv_m"])


def period_rows(station: Station) -> list[dict]:
    """One row per operating period the station has: its pattern kind, towers, power, RMS
    fields [mV/m at 1 km] and, for a standard pattern, Q at the horizon and the augmentations
    with their A. The critical hours appear only when the study gives them a facility or a
    power of their own."""
    rows = []
    for period in PERIODS:
        if (period == "critical" and station.critical is None
                and station.power_critical_kw is None):
            continue
        power = station.power_kw(period)
        fac = station.facility(period)
        rad = station.radiator(period)
        row = {"period": period, "own_facility": station.has_own(period), "pattern": fac.kind,
               "towers": len(fac.array.elements), "power_kw": power,
               "theoretical_rms_mv_m": None, "rms_mv_m": None}
        if power > 0:
            row["theoretical_rms_mv_m"] = float(fac.array.rms_mv_m(power))
            row["rms_mv_m"] = float(rad.rms_mv_m(power))
        if rad.kind == "standard":
            row |= {"q_mv_m": float(rad.q_mv_m(0.0)), "q_term": rad.q_branch(),
                    "built_at_kw": rad.power_kw,
                    "augmentations": [{"azimuth_deg": a.azimuth_deg, "span_deg": a.span_deg,
                                       "field_mv_m": a.field_mv_m, "a_mv_m_sq": v}
                                      for a, v in zip(rad.augmentations, rad.a_values)]}
        rows.append(row)
    return rows
