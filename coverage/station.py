"""A transmitting station: site, frequency, and the antenna and power of each operating period.

A station has a day facility (``antenna``, ``pattern``, ``augmentations``, ``power_day_kw``) and
may have its own night facility and its own facility for the critical hours (the two hours after
local sunrise and before local sunset, 47 CFR 73.187(a)). A period without its own facility uses
the day antenna; the night power is always its own (``power_night_kw``).
"""

from __future__ import annotations

from dataclasses import dataclass

from .antenna import Array
from .pattern import Augmentation, Facility

__all__ = ["Station", "PERIODS"]

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
        _ = self.facility("day")  # refuse a bad day pattern (kind, augmentations) now

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
        """The pattern the rules use in ``period``, built at that period's power."""
        power = self.power_kw(period)
        # a period without power (a daytime-only station at night) still has a pattern shape
        return self.facility(period).radiator(power if power > 0 else 1.0)

    @property
    def day_antenna(self):
        """The day radiator (standard pattern of a directional array, else the towers)."""
        return self.radiator("day")

    @property
    def night_antenna(self):
        """The night radiator (the night facility, else the day antenna, at night power)."""
        return self.radiator("night")
