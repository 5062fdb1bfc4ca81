"""Where to put the station: the study evaluated at every candidate site of an area.

Candidates are a regular grid in the study site's azimuthal-equidistant plane, inside a search
area (a radius or a GeoJSON polygon), on buildable ground (zones marked ``buildable = false``
and sea-like ground, σ ≥ 1 S/m, are left out) and outside an optional exclusion GeoJSON.

Each candidate gets the study's frequency, antenna and powers moved there and is assessed with
the same code as a full run (:class:`~.interference.NeighbourChecks`, built once per worker):
maximum day and night powers every neighbour's protection allows, with the limiting neighbour
and check; the community share inside the service contour at the study's power and at the
maximum day power; the protected-contour area; the distance to the community; and a score.

Work is sent in chunks of candidates to any ``concurrent.futures.Executor``: a local process
pool by default, or a Dask distributed cluster's executor (``client.get_executor()``) — one
code path. Every candidate is computed independently and deterministically, so the results do
not depend on the number of workers.
"""

from __future__ import annotations

import contextlib
import dataclasses
import math
import os
import time
from concurrent.futures import FIRST_COMPLETED, Executor, wait
from dataclasses import dataclass, field

import numpy as np
import shapely

from .contours import (arc_step_deg, distance_grid, first_distance_km, polar_area_km2,
                       polar_shares, radial_fields, radial_length_km, share_window,
                       window_shares)
from .geodesy import inverse, local_projection
from .groundwave import mv_m_to_dbu

__all__ = ["SearchSettings", "Candidate", "SearchResult", "candidate_sites", "evaluate_chunk",
           "run_search", "SCORES", "SEA_LIKE_MS_M"]

SCORES = ("community_share", "area", "max_power")
#: Ground at or above this conductivity is sea water and not a place for a tower [mS/m]
#: (ITU-R P.368 sea classes: 1 and 5 S/m; fresh water 3 mS/m must be marked by the user).
SEA_LIKE_MS_M = 1000.0
#: Bearing step of a candidate's radials for its protected contour's area [deg]. Against full
#: runs (1° radials, 0.25 km steps), on 49 demo candidates: 5° left areas up to 1.9 % short,
#: 3° within 0.9 %, 2.5° with the distance grid below within 0.7 %.
SEARCH_BEARING_STEP_DEG = 2.5
#: Points of those radials from one wavelength to 10 km (geometric).
SEARCH_NEAR_POINTS = 25
#: Their distance step beyond 10 km: this many km, or ``SEARCH_FAR_RATIO`` of the distance
#: where that is longer (the study's own step where that is coarser still). The area comes
#: from the filled marching squares, linear in dB between grid points, so a step that crosses
#: a zone boundary misplaces the contour: 4 km and 12 % left one demo candidate's area 1.4 %
#: short; 2 km and 6 % (78 points to 370 km) keep all 49 within 0.7 %, and 1 km and 4 %
#: (109 points, a fifth more time for the area) only gain 0.1 %.
SEARCH_FAR_STEP_KM = 2.0
SEARCH_FAR_RATIO = 0.06
CHUNK = 24  # candidates per task


@dataclass(frozen=True)
class SearchSettings:
    """What to search and how to rank it."""

    step_km: float = 2.0
    radius_km: float | None = None  # search within this distance of the study site …
    area_lonlat: object = None  # … or inside this polygon (lon/lat)
    exclusion_lonlat: object = None  # never here (airports, protected land …)
    score: str = "community_share"
    service_mv_m: float = 5.0  # the service contour whose community share counts


@dataclass(frozen=True)
class Candidate:
    """One evaluated site."""

    index: int
    lat: float
    lon: float
    max_day_kw: float | None
    day_limited_by: str
    max_night_kw: float | None
    night_limited_by: str
    share_at_study_power: float | None
    share_at_max_power: float | None
    protected_area_km2: float
    community_km: float | None
    score: float

    def row(self) -> dict:
        return dataclasses.asdict(self)


@dataclass
class SearchResult:
    settings: SearchSettings
    candidates: list = field(default_factory=list)  # ranked, best first
    total: int = 0  # candidates in the area
    elapsed_s: float = 0.0
    stopped_early: bool = False
    stop_reason: str = ""  # why it stopped early: "interrupted", or the lost executor's message
    workers: int = 1


MAX_CANDIDATES = 200_000


def candidate_sites(spec, settings: SearchSettings):
    """(lat, lon) of the candidates: a grid every ``step_km`` in the study site's plane, inside
    the area, on buildable ground, outside the exclusion. Order: row by row from the south-west."""
    import shapely

    proj = local_projection(spec.station.lat, spec.station.lon)
    if settings.area_lonlat is not None:
        area_xy = proj.geom_to_xy(settings.area_lonlat)
        x0, y0, x1, y1 = area_xy.bounds
    else:
        r = float(settings.radius_km)
        area_xy = shapely.Point(0.0, 0.0).buffer(r, 256)
        x0, y0, x1, y1 = -r, -r, r, r
    s = settings.step_km
    # counted from the area and the step before any grid is built: a 2000 km radius every
    # 50 m would otherwise ask for tens of GiB before the limit could say no
    about = area_xy.area / (s * s)
    cells = (math.floor(x1 / s) - math.floor(x0 / s) + 1) * (math.floor(y1 / s)
                                                             - math.floor(y0 / s) + 1)
    if about > MAX_CANDIDATES or cells > 20 * MAX_CANDIDATES:
        raise ValueError(f"about {about:.3g} candidate sites ({area_xy.area:.4g} km² every "
                         f"{s:g} km): use a larger step (--step-km); at most {MAX_CANDIDATES}")
    xs = np.arange(math.floor(x0 / s) * s, x1 + 1e-9, s)
    ys = np.arange(math.floor(y0 / s) * s, y1 + 1e-9, s)
    xx, yy = np.meshgrid(xs, ys)
    xx, yy = xx.ravel(), yy.ravel()
    keep = shapely.contains_xy(area_xy, xx, yy)
    lon, lat = proj.to_lonlat(xx[keep], yy[keep])
    lon, lat = np.atleast_1d(lon), np.atleast_1d(lat)
    ok = np.ones(lat.shape, dtype=bool)
    gm = spec.ground
    with gm._lock:
        for z in gm.zones:
            unbuildable = (not getattr(z, "buildable", True)) or z.ground.sigma_ms_m >= SEA_LIKE_MS_M
            if unbuildable:
                ok &= ~shapely.contains_xy(z.geometry, lon, lat)
    if gm.default.sigma_ms_m >= SEA_LIKE_MS_M:  # default ground is sea: only zones are land
        on_land = np.zeros(lat.shape, dtype=bool)
        for z in gm.zones:
            if getattr(z, "buildable", True) and z.ground.sigma_ms_m < SEA_LIKE_MS_M:
                on_land |= shapely.contains_xy(z.geometry, lon, lat)
        ok &= on_land
    if settings.exclusion_lonlat is not None:
        ok &= ~shapely.contains_xy(settings.exclusion_lonlat, lon, lat)
    return lat[ok], lon[ok]


# --- the work of one worker ------------------------------------------------------------------

@contextlib.contextmanager
def _interrupts_ignored():
    """SIGINT ignored in this (main) thread while local worker processes start: an ignored
    signal stays ignored across the start of a new program, so a worker is never killed by a
    Ctrl-C sent to the whole process group, even before its initializer runs. Ctrl-C typed in
    these few milliseconds is lost; any later one stops the search."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def ignore_interrupts() -> None:
    """Initializer of local worker processes: Ctrl-C in a terminal reaches the whole process
    group, and a worker that died of it would take its finished chunks with it; the parent
    alone handles Ctrl-C (it stops the search and keeps what is done)."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)


_WORKER: dict = {}


def _worker_study(spec, token: str):
    """The study and its per-study tables (neighbour checks) as this worker process first got
    them for ``token``: every chunk arrives with its own unpickled copy of the study, and
    keeping the first one keeps its ground map's caches (zone geometry in each site's plane,
    edge tables) from one chunk to the next."""
    from .interference import NeighbourChecks

    hit = _WORKER.get(token)
    if hit is None:
        _WORKER.clear()
        checks = NeighbourChecks(spec, spec.interference) if spec.interference else None
        hit = _WORKER[token] = (spec, checks)
    return hit


def _area_grid(freq_khz: float, max_km: float, step_km: float):
    """Distances [km] for a candidate's area radials: ``SEARCH_NEAR_POINTS`` geometric from
    one wavelength to 10 km, then steps of ``SEARCH_FAR_STEP_KM`` or ``SEARCH_FAR_RATIO`` of
    the distance, whichever is longer, to ``max_km``."""
    d0 = first_distance_km(freq_khz)
    near_end = min(10.0, max_km)
    near = np.geomspace(d0, near_end, SEARCH_NEAR_POINTS) if near_end > d0 else np.array([d0])
    far = [near_end]
    while far[-1] < max_km:
        far.append(far[-1] + max(step_km, SEARCH_FAR_STEP_KM, SEARCH_FAR_RATIO * far[-1]))
    return np.concatenate([near, far[1:]])


def _community_shares(spec, moved, community_xy, levels):
    """The community's shares inside ``levels`` [dBµV/m] at the study's power, from radials on
    the study's own bearings and distance grid — as a full run — but only over the bearings
    that reach the community (:func:`share_window`) and only over the distances from two grid
    points before its nearest point to two past its farthest."""
    st = moved.station
    if community_xy.is_empty or community_xy.area <= 0:
        return [0.0 for _ in levels]
    far = float(np.hypot(*shapely.get_coordinates(community_xy).T).max())
    # window_shares reads two grid points past the farthest point; 10 km keeps the near
    # part of the grid the full run's
    max_km = max(far + 3 * spec.step_km, 10.0)
    dist = distance_grid(st.freq_khz, max_km, spec.step_km)
    brg = spec.bearings  # sorted
    window = share_window(brg, community_xy, float(dist[0]))
    if window is None:  # the whole turn, as polar_shares contours it
        e1 = st.day_antenna.field_mv_m(brg, 0.0, st.power_day_kw)
        rad = radial_fields(st.freq_khz, moved.ground, st.lat, st.lon, brg, e1, max_km,
                            spec.step_km, spec.mixed_path, spec.earth_k, dist_km=dist)
        return polar_shares(brg, dist, rad.field_dbu, levels, community_xy)
    rows, unwrapped = window
    near = community_xy.distance(shapely.Point(0.0, 0.0))
    first = max(int(np.searchsorted(dist, near)) - 2, 0)
    dist = dist[first:]
    e1 = st.day_antenna.field_mv_m(brg[rows], 0.0, st.power_day_kw)
    rad = radial_fields(st.freq_khz, moved.ground, st.lat, st.lon, brg[rows], e1, max_km,
                        spec.step_km, spec.mixed_path, spec.earth_k, dist_km=dist)
    return window_shares(unwrapped, dist, rad.field_dbu, levels, community_xy,
                         arc_step_deg(brg), from_site=first == 0)


def evaluate_site(spec, settings: SearchSettings, checks, index: int, lat: float,
                  lon: float) -> Candidate:
    """One candidate: the study moved to (lat, lon), assessed like a full run."""
    moved = spec.with_site(lat, lon)
    st = moved.station
    max_day = max_night = None
    day_by = night_by = ""
    if checks is not None:
        inter = checks.assess(moved, night_service_too=False, received=False,
                              overlap_area=False, all_rows=False)
        mp = inter.max_power
        if mp.get("day"):
            max_day = mp["day"]["max_power_kw"]
            day_by = f"{mp['day']['limiting_neighbour']} ({mp['day']['check']})"
        if mp.get("night"):
            max_night = mp["night"]["max_power_kw"]
            night_by = f"{mp['night']['limiting_neighbour']} ({mp['night']['check']})"
    # the protected contour at the study's power, on radials every SEARCH_BEARING_STEP_DEG
    p0 = st.power_day_kw
    plan = spec.interference
    protected_mv = plan.protected_day_mv_m if plan is not None else 0.5
    brg = np.arange(0.0, 360.0, SEARCH_BEARING_STEP_DEG)
    e1 = st.day_antenna.field_mv_m(brg, 0.0, p0)
    max_km = radial_length_km(st.freq_khz, moved.ground, protected_mv, float(e1.max()),
                              spec.earth_k, min_km=5.0)
    rad = radial_fields(st.freq_khz, moved.ground, st.lat, st.lon, brg, e1, max_km,
                        spec.step_km, spec.mixed_path, spec.earth_k,
                        dist_km=_area_grid(st.freq_khz, max_km, spec.step_km))
    proj = local_projection(st.lat, st.lon)
    area = polar_area_km2(rad.bearings_deg, rad.dist_km, rad.field_dbu,
                          float(mv_m_to_dbu(protected_mv)), proj)
    community = spec.community.geometry if spec.community else None
    share0 = share_max = None
    if community is not None:
        # community shares as ratios of areas in the candidate's own plane: the plane's area
        # scale changes by under 1e-4 across a community within a few hundred km, far below
        # the 0.5 % to which shares are quoted. At the maximum day power the field is the
        # study power's raised by the power ratio in dB, so one set of radials serves both.
        community_xy = proj.geom_to_xy(community)
        service_dbu = float(mv_m_to_dbu(settings.service_mv_m))
        levels = [service_dbu]
        if max_day is not None:
            gain_db = 10 * math.log10(min(max(max_day / p0, 1e-12), 1e12))
            levels.append(service_dbu - gain_db)
        shares = _community_shares(spec, moved, community_xy, levels)
        share0, share_max = shares[0], shares[-1]
    dist = None
    if community is not None:
        c = community.representative_point()
        dist = float(inverse(lat, lon, c.y, c.x)[0])
    if settings.score == "community_share":
        score = share_max if share_max is not None else 0.0
    elif settings.score == "area":
        score = area
    else:
        score = max_day if max_day is not None else float("inf")
    return Candidate(index, float(lat), float(lon), max_day, day_by, max_night, night_by,
                     share0, share_max, float(area), dist, float(score))


def evaluate_chunk(spec, settings: SearchSettings, token: str, items) -> list[Candidate]:
    """A chunk of candidates ((index, lat, lon), …) in one task; per-study tables are built
    once per worker and kept for the next chunk of the same study."""
    spec, checks = _worker_study(spec, token)
    return [evaluate_site(spec, settings, checks, i, la, lo) for i, la, lo in items]


# --- the driver ------------------------------------------------------------------------------

#: Decimals of each score as written in candidates.csv; ranking compares scores rounded to
#: them, so that float noise (0.9999999999999999 against 1.0) never decides an order the user
#: cannot see. Shares to 1e-4, areas to 0.1 km², powers to 1e-4 kW.
SCORE_DIGITS = {"community_share": 4, "area": 1, "max_power": 4}


def _rank(cands: list[Candidate], score_name: str = "community_share") -> list[Candidate]:
    """Best first: by score as written (rounded, :data:`SCORE_DIGITS`), then (ties) the share
    at the study's power, the maximum day power, the maximum night power, and the candidate's
    place in the grid. candidates.csv shows these figures beside the score
    (:func:`tie_break_text`)."""
    digits = SCORE_DIGITS.get(score_name, 6)

    def key(c):
        score = round(c.score, digits) if np.isfinite(c.score) else 1e300
        share = (round(c.share_at_study_power, 4) if c.share_at_study_power is not None
                 else -1.0)
        day = c.max_day_kw if c.max_day_kw is not None else 1e300
        night = c.max_night_kw if c.max_night_kw is not None else 1e300
        return (-score, -share, -day, -night, c.index)

    return sorted(cands, key=key)


def tie_break_text(c: Candidate) -> str:
    """The figures that order candidates of equal score, in the order they count."""
    parts = []
    if c.share_at_study_power is not None:
        parts.append(f"share at study power {c.share_at_study_power:.4f}")
    parts.append("max day " + ("unlimited" if c.max_day_kw is None else f"{c.max_day_kw:.4f} kW"))
    parts.append("max night " + ("unlimited" if c.max_night_kw is None
                                 else f"{c.max_night_kw:.5f} kW"))
    return "; ".join(parts)


def run_search(spec, settings: SearchSettings, executor: Executor | None = None,
               progress=None, workers: int = 1, lost=None) -> SearchResult:
    """Evaluate every candidate, in chunks, on ``executor`` (None: in this process).

    ``progress(done, total, elapsed_s)`` is called as chunks come back. A KeyboardInterrupt
    stops the search: the candidates done so far are returned, ``stopped_early`` set.
    ``lost(exc)`` tells an executor that has gone away (a cluster scheduler that died) from a
    failure of the evaluation itself: the first stops the search like Ctrl-C, keeping what is
    done, with the reason in ``stop_reason``; the second is raised.
    """
    t0 = time.perf_counter()
    lat, lon = candidate_sites(spec, settings)
    items = [(i, float(a), float(o)) for i, (a, o) in enumerate(zip(lat, lon))]
    chunks = [items[k:k + CHUNK] for k in range(0, len(items), CHUNK)]
    token = f"{os.getpid()}-{id(spec)}-{t0}"
    out: list[Candidate] = []
    result = SearchResult(settings, total=len(items), workers=workers)
    try:
        if executor is None:
            for ch in chunks:
                out += evaluate_chunk(spec, settings, token, ch)
                if progress:
                    progress(len(out), len(items), time.perf_counter() - t0)
        else:
            with _interrupts_ignored():  # local workers start now and inherit the ignoring
                pending = {executor.submit(evaluate_chunk, spec, settings, token, ch)
                           for ch in chunks}
            try:
                while pending:
                    done, pending = wait(pending, return_when=FIRST_COMPLETED)
                    gone = None
                    for fut in done:  # keep every chunk that came back before stopping
                        try:
                            out += fut.result()
                        except KeyboardInterrupt as exc:  # a worker stopped by Ctrl-C
                            gone = gone or exc
                        except Exception as exc:
                            if lost is None or not lost(exc):
                                raise
                            gone = gone or exc
                    if isinstance(gone, KeyboardInterrupt):
                        raise gone
                    if gone is not None:
                        text = str(gone).splitlines()[0] if str(gone) else "the connection closed"
                        result.stop_reason = f"{type(gone).__name__}: {text}"
                        raise KeyboardInterrupt from gone
                    if progress:
                        progress(len(out), len(items), time.perf_counter() - t0)
            except KeyboardInterrupt:
                for fut in pending:  # chunks that finished but were not yet collected count
                    if fut.done() and not fut.cancelled() and fut.exception() is None:
                        out += fut.result()
                    else:
                        fut.cancel()
                raise
    except KeyboardInterrupt:
        result.stopped_early = True
        result.stop_reason = result.stop_reason or "interrupted"
    result.candidates = _rank(out, settings.score)
    result.elapsed_s = time.perf_counter() - t0
    return result


# --- outputs ----------------------------------------------------------------------------------

CSV_COLUMNS = ("rank", "lat", "lon", "score", "ties_broken_by", "max_day_kw", "day_limited_by",
               "max_night_kw",
               "night_limited_by", "share_at_study_power", "share_at_max_power",
               "protected_area_km2", "community_km")


def _fmt(v, digits=4):
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return ""
    if isinstance(v, float):
        return f"{v:.{digits}f}"
    return str(v)


def candidates_csv(search: SearchResult) -> str:
    """Ranked candidates, one row each (best first)."""
    import io

    from .safefiles import csv_writer

    buf = io.StringIO()
    w = csv_writer(buf)
    w.writerow(CSV_COLUMNS)
    for rank, c in enumerate(search.candidates, 1):
        w.writerow([rank, f"{c.lat:.6f}", f"{c.lon:.6f}",
                    _fmt(c.score, SCORE_DIGITS.get(search.settings.score, 6)), tie_break_text(c),
                    _fmt(c.max_day_kw, 4), c.day_limited_by, _fmt(c.max_night_kw, 5),
                    c.night_limited_by, _fmt(c.share_at_study_power, 4),
                    _fmt(c.share_at_max_power, 4), _fmt(c.protected_area_km2, 1),
                    _fmt(c.community_km, 2)])
    return buf.getvalue()


def candidates_geojson(search: SearchResult) -> dict:
    """Candidates as GeoJSON Points (RFC 7946) with every figure as properties."""
    feats = []
    for rank, c in enumerate(search.candidates, 1):
        props = {k: (None if isinstance(v, float) and not np.isfinite(v) else v)
                 for k, v in c.row().items() if k not in ("lat", "lon")}
        props["rank"] = rank
        feats.append({"type": "Feature", "properties": props,
                      "geometry": {"type": "Point",
                                   "coordinates": [round(c.lon, 6), round(c.lat, 6)]}})
    return {"type": "FeatureCollection", "features": feats}


def search_summary(search: SearchResult, spec) -> dict:
    s = search.settings
    best = [dict(c.row(), rank=k) for k, c in enumerate(search.candidates[:10], 1)]
    return {
        "study_file": spec.path, "title": spec.title,
        "settings": {"step_km": s.step_km, "radius_km": s.radius_km,
                     "area": s.area_lonlat is not None, "exclusion": s.exclusion_lonlat is not None,
                     "score": s.score, "service_mv_m": s.service_mv_m},
        "candidates_in_area": search.total, "candidates_done": len(search.candidates),
        "stopped_early": search.stopped_early, "workers": search.workers,
        "elapsed_s": round(search.elapsed_s, 3),
        "seconds_per_candidate": (round(search.elapsed_s * search.workers
                                        / max(len(search.candidates), 1), 5)),
        "best": best,
        "caution": "Planning estimate only; sites need field checks, land rights, local codes "
                   "and a licensed engineer's review.",
    }
