"""Station classes and protection-ratio plans: tables of data, each row with its source.

A class says what a station is protected to: its protected day ground-wave contour, and at night
either nothing, its 50 % sky-wave service contour, or the higher of a fixed ground-wave contour
and its night interference-free (NIF) contour. A region's own plan may define other classes;
they are rows of the same table (``[[station_class]]`` in a study file adds or replaces rows).

Protection-ratio plans give the D/U ratio by period and channel offset for one raster; a study
picks one (``[protection] plan``) and may override single rows.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["StationClass", "STATION_CLASSES", "PROTECTION_PLANS", "OVERLAP_RULES",
           "station_class"]

_CLASS_SRC = "47 CFR 73.21 and 73.182 (from memory; verify against the published text)"


@dataclass(frozen=True)
class StationClass:
    """What a station of this class is protected to.

    night : ``"none"`` (no night protection), ``"skywave50"`` (its 50 % sky-wave contour at
        ``night_mv_m``) or ``"nif"`` (its night ground-wave contour at the higher of
        ``night_mv_m`` and its night interference-free limit)
    """

    name: str
    day_mv_m: float
    night: str
    night_mv_m: float | None
    source: str


STATION_CLASSES: dict[str, StationClass] = {c.name: c for c in (
    StationClass("A", 0.1, "skywave50", 0.5, _CLASS_SRC),
    StationClass("B", 0.5, "nif", 2.5, _CLASS_SRC),
    StationClass("C", 0.5, "nif", 4.0, _CLASS_SRC),
    StationClass("D", 0.5, "none", None, _CLASS_SRC),
)}


def station_class(name: str, table: dict | None = None, where: str = "") -> StationClass:
    """A class by name from ``table`` (default :data:`STATION_CLASSES`); the error lists them."""
    table = STATION_CLASSES if table is None else table
    try:
        return table[name]
    except KeyError:
        suffix = f" in {where}" if where else ""
        raise ValueError(f"class must be one of {', '.join(table)} (got {name!r}){suffix}") from None


_US = "47 CFR 73.37 / 73.182 (from memory); first adjacent by day also 47 CFR 73.183(c) (read)"
_RJ81 = "Rio de Janeiro 1981 Region 2 plan (from memory; verify)"
_GE75 = "Geneva 1975 LF/MF plan, Regions 1 and 3 (from memory; verify)"

#: D/U ratios [dB] by plan: {(period, offset): (ratio, source)} and the plan's raster [kHz].
PROTECTION_PLANS: dict[str, dict] = {
    "us": {"raster_khz": 10.0, "ratios": {
        ("day", 0): (26.0, f"co-channel 26 dB: {_US}"),
        ("day", 1): (6.0, f"first adjacent 6 dB: {_US}"),
        ("night", 0): (26.0, f"co-channel 26 dB: {_US}"),
        ("night", 1): (6.0, f"first adjacent 6 dB: {_US}"),
    }},
    "region2": {"raster_khz": 10.0, "ratios": {
        ("day", 0): (26.0, f"co-channel 26 dB: {_RJ81}"),
        ("day", 1): (0.0, f"first adjacent 0 dB: {_RJ81}"),
        ("night", 0): (26.0, f"co-channel 26 dB: {_RJ81}"),
        ("night", 1): (0.0, f"first adjacent 0 dB: {_RJ81}"),
    }},
    "regions-1-3": {"raster_khz": 9.0, "ratios": {
        ("day", 0): (30.0, f"co-channel 30 dB: {_GE75}"),
        ("day", 1): (0.0, f"first adjacent (9 kHz) 0 dB: {_GE75}"),
        ("night", 0): (30.0, f"co-channel 30 dB: {_GE75}"),
        ("night", 1): (0.0, f"first adjacent (9 kHz) 0 dB: {_GE75}"),
    }},
}

#: Day contour-overlap rules for second and third adjacent channels: offset → (contour of the
#: proposal [mV/m], contour of the other station [mV/m], source). Overlap of the two is refused.
#: The field values are those of the 1937 North American agreement, Appendix III Table I (read):
#: 5 mV/m at 20 kc and 25 mV/m at 30 kc spacing; as contour pairs, 47 CFR 73.37 (from memory).
OVERLAP_RULES: dict[int, tuple[float, float, str]] = {
    2: (5.0, 5.0, "second adjacent: 5 mV/m against 5 mV/m, 47 CFR 73.37 (from memory); "
                  "1937 North American agreement App. III Table I (read)"),
    3: (25.0, 25.0, "third adjacent: 25 mV/m against 25 mV/m, 47 CFR 73.37 (from memory); "
                    "1937 North American agreement App. III Table I (read)"),
}
