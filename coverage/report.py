"""Texts for people: powers, margins and fields as printed by the command line, the window, the
sheet and the CSV exports, and rule citations without their reading markers.
"""

from __future__ import annotations

import re

import numpy as np


def offset_text(offset) -> str:
    """A channel offset as printed: "0", "+1", "-2"; off the raster "+0.1" (of a channel)."""
    if offset is None:
        return ""
    if isinstance(offset, (int, np.integer)) or float(offset).is_integer():
        return f"{int(offset):+d}".replace("+0", "0")
    return f"{float(offset):+.2f}".rstrip("0")


def summary_cells(row: dict) -> dict:
    """Display texts of one :meth:`InterferenceResult.neighbour_summary` row, shared by the
    command line, the sheet and the window: offset, ratio, value, mechanism and result."""
    off = offset_text(row["offset_channels"])
    ratio = "" if row["ratio_db"] is None else f"{row['ratio_db']:g}"
    if row["kind"] == "day overlap":
        value = f"{row['overlap_km2']:.1f} km² overlap"
    elif row["kind"] == "night limit entry":
        value = (f"excluded, {margin_text(row['worst_margin_db'], 2)} dB to spare"
                 if row["passed"] else f"raises it {-row['worst_margin_db']:.2f} dB")
    else:
        value = f"{margin_text(row['worst_margin_db'])} dB"
    by = {"ground": "ground wave", "sky": "sky wave", "RSS": "RSS"}.get(row["mechanism"],
                                                                      row["mechanism"])
    where = "" if row["lat"] is None else f"{row['lat']:.3f}, {row['lon']:.3f}"
    return {"offset": off, "ratio": ratio, "value": value, "by": by,
            "result": "pass" if row["passed"] else "FAILS", "at": where}


#: Margins above this are printed as "> 60" where people read them (sheet, window, CSV, the
#: command's table): a far neighbour with no real path by day would otherwise show hundreds of
#: dB; JSON keeps the number. Common practice, no published source: no MF protection ratio
#: exceeds 40 dB (ITU-R BS.560-4 §1, read), so 60 dB is ample room.
SHOWN_MARGIN_MAX_DB = 60.0


#: Fields below this [dBµV/m] (0.1 µV/m, far under the atmospheric noise of the band) are
#: printed as "< −20" for the same reason.
SHOWN_FIELD_MIN_DBU = -20.0


def margin_text(margin_db: float, decimals: int = 1) -> str:
    """A margin [dB] for people: "> 60" above :data:`SHOWN_MARGIN_MAX_DB`."""
    if margin_db > SHOWN_MARGIN_MAX_DB:
        return f"> {SHOWN_MARGIN_MAX_DB:g}"
    return f"{margin_db:.{decimals}f}"


def field_text(dbu: float, decimals: int = 2) -> str:
    """A field [dBµV/m] for people: "< -20" below :data:`SHOWN_FIELD_MIN_DBU`."""
    if dbu < SHOWN_FIELD_MIN_DBU:
        return f"< {SHOWN_FIELD_MIN_DBU:g}"
    return f"{dbu:.{decimals}f}"


def mv_m_text(dbu: float) -> str:
    """The same field in mV/m, four significant digits and never in scientific notation;
    "< 0.0001" below :data:`SHOWN_FIELD_MIN_DBU`."""
    if dbu < SHOWN_FIELD_MIN_DBU:
        return f"< {10 ** (SHOWN_FIELD_MIN_DBU / 20) / 1e3:.4f}"
    return np.format_float_positional(10 ** (dbu / 20) / 1e3, precision=4, unique=False,
                                      fractional=False, trim="-")


def citation(source: str) -> tuple[str, bool]:
    """A source as printed on the sheet: the paragraph without the "(read)" and "(from
    memory…)" markers, and whether every part of it was read in the published text."""
    verified = "from memory" not in source
    text = re.sub(r"\s*\((?:read|from memory[^)]*)\)", "", source)
    text = re.sub(r"\s*\(([^()]*?),\s*from memory[^)]*\)", r"; \1", text)
    text = re.sub(r"^(?:co-channel|first adjacent|second adjacent|third adjacent)"
                  r"(?: \(9 kHz\))?(?: \d+ dB)?: ", "", text)
    return text.strip(), verified


def describe_max_power(period: str, mp: dict | None) -> str:
    """One line for reports: the maximum power and what limits it."""
    if mp is None:
        return f"Maximum {period} power: no neighbour with a {period} protection ratio limits it"
    where = f"{mp['limiting_neighbour']} at {mp['limiting_lat']:.4f}, {mp['limiting_lon']:.4f}"
    check = mp.get("check", "")
    by = f" ({check})" if check else ""
    rng = mp.get("class_range_kw")
    if mp.get("passes") is False:
        if check == "day overlap" and not mp.get("neighbours_allow_kw"):
            return (f"Maximum {period} power: no power passes: the site is inside the contour "
                    f"of {mp['limiting_neighbour']} that the overlap rule protects")
        return (f"Maximum {period} power: no power in the class range ({format_kw(rng[0])}–"
                f"{format_kw(rng[1])} kW) passes: the neighbours allow at most "
                f"{format_kw(mp['neighbours_allow_kw'])} kW, limited by {where}{by}")
    if check == "class range":
        allow = mp.get("neighbours_allow_kw")
        more = ("no neighbour limits it" if allow is None else
                f"the neighbours would allow {format_kw(allow)} kW")
        return (f"Maximum {period} power: {format_kw(mp['max_power_kw'])} kW (now "
                f"{format_kw(mp['current_power_kw'])} kW), the top of the "
                f"{mp['limiting_neighbour']} ({more})")
    if mp["max_power_kw"] > 100 * mp["current_power_kw"]:
        return (f"Maximum {period} power: more than 100 × the present "
                f"{format_kw(mp['current_power_kw'])} kW ({format_kw(mp['max_power_kw'])} kW by "
                f"the worst margin, {where}); other limits apply")
    return (f"Maximum {period} power: {format_kw(mp['max_power_kw'])} kW (now "
            f"{format_kw(mp['current_power_kw'])} kW), limited by {where}{by}")


def format_kw(kw: float) -> str:
    """A power for reports, never in scientific notation: 8850 → "8,850", 0.871 → "0.871"."""
    if kw >= 1000:
        return f"{kw:,.0f}"
    if kw >= 100:
        return f"{kw:.0f}"
    return f"{kw:.3g}" if kw >= 1e-3 else f"{kw:.6f}"


def describe_period(row: dict) -> str:
    """One line for an operating period (a row of :func:`~.station.period_rows`)."""
    towers = f"{row['towers']} tower{'s' if row['towers'] > 1 else ''}"
    own = "" if row["own_facility"] else " (the day antenna)"
    kind = "non-directional" if row["towers"] == 1 else f"{row['pattern']} pattern"
    text = f"{row['period']}: {kind}, {towers}{own}, {format_kw(row['power_kw'])} kW"
    if row["rms_mv_m"] is not None:
        text += f", RMS {row['rms_mv_m']:.1f} mV/m at 1 km"
        if row["pattern"] == "standard":
            text += f" (theoretical {row['theoretical_rms_mv_m']:.1f})"
    if row.get("q_mv_m") is not None:
        text += f", Q {row['q_mv_m']:.2f} mV/m ({row['q_term']} term)"
    n = len(row.get("augmentations") or ())
    if n:
        text += f", {n} augmentation{'s' if n > 1 else ''}"
    return text


def people_text(n: float | None) -> str:
    """A count of people for reports: whole people with thousands separators; None → "—"."""
    return "—" if n is None else f"{n:,.0f}"


def people_parts(population: dict, community_name: str = "community") -> list[str]:
    """The people in the community and inside the night interference-free contour, as texts
    (the parts a population summary of :func:`~.study.population_summary` has)."""
    parts = []
    if population["community"] is not None:
        parts.append(f"{community_name} {people_text(population['community'])}")
    if population["night_service"] is not None:
        parts.append("inside the night interference-free contour "
                     f"{people_text(population['night_service'])}")
    return parts
