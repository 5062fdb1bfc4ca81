"""Which channels are open here: the study moved to every channel of its plan's raster in a
range of the band, assessed like a full run at each.

For every channel the study's station (same site, powers and antennas, rebuilt at the channel:
tower heights given in metres take their electrical heights there) gets its neighbour checks
built afresh, since which neighbour is co-channel, adjacent or off the raster changes with the
channel (:class:`~.interference.NeighbourChecks`), and is assessed at its own site by the site
search's evaluation (:func:`~.search.evaluate_site`): the largest day and night powers every
neighbour allows with the limiting neighbour and check, the community share inside the service
contour at the largest day power, and the protected-contour area at the study's power.

Channels go in chunks to any ``concurrent.futures.Executor``, as the site search's candidates
do; every channel is computed independently, so the results do not depend on the workers.
"""

from __future__ import annotations

import dataclasses
import math
import os
import time
from concurrent.futures import Executor
from dataclasses import dataclass, field

from .inputs import retune
from .search import SearchSettings, evaluate_site

__all__ = ["ChannelRow", "ChannelSearch", "band_channels", "run_channels", "channels_csv",
           "channels_summary", "CSV_COLUMNS"]

#: The broadcasting band each plan's channels lie in [kHz]: Region 2 (the Americas) 525–1705
#: kHz, Regions 1 and 3 526.5–1606.5 kHz (ITU Radio Regulations Article 5, from memory).
PLAN_BAND_KHZ = {"us": (525.0, 1705.0), "region2": (525.0, 1705.0),
                 "regions-1-3": (526.5, 1606.5)}
CHUNK = 4  # channels per task


@dataclass(frozen=True)
class ChannelRow:
    """One channel's answers (powers [kW]; None: no neighbour limits it)."""

    freq_khz: float
    max_day_kw: float | None
    max_night_kw: float | None
    day_limited_by: str
    night_limited_by: str
    community_share: float | None  # inside the service contour at the largest day power
    protected_area_km2: float  # inside the protected day contour at the study's day power
    neighbours_checked: int  # neighbours with a ratio or an overlap rule on this channel
    study_channel: bool = False
    day_limit_kind: str = ""  # "co-channel", "first adjacent" …, "class range", "open"
    night_limit_kind: str = ""


OFFSET_KINDS = {0: "co-channel", 1: "first adjacent", 2: "second adjacent", 3: "third adjacent"}


def limit_kind(spec, freq_khz: float, power, by: str) -> str:
    """What limits a power: the limiting neighbour's place relative to the channel
    ("co-channel", "first adjacent" …, "off raster" for a carrier between channels), "class
    range" when only the class's range does, "open" when nothing does."""
    if power is None:
        return "open"
    name = by.rsplit(" (", 1)[0]
    plan = spec.interference
    for n in (plan.neighbours if plan is not None else ()):
        if n.name == name:
            off = plan.protection.offset(freq_khz, n.freq_khz)
            if isinstance(off, int):
                return OFFSET_KINDS.get(abs(off), f"{abs(off)} channels")
            return "off raster"
    return "class range"


@dataclass
class ChannelSearch:
    rows: list = field(default_factory=list)  # in frequency order
    from_khz: float = 0.0
    to_khz: float = 0.0
    raster_khz: float = 10.0
    plan: str = "us"
    service_mv_m: float = 5.0
    elapsed_s: float = 0.0
    workers: int = 1
    stopped_early: bool = False


def band_channels(spec, from_khz: float, to_khz: float) -> list[float]:
    """The channels [kHz] of the study's plan raster from ``from_khz`` to ``to_khz``, inside
    the plan's band; a ValueError naming the option and the valid range otherwise."""
    prot = spec.interference.protection if spec.interference is not None else None
    plan = prot.plan if prot is not None else "us"
    raster = prot.raster_khz if prot is not None else 10.0
    lo_band, hi_band = PLAN_BAND_KHZ.get(plan, (525.0, 1705.0))
    for name, v in (("--from", from_khz), ("--to", to_khz)):
        if not (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
                and lo_band <= v <= hi_band):
            raise ValueError(f"{name} must be a frequency in {lo_band:g}–{hi_band:g} kHz, the "
                             f"band of the {plan!r} protection plan (got {v!r})")
    if from_khz > to_khz:
        raise ValueError(f"--from ({from_khz:g} kHz) must not be above --to ({to_khz:g} kHz)")
    first, last = math.ceil(from_khz / raster - 1e-9), math.floor(to_khz / raster + 1e-9)
    out = [k * raster for k in range(first, last + 1)]
    if not out:
        raise ValueError(f"no channel of the {raster:g} kHz raster lies in {from_khz:g}–"
                         f"{to_khz:g} kHz")
    return out


def _applicable(checks) -> int:
    if checks is None:
        return 0
    names = {n.name for n, *_ in checks.day_ok} | {n.name for n, *_ in checks.night_ok}
    return len(names | {n.name for n, _ in checks.overlap_ok})


def evaluate_channel(spec, doc: dict, freq_khz: float, service_mv_m: float,
                     memo: dict | None = None) -> ChannelRow:
    """The study moved to ``freq_khz`` and assessed at its own site; ``memo`` keeps the
    neighbours' contours and night limits for the next channel of the same study."""
    from .interference import NeighbourChecks

    moved = retune(spec, doc, freq_khz)
    checks = (NeighbourChecks(moved, moved.interference, memo)
              if moved.interference is not None else None)
    st = moved.station
    c = evaluate_site(moved, SearchSettings(service_mv_m=service_mv_m), checks, 0, st.lat,
                      st.lon)
    return ChannelRow(float(freq_khz), c.max_day_kw, c.max_night_kw, c.day_limited_by,
                      c.night_limited_by, c.share_at_max_power, c.protected_area_km2,
                      _applicable(checks), abs(freq_khz - spec.station.freq_khz) < 1e-6,
                      limit_kind(spec, freq_khz, c.max_day_kw, c.day_limited_by),
                      limit_kind(spec, freq_khz, c.max_night_kw, c.night_limited_by))


_MEMO: dict = {}


def evaluate_channels(spec, doc: dict, freqs, service_mv_m: float,
                      token: str = "") -> list[ChannelRow]:
    """A chunk of channels in one task. The neighbour-side work is kept in this process for
    the next chunk of the same search (``token``): a neighbour meets up to seven channels."""
    if _MEMO.get("token") != token or not token:
        _MEMO.clear()
        _MEMO["token"], _MEMO["memo"] = token, {}
    return [evaluate_channel(spec, doc, f, service_mv_m, _MEMO["memo"]) for f in freqs]


def run_channels(spec, doc: dict, from_khz: float, to_khz: float, service_mv_m: float = 5.0,
                 executor: Executor | None = None, workers: int = 1,
                 progress=None) -> ChannelSearch:
    """Every channel from ``from_khz`` to ``to_khz`` (:func:`band_channels`), on ``executor``
    (None: in this process); ``progress(done, total, elapsed_s)`` as chunks come back. A
    KeyboardInterrupt keeps the channels done (``stopped_early``)."""
    t0 = time.perf_counter()
    freqs = band_channels(spec, from_khz, to_khz)
    prot = spec.interference.protection if spec.interference is not None else None
    out = ChannelSearch(from_khz=float(from_khz), to_khz=float(to_khz),
                        raster_khz=prot.raster_khz if prot else 10.0,
                        plan=prot.plan if prot else "us", service_mv_m=service_mv_m,
                        workers=workers)
    # contiguous blocks: neighbouring channels share their neighbours, whose work the memo
    # keeps; about two blocks per worker balance the load
    size = CHUNK if executor is None else max(CHUNK, math.ceil(len(freqs) / (2 * workers)))
    chunks = [freqs[k:k + size] for k in range(0, len(freqs), size)]
    token = f"{os.getpid()}-{id(spec)}-{t0}"
    rows: list[ChannelRow] = []
    try:
        if executor is None:
            for ch in chunks:
                rows += evaluate_channels(spec, doc, ch, service_mv_m, token)
                if progress:
                    progress(len(rows), len(freqs), time.perf_counter() - t0)
        else:
            futures = [executor.submit(evaluate_channels, spec, doc, ch, service_mv_m, token)
                       for ch in chunks]
            try:
                for fut in futures:
                    rows += fut.result()
                    if progress:
                        progress(len(rows), len(freqs), time.perf_counter() - t0)
            except KeyboardInterrupt:
                for fut in futures:
                    fut.cancel()
                raise
    except KeyboardInterrupt:
        out.stopped_early = True
    out.rows = sorted(rows, key=lambda r: r.freq_khz)
    out.elapsed_s = time.perf_counter() - t0
    return out


# --- outputs ----------------------------------------------------------------------------------

CSV_COLUMNS = ("freq_khz", "max_day_kw", "max_night_kw", "day_limited_by", "night_limited_by",
               "community_share", "protected_area_km2", "neighbours_checked", "day_limit_kind",
               "night_limit_kind", "study_channel")


def _cell(v, digits: int) -> str:
    if v is None:
        return ""
    return f"{v:.{digits}f}"


def channels_csv(search: ChannelSearch) -> str:
    """channels.csv: one row per channel in frequency order; an empty power cell means no
    neighbour limits it (the class range's maximum is not reached)."""
    import io

    from .safefiles import csv_writer

    buf = io.StringIO()
    w = csv_writer(buf)
    w.writerow(CSV_COLUMNS)
    for r in search.rows:
        w.writerow([f"{r.freq_khz:g}", _cell(r.max_day_kw, 4), _cell(r.max_night_kw, 5),
                    r.day_limited_by, r.night_limited_by, _cell(r.community_share, 4),
                    f"{r.protected_area_km2:.1f}", r.neighbours_checked, r.day_limit_kind, r.night_limit_kind,
                    "yes" if r.study_channel else ""])
    return buf.getvalue()


def channels_summary(search: ChannelSearch, spec) -> dict:
    """channels.json: the settings, every channel's row and the channels ranked by the largest
    day power (then night power, then community share)."""
    rows = [dataclasses.asdict(r) for r in search.rows]

    def key(r):
        day = r.max_day_kw if r.max_day_kw is not None else math.inf
        night = r.max_night_kw if r.max_night_kw is not None else math.inf
        return (-day, -night, -(r.community_share or 0.0), r.freq_khz)

    ranked = [r.freq_khz for r in sorted(search.rows, key=key)]
    return {
        "study": spec.title, "station": spec.station.name,
        "study_freq_khz": spec.station.freq_khz,
        "site": {"lat": spec.station.lat, "lon": spec.station.lon},
        "from_khz": search.from_khz, "to_khz": search.to_khz,
        "plan": search.plan, "raster_khz": search.raster_khz,
        "band_khz": list(PLAN_BAND_KHZ.get(search.plan, (525.0, 1705.0))),
        "mixed_path": spec.mixed_path,
        "service_mv_m": search.service_mv_m,
        "powers_kw": {"day": spec.station.power_day_kw, "night": spec.station.power_night_kw},
        "channels": rows,
        "ranked_by_max_day_power": ranked,
        "elapsed_s": round(search.elapsed_s, 2), "workers": search.workers,
        "stopped_early": search.stopped_early,
        "caution": ("Planning estimate only: a channel's availability must be confirmed by a "
                    "licensed engineer's study under the rules that apply, and by the "
                    "administration that assigns it."),
    }
