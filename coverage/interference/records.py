"""Records of an interference study: neighbours, protection tables, night settings, check rows and
results.

The protection ratios by plan come from classes.PROTECTION_PLANS: 47 CFR 73.37(a) (read) for the
US plan; docs/methods.md §5.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..classes import OVERLAP_RULES, PROTECTION_PLANS, RELATIVE_RF_CURVE, RELATIVE_RF_SOURCE, relative_rf_db
from ..station import Station


ORDINALS = ("co_channel", "adjacent_1", "adjacent_2", "adjacent_3")


#: The default plan's ratios (47 CFR, the Americas' 10 kHz raster): see classes.PROTECTION_PLANS.
DEFAULT_RATIOS = dict(PROTECTION_PLANS["us"]["ratios"])


@dataclass(frozen=True)
class ProtectionTable:
    """Protection (D/U) ratios [dB] by period and channel offset (0 = co-channel … 3), and the
    relative RF protection-ratio curve for carriers off the raster.

    An offset on the raster without a ratio contributes nothing; the report says so. A carrier
    off the raster (:meth:`offset` gives a fraction of a channel) is protected with the
    co-channel ratio lowered by the curve at its spacing (:meth:`ratio_db`).
    """

    raster_khz: float = 10.0
    ratios: dict = field(default_factory=lambda: dict(DEFAULT_RATIOS))
    plan: str = "us"
    curve: tuple = RELATIVE_RF_CURVE  # ((spacing kHz, relative dB), …), from 0 kHz up
    curve_source: str = RELATIVE_RF_SOURCE

    def offset(self, freq_khz: float, other_khz: float):
        """The other carrier's offset in channels: an int on the raster (0, ±1, …), else a
        float (1391 against 1390 kHz on a 10 kHz raster: 0.1)."""
        off = channel_offset(freq_khz, other_khz, self.raster_khz)
        if off is not None and abs(other_khz - freq_khz - off * self.raster_khz) < 1e-6:
            return off
        return round((other_khz - freq_khz) / self.raster_khz, 6)

    def adjacent_day_mv_m(self, offset: int | None) -> float | None:
        """The plan's protected day contour for every class at this offset, if it sets one
        (the US plan: 0.5 mV/m on the first adjacent channel, 47 CFR 73.37(a))."""
        if offset is None or not isinstance(offset, int):
            return None
        row = PROTECTION_PLANS.get(self.plan, {}).get("adjacent_day_mv_m", {}).get(abs(offset))
        return None if row is None else row[0]

    def ratio_db(self, period: str, offset):
        """(ratio dB, source), or None when none is defined for that offset.

        On the raster (an int offset) the plan's row. Off it (a float offset), at a carrier
        spacing Δf = |offset| × raster, the plan's own ratios at the channels on either side
        hold and the relative RF protection-ratio curve
        (:data:`~mwreach.coverage.classes.RELATIVE_RF_CURVE`) gives the shape between them:
        ``R(Δf) = R_k + (A(Δf) − A_k) (R_k − R_k+1) / (A_k − A_k+1)``, with R the plan's ratios
        and A the curve at channels k and k + 1. Beyond the plan's last ratio (in the US plan the
        first adjacent channel) the ratio falls as the curve does from there,
        ``R_k + A(Δf) − A_k``; beyond the curve's last row there is none (None).
        """
        if offset is None:
            return None
        if isinstance(offset, (int, np.integer)):
            return self.ratios.get((period, abs(int(offset))))
        spacing = abs(float(offset)) * self.raster_khz
        rel = relative_rf_db(spacing, self.curve)
        k = int(np.floor(abs(float(offset))))
        here = self.ratios.get((period, 0))
        for i in range(1, k + 1):  # the plan's last ratio at or below this spacing
            nxt = self.ratios.get((period, i))
            if nxt is None:
                k = i - 1
                break
            here = nxt
        if here is None or rel is None:
            return None
        a_k = relative_rf_db(k * self.raster_khz, self.curve)
        nxt = self.ratios.get((period, k + 1))
        a_next = relative_rf_db((k + 1) * self.raster_khz, self.curve)
        if k + 1 == int(np.floor(abs(float(offset)))) + 1 and nxt is not None \
                and a_next is not None and a_k - a_next > 1e-9:
            value = here[0] + (rel - a_k) * (here[0] - nxt[0]) / (a_k - a_next)
            how = (f"between the plan's {here[0]:g} dB and {nxt[0]:g} dB at "
                   f"{k * self.raster_khz:g} and {(k + 1) * self.raster_khz:g} kHz")
        else:
            value = here[0] + rel - a_k
            how = f"falling from the plan's {here[0]:g} dB at {k * self.raster_khz:g} kHz"
        source = (f"{spacing:g} kHz carrier spacing, {how} as the {self.curve_source}")
        return (round(float(value), 3), source)

    def rows(self) -> list[dict]:
        """Table rows for reports: period, offset, ratio (None if undefined), source."""
        out = []
        for p in ("day", "night"):
            for i in range(4):
                r = self.ratios.get((p, i))
                if r is not None:
                    source = r[1]
                elif p == "day" and i in OVERLAP_RULES:
                    source = f"no ratio: day contour overlap instead — {OVERLAP_RULES[i][2]}"
                else:
                    source = "not defined: contributes nothing"
                out.append({"period": p, "offset_channels": i,
                            "ratio_db": None if r is None else r[0], "source": source})
        return out


@dataclass(frozen=True)
class NightSettings:
    """How night-time sky wave and the night limit are computed."""

    method: str = "cfr"  # "cfr" (47 CFR 73.190) or "itu" (ITU-R P.1147)
    percent: int = 10
    exclusion_percent: int = 50  # 50 or 25 (RSS exclusion rule) or 0 (plain RSS)
    layer_height_km: float = 100.0
    itu_region: int = 2
    solar: str = "elsewhere"
    sunspot: float = 0.0
    floor_mv_m: float = 0.5  # night limit when no interferer is stronger
    bearing_step_deg: float = 5.0

    KEYS = ("method", "percent", "exclusion_percent", "layer_height_km", "itu_region", "solar",
            "sunspot", "floor_mv_m", "bearing_step_deg")

    def to_table(self) -> dict:
        return {k: getattr(self, k) for k in self.KEYS}

    @property
    def itu_kwargs(self) -> dict:
        return {"region": self.itu_region, "solar": self.solar, "sunspot": self.sunspot}


@dataclass(frozen=True)
class Neighbour(Station):
    """A neighbouring station to protect and to be protected from."""

    protected_day_mv_m: float | None = None  # None: from the class (docs/methods.md §5)
    protected_night_mv_m: float | None = None  # None: from the class
    antenna_desc: dict = field(default_factory=dict, compare=False, repr=False)

    def day_level_mv_m(self, table: dict | None = None, offset: int = 0,
                       protection: ProtectionTable | None = None) -> float:
        """The protected day contour: as given, else the plan's level for this channel offset
        (47 CFR 73.37(a): 0.5 mV/m for every class on the first adjacent channel), else the
        class's."""
        if self.protected_day_mv_m is not None:
            return self.protected_day_mv_m
        if protection is not None:
            level = protection.adjacent_day_mv_m(offset)
            if level is not None:
                return level
        return self.klass(table).day_mv_m

    def night_level_mv_m(self, table: dict | None = None) -> float | None:
        """The fixed part of the protected night contour: as given, else the class's (None for
        a class without night protection)."""
        if self.protected_night_mv_m is not None:
            return self.protected_night_mv_m
        return self.klass(table).night_mv_m


def channel_offset(freq_khz: float, other_khz: float, raster_khz: float):
    """Channel offset (0, ±1, …) on the raster, or None when the spacing is off the raster."""
    n = (other_khz - freq_khz) / raster_khz
    k = int(round(n))
    return k if abs(n - k) * raster_khz <= 0.5 else None


# --- the analysis ----------------------------------------------------------------------------

@dataclass(frozen=True)
class InterferencePlan:
    """What the interference part of a study needs besides the station and the ground."""

    neighbours: tuple[Neighbour, ...]
    protection: ProtectionTable = field(default_factory=ProtectionTable)
    night: NightSettings = field(default_factory=NightSettings)
    protected_day_mv_m: float = 0.5  # the proposed station's own protected day contour
    contour_step_deg: float = 10.0  # spacing of points on protected contours
    neighbours_file: str = ""
    classes: dict = field(default_factory=dict)  # station classes (empty: STATION_CLASSES)

    KEYS = ("protected_day_mv_m", "contour_step_deg", "neighbours")


@dataclass(frozen=True)
class MarginRow:
    """One D/U check at one point."""

    kind: str  # "day received", "day caused", "night caused"
    neighbour: str
    offset_channels: int
    ratio_db: float
    bearing_deg: float  # from the station whose contour the point lies on
    lat: float
    lon: float
    wanted_dbu: float
    unwanted_dbu: float
    mechanism: str = "ground"  # what carries the unwanted field: "ground" or "sky" (wave)

    @property
    def margin_db(self) -> float:
        """D − U − protection ratio [dB]; ≥ 0 passes."""
        return self.wanted_dbu - self.unwanted_dbu - self.ratio_db

    @property
    def passed(self) -> bool:
        return self.margin_db >= 0.0


@dataclass(frozen=True)
class NightResult:
    """Night limit and night service contour of the proposed station."""

    power_kw: float
    bearings_deg: np.ndarray
    limit_dbu: np.ndarray  # usable field (night limit) per bearing
    contour_km: np.ndarray  # own ground wave at the limit (NaN: not reached)
    polygon_xy: object
    polygon_lonlat: object
    area_km2: float
    contributors: list  # per bearing: names of the interferers the RSS kept
    mechanisms: list = field(default_factory=list)  # per bearing: "sky"/"ground" of each kept

    @property
    def limit_mv_m(self) -> np.ndarray:
        return 10 ** (self.limit_dbu / 20) / 1e3


@dataclass(frozen=True)
class OverlapCheck:
    """Day contour overlap with a second- or third-adjacent neighbour."""

    neighbour: str
    offset_channels: int
    own_mv_m: float
    other_mv_m: float
    area_km2: float
    points: tuple  # (lat, lon) inside each overlapping part
    source: str

    @property
    def passed(self) -> bool:
        return self.area_km2 <= 0.0


@dataclass(frozen=True)
class InterferenceResult:
    rows: tuple[MarginRow, ...]
    night: NightResult | None
    max_power: dict
    notes: tuple[str, ...]
    protection: ProtectionTable
    settings: NightSettings
    skipped: tuple = ()  # checks left out because a path is outside the method's range
    protected_contours: dict = field(default_factory=dict)  # (name, period) → lon/lat polygon
    neighbour_limits: tuple = ()  # NeighbourLimit per class B/C neighbour with a night ratio
    overlaps: tuple = ()  # OverlapCheck per second/third-adjacent neighbour

    def worst(self, kind: str | None = None, neighbour: str | None = None):
        rows = [r for r in self.rows if (kind is None or r.kind == kind)
                and (neighbour is None or r.neighbour == neighbour)]
        return min(rows, key=lambda r: r.margin_db) if rows else None

    def neighbour_summary(self) -> list[dict]:
        """Worst margin per neighbour and check, then the night-limit entries and overlaps."""
        out = []
        for name in dict.fromkeys(r.neighbour for r in self.rows):
            for kind in ("day received", "day caused", "night caused"):
                w = self.worst(kind, name)
                if w is not None:
                    out.append({"neighbour": name, "kind": kind, "offset_channels": w.offset_channels,
                                "ratio_db": w.ratio_db, "worst_margin_db": w.margin_db,
                                "passed": w.passed, "lat": w.lat, "lon": w.lon,
                                "mechanism": w.mechanism if kind == "night caused" else "ground"})
        for lim in self.neighbour_limits:
            i = lim.deciding_point()
            out.append({"neighbour": lim.neighbour, "kind": "night limit entry",
                        "offset_channels": None, "ratio_db": None,
                        "worst_margin_db": lim.margin_db(), "passed": lim.excluded,
                        "lat": float(lim.lat[i]) if i is not None else None,
                        "lon": float(lim.lon[i]) if i is not None else None,
                        "mechanism": "RSS"})
        for ov in self.overlaps:
            lat, lon = ov.points[0] if ov.points else (None, None)
            out.append({"neighbour": ov.neighbour, "kind": "day overlap",
                        "offset_channels": ov.offset_channels, "ratio_db": None,
                        "worst_margin_db": None, "overlap_km2": ov.area_km2,
                        "passed": ov.passed, "lat": lat, "lon": lon, "mechanism": "ground"})
        return out
