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
           "RELATIVE_RF_CURVE", "RELATIVE_RF_SOURCE", "station_class", "relative_rf_db"]

_CLASS_SRC = ("levels: 47 CFR 73.182 (from memory: its paragraphs were not found in the stored "
              "texts); powers: 47 CFR 73.21(a)(1)–(3) (read), class C 73.21(c) (from memory)")

#: 47 CFR 73.21(a)(2)–(3) (read): a class B station below 0.25 kW needs an RMS field of at
#: least 141 mV/m at 1 km; a class D station at night stays below both
MIN_RMS_MV_M = 141.0


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
    #: the class's power range [kW] by day and by night (None: no range); ``power_max_top_kw``
    #: replaces the maximum in 1605–1705 kHz (73.21(a)(2), read)
    power_kw: tuple[float, float] | None = None
    night_power_kw: tuple[float, float] | None = None
    power_max_top_kw: float | None = None
    #: below the minimum power, an RMS field of at least this at 1 km also qualifies (class B);
    #: at night a class D station must stay below both the power and this field
    min_rms_mv_m: float | None = None

    def power_range_kw(self, period: str, freq_khz: float):
        """(lowest, highest) power [kW] the class allows in ``period``, or None."""
        rng = self.night_power_kw if period == "night" else self.power_kw
        if rng is None:
            return None
        lo, hi = rng
        if self.power_max_top_kw is not None and freq_khz >= 1605.0:
            hi = min(hi, self.power_max_top_kw)
        return lo, hi


STATION_CLASSES: dict[str, StationClass] = {c.name: c for c in (
    # 73.21(a)(1) (read): class A 10–50 kW
    StationClass("A", 0.1, "skywave50", 0.5, _CLASS_SRC, (10.0, 50.0), (10.0, 50.0)),
    # 73.21(a)(2) (read): class B 0.25–50 kW (10 kW in 1605–1705 kHz), or below 0.25 kW with
    # an RMS field of at least 141 mV/m at 1 km
    StationClass("B", 0.5, "nif", 2.5, _CLASS_SRC, (0.25, 50.0), (0.25, 50.0), 10.0,
                 MIN_RMS_MV_M),
    # 73.21(c) (from memory: not found in the stored text): class C 0.25–1 kW
    StationClass("C", 0.5, "nif", 4.0, _CLASS_SRC, (0.25, 1.0), (0.25, 1.0)),
    # 73.21(a)(3) (read): class D 0.25–50 kW by day; at night below 0.25 kW and below an RMS
    # field of 141 mV/m at 1 km (the night maximum is the lower of the two)
    StationClass("D", 0.5, "none", None, _CLASS_SRC, (0.25, 50.0), (0.0, 0.25), None,
                 MIN_RMS_MV_M),
)}


def station_class(name: str, table: dict | None = None, where: str = "") -> StationClass:
    """A class by name from ``table`` (default :data:`STATION_CLASSES`); the error lists them."""
    table = STATION_CLASSES if table is None else table
    try:
        return table[name]
    except KeyError:
        suffix = f" in {where}" if where else ""
        raise ValueError(f"class must be one of {', '.join(table)} (got {name!r}){suffix}") from None


_US = "47 CFR 73.37(a) table (read); first adjacent by day also 47 CFR 73.183(c) (read)"
_RJ81 = "Rio de Janeiro 1981 Region 2 plan (from memory; verify)"
#: ITU-R BS.560-4 §1 Note 2 (read): the Region 2 conference (Rio de Janeiro, 1981) used 26 dB
#: co-channel for both ground-wave and sky-wave services
_RJ81_CO = "Rio de Janeiro 1981 Region 2 plan, as reported in ITU-R BS.560-4 §1 Note 2 (read)"
_GE75 = "Geneva 1975 LF/MF plan, Regions 1 and 3 (from memory; verify)"

#: D/U ratios [dB] by plan: {(period, offset): (ratio, source)} and the plan's raster [kHz].
PROTECTION_PLANS: dict[str, dict] = {
    "us": {"raster_khz": 10.0, "ratios": {
        # 73.37(a): co-channel contour pairs 0.005 against 0.1 and 0.025 against 0.5 mV/m
        # (both 20:1, 26 dB); first adjacent 0.25 against 0.5 mV/m (2:1, 6 dB)
        ("day", 0): (26.0, f"co-channel 26 dB: {_US}"),
        ("day", 1): (6.0, f"first adjacent 6 dB: {_US}"),
        ("night", 0): (26.0, f"co-channel 26 dB: {_US} (night: 73.182, from memory)"),
        ("night", 1): (6.0, f"first adjacent 6 dB: {_US} (night: 73.182, from memory)"),
     },
     # 73.37(a) (read): on the first adjacent channel every class is protected to its 0.5 mV/m
     # contour (class A's 0.1 mV/m contour is protected co-channel only)
     "adjacent_day_mv_m": {1: (0.5, "47 CFR 73.37(a): first adjacent, 0.5 mV/m for all classes "
                                    "(read)")},
     # 47 CFR 73.183(d) (read): across ground of different conductivities the distance to a
     # contour is found by the equivalent-distance method
     "mixed_path": ("kirke", "equivalent distance, 47 CFR 73.183(d) (read)")},
    "region2": {"raster_khz": 10.0, "ratios": {
        ("day", 0): (26.0, f"co-channel 26 dB: {_RJ81_CO}"),
        ("day", 1): (0.0, f"first adjacent 0 dB: {_RJ81}"),
        ("night", 0): (26.0, f"co-channel 26 dB: {_RJ81_CO}"),
        ("night", 1): (0.0, f"first adjacent 0 dB: {_RJ81}"),
    }, "mixed_path": ("millington", "Millington, ITU-R P.368 Annex 2")},
    "regions-1-3": {"raster_khz": 9.0, "ratios": {
        ("day", 0): (30.0, f"co-channel 30 dB: {_GE75}"),
        ("day", 1): (0.0, f"first adjacent (9 kHz) 0 dB: {_GE75}"),
        ("night", 0): (30.0, f"co-channel 30 dB: {_GE75}"),
        ("night", 1): (0.0, f"first adjacent (9 kHz) 0 dB: {_GE75}"),
    }, "mixed_path": ("millington", "Millington, ITU-R P.368 Annex 2")},
}

#: Day contour-overlap rules for second and third adjacent channels: offset → (contour of the
#: proposal [mV/m], contour of the other station [mV/m], source). Overlap of the two is refused.
#: The field values are those of the 1937 North American agreement, Appendix III Table I (read):
#: 5 mV/m at 20 kc and 25 mV/m at 30 kc spacing; as contour pairs, 47 CFR 73.37(a) (read).
OVERLAP_RULES: dict[int, tuple[float, float, str]] = {
    2: (5.0, 5.0, "second adjacent: 5 mV/m against 5 mV/m, 47 CFR 73.37(a) (read); "
                  "1937 North American agreement App. III Table I (read)"),
    3: (25.0, 25.0, "third adjacent: 25 mV/m against 25 mV/m, 47 CFR 73.37(a) (read); "
                    "1937 North American agreement App. III Table I (read)"),
}


#: Relative RF protection ratio [dB] against the spacing of the two carriers [kHz]: the amount
#: by which the co-channel ratio falls when the unwanted carrier is that far from the wanted one
#: (double-sideband AM, about 4.5 kHz audio bandwidth). Straight lines in dB between the rows;
#: no value beyond the last row. A study may give its own rows ([protection] spacing_curve).
RELATIVE_RF_CURVE: tuple[tuple[float, float], ...] = (
    (0.0, 0.0), (1.0, -1.5), (2.0, -4.0), (3.0, -7.0), (4.0, -10.5), (5.0, -14.0),
    (6.0, -17.5), (7.0, -21.0), (8.0, -24.5), (9.0, -28.0), (10.0, -31.0), (11.0, -34.0),
    (12.0, -37.0), (13.0, -40.0), (14.0, -42.5), (15.0, -45.0), (16.0, -47.0), (18.0, -50.0),
    (20.0, -52.0),
)
RELATIVE_RF_SOURCE = ("relative RF protection-ratio curve, ITU-R BS.560-4 §2 Figure 1 (from "
                      "memory: the figure is a graph that was not found in the stored texts; "
                      "verify the values against it before filing)")


def relative_rf_db(spacing_khz: float, curve=RELATIVE_RF_CURVE) -> float | None:
    """The relative RF protection ratio [dB] at a carrier spacing [kHz] (either sign), by
    straight lines between the rows of ``curve``; None beyond its last row."""
    import numpy as np

    spacing = abs(float(spacing_khz))
    khz = [r[0] for r in curve]
    if spacing > khz[-1] + 1e-9:
        return None
    return float(np.interp(spacing, khz, [r[1] for r in curve]))
