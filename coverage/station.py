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
