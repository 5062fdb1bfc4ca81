"""A transmitting station: site, frequency, powers and antenna."""

from __future__ import annotations

from dataclasses import dataclass

from .antenna import Array

__all__ = ["Station"]


@dataclass(frozen=True)
class Station:
    """A station: site [deg, WGS84], frequency [kHz], day and night powers [kW], antenna."""

    name: str
    lat: float
    lon: float
    freq_khz: float
    power_day_kw: float
    power_night_kw: float
    antenna: Array
    station_class: str = "B"  # a row of the class table: its protection and power range

    def klass(self, table: dict | None = None):
        """The station's :class:`~.classes.StationClass` from ``table`` (default: built-in)."""
        from .classes import STATION_CLASSES

        return (table or STATION_CLASSES)[self.station_class]
