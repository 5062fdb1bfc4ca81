"""The largest day and night powers the checks allow (caused fields scale with sqrt(P)), kept
inside the class's power range (47 CFR 73.21(a), read); docs/methods.md §5.
"""

from __future__ import annotations

import numpy as np

from .nightlimit import first_entry_db


def _max_powers(st, rows, limits, overlap_power, klass=None) -> dict:
    """The largest day and night powers every check allows, and what limits each; within the
    power range of the station's class (:func:`_class_range`)."""
    max_power = {}
    for period, kind, p0 in (("day", "day caused", st.power_day_kw),
                             ("night", "night caused", st.power_night_kw)):
        caused = [r for r in rows if r.kind == kind]
        if not caused:
            max_power[period] = None
            continue
        w = min(caused, key=lambda r: r.margin_db)
        # the caused field scales with sqrt(P): margin falls by 10·log10(P/P0)
        max_power[period] = {"max_power_kw": p0 * 10 ** (w.margin_db / 10.0),
                             "current_power_kw": p0, "limiting_neighbour": w.neighbour,
                             "limiting_lat": w.lat, "limiting_lon": w.lon,
                             "margin_db_now": w.margin_db, "mechanism": w.mechanism,
                             "check": kind}
    if overlap_power is not None:
        p_max, name, (lat, lon) = overlap_power
        cur = max_power.get("day")
        if cur is None or p_max < cur["max_power_kw"]:
            max_power["day"] = {"max_power_kw": p_max, "current_power_kw": st.power_day_kw,
                                "limiting_neighbour": name, "limiting_lat": lat,
                                "limiting_lon": lon,
                                "margin_db_now": (10 * np.log10(p_max / st.power_day_kw)
                                                  if p_max > 0 else -np.inf),
                                "mechanism": "ground", "check": "day overlap"}
            if p_max == 0.0:  # the site is inside the contour the overlap rule protects
                max_power["day"]["passes"] = False
    live = [lim for lim in limits if lim.proposal_dbu.size]
    if live and max_power.get("night") is not None:
        # the proposal must also stay out of each neighbour's RSS night limit: the power at
        # which it would first raise one of them (its fields scale with sqrt(P))
        p0 = st.power_night_kw
        scale, k = first_entry_db(live)
        p_entry = p0 * 10 ** (scale / 10.0)
        if p_entry < max_power["night"]["max_power_kw"]:
            lim = live[k]
            i = int(np.argmax(lim.proposal_dbu - lim.without_dbu))
            max_power["night"] = {
                "max_power_kw": p_entry, "current_power_kw": p0,
                "limiting_neighbour": lim.neighbour, "limiting_lat": float(lim.lat[i]),
                "limiting_lon": float(lim.lon[i]), "margin_db_now": float(scale),
                "mechanism": "RSS", "check": "night limit entry"}
    if klass is not None:
        _class_range(max_power, st, klass)
    return max_power


def _class_range(max_power: dict, st, klass) -> None:
    """Keep each period's maximum power inside the class's range (47 CFR 73.21, read): above
    the range the class is what limits; below it no power of the class passes (the power the
    neighbours allow is kept as ``neighbours_allow_kw``). A class B station may also go below
    0.25 kW if its RMS field is at least 141 mV/m at 1 km; a class D station at night must
    stay below both."""
    for period, p0 in (("day", st.power_day_kw), ("night", st.power_night_kw)):
        rng = klass.power_range_kw(period, st.freq_khz)
        if rng is None or p0 <= 0:
            continue
        lo, hi = rng
        if klass.min_rms_mv_m is not None:
            # the theoretical RMS of the period's towers: 73.150(b)(1)(i) ties the minimum
            # field of 73.189(b)(2) to the theoretical pattern's size (read)
            rms_1kw = float(st.facility(period).array.rms_mv_m(1.0))
            p_rms = (klass.min_rms_mv_m / rms_1kw) ** 2  # power giving that RMS field
            if period == "night" and lo == 0.0:
                hi = min(hi, p_rms)  # class D at night: below 0.25 kW and below 141 mV/m
            else:
                lo = min(lo, p_rms)  # class B: 0.25 kW, or less with 141 mV/m
        mp = max_power.get(period)
        allow = float("inf") if mp is None else mp["max_power_kw"]
        base = {"current_power_kw": p0, "limiting_lat": st.lat, "limiting_lon": st.lon,
                "mechanism": "", "class_range_kw": [lo, hi],
                "neighbours_allow_kw": None if mp is None else allow}
        if allow > hi:
            max_power[period] = base | {
                "max_power_kw": hi, "limiting_neighbour": f"class {klass.name} range",
                "margin_db_now": 10 * np.log10(hi / p0), "check": "class range"}
        elif allow < lo:
            max_power[period] = mp | {"max_power_kw": 0.0, "class_range_kw": [lo, hi],
                                      "neighbours_allow_kw": allow, "passes": False}
