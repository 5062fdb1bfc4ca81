"""Site-search speed, run by hand:  .venv/bin/python benchmarks/bench_search.py [N] [--target]

Target (issue): 10 000 candidates on the demo (5 neighbours and more, day and night) in under
60 s on 2 cores, i.e. about 12 ms of one core per candidate. Prints the time per candidate on
1 and 2 worker processes and on all cores for N candidates (default about 400), and how it grows
with the number of neighbours (the demo's, and 20 / 50 invented ones added). With --target it
also runs the target itself: 10 000 candidates of the demo on 2 worker processes, timed from
the call to the ranked result (worker start-up included).
"""

from __future__ import annotations

import dataclasses
import multiprocessing as mp
import os
import pathlib
import sys
import time
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from mwreach.coverage.antenna import Array, Tower
from mwreach.coverage.geodesy import fwd_points
from mwreach.coverage.inputs import load_study
from mwreach.coverage.interference import Neighbour
from mwreach.coverage.search import SearchSettings, candidate_sites, run_search

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def with_extra(spec, n: int):
    if n == 0:
        return spec
    rng = np.random.default_rng(5)
    st = spec.station
    lat, lon = fwd_points(st.lat, st.lon, rng.uniform(0, 360, n), rng.uniform(150, 2500, n))
    freqs = st.freq_khz + 10 * rng.integers(-1, 2, n)
    extra = tuple(Neighbour(f"X{i:02d}", float(a), float(o), float(f), 1.0, 1.0,
                            Array.single(Tower(90.0)))
                  for i, (a, o, f) in enumerate(zip(lat, lon, freqs)))
    plan = dataclasses.replace(spec.interference,
                               neighbours=spec.interference.neighbours + extra)
    return dataclasses.replace(spec, interference=plan)


def grid_for(spec, want: int, radius: float = 45.0):
    """Settings whose grid within ``radius`` km of the demo site has about ``want`` candidates."""
    step = 1.0
    while len(candidate_sites(spec, SearchSettings(step_km=step, radius_km=radius))[0]) > want:
        step *= 1.15
    while len(candidate_sites(spec, SearchSettings(step_km=step, radius_km=radius))[0]) < want:
        step *= 0.995
    return SearchSettings(step_km=step, radius_km=radius)


def timed(spec, settings, workers: int):
    if workers == 1:
        t0 = time.perf_counter()
        res = run_search(spec, settings, None, workers=1)
        return time.perf_counter() - t0, res
    with ProcessPoolExecutor(workers, mp_context=mp.get_context("spawn")) as pool:
        t0 = time.perf_counter()
        res = run_search(spec, settings, pool, workers=workers)
        return time.perf_counter() - t0, res


def main():
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    want = int(args[0]) if args else 400
    spec = load_study(DEMO)
    settings = grid_for(spec, want)
    n = len(candidate_sites(spec, settings)[0])
    print(f"{n} candidates every {settings.step_km:.2f} km within {settings.radius_km:g} km "
          "of the demo site")
    t1, one = timed(spec, settings, 1)
    print(f"  1 process : {t1:.1f} s, {1e3 * t1 / n:.1f} ms per candidate")
    every = os.cpu_count() or 1
    for workers in sorted({2, every}):
        t, res = timed(spec, settings, workers)
        same = [c.row() for c in one.candidates] == [c.row() for c in res.candidates]
        print(f"  {workers} processes: {t:.1f} s ({t1 / t:.2f}× faster; identical results: "
              f"{same}; start-up of the workers included)")
    small = SearchSettings(step_km=settings.step_km * 2.5, radius_km=settings.radius_km)
    m = len(candidate_sites(spec, small)[0])
    for extra in (0, 20, 50):
        s = with_extra(spec, extra)
        t0 = time.perf_counter()
        run_search(s, small, None)
        dt = time.perf_counter() - t0
        print(f"  {len(s.interference.neighbours)} neighbours: {1e3 * dt / m:.1f} ms per candidate "
              f"({m} candidates, one process, including the per-study tables)")
    if "--target" in sys.argv:
        target = grid_for(spec, 10_000)
        k = len(candidate_sites(spec, target)[0])
        t, res = timed(spec, target, 2)
        print(f"  target: {k} candidates (every {target.step_km:.3f} km) on 2 processes in "
              f"{t:.1f} s ({'under' if t < 60 else 'OVER'} the 60 s target; "
              f"{1e3 * 2 * t / k:.1f} ms of one core per candidate)")


if __name__ == "__main__":
    main()
