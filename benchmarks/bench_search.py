"""Site-search speed, run by hand:  .venv/bin/python benchmarks/bench_search.py [N]

Target (issue): 10 000 candidates on the demo (5 neighbours and more, day and night) in under
60 s on 2 cores, i.e. about 12 ms of one core per candidate. Prints the time per candidate on
1 and 2 worker processes for N candidates (default about 400), and how it grows with the number
of neighbours (the demo's, and 20 / 50 invented ones added).
"""

from __future__ import annotations

import dataclasses
import multiprocessing as mp
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


def main():
    want = int(sys.argv[1]) if len(sys.argv) > 1 else 400
    spec = load_study(DEMO)
    radius = 45.0
    step = 1.0
    while len(candidate_sites(spec, SearchSettings(step_km=step, radius_km=radius))[0]) > want:
        step *= 1.15
    settings = SearchSettings(step_km=step, radius_km=radius)
    n = len(candidate_sites(spec, settings)[0])
    print(f"{n} candidates every {step:.2f} km within {radius:g} km of the demo site")
    t0 = time.perf_counter()
    one = run_search(spec, settings, None, workers=1)
    t1 = time.perf_counter() - t0
    print(f"  1 process : {t1:.1f} s, {1e3 * t1 / n:.1f} ms per candidate")
    with ProcessPoolExecutor(2, mp_context=mp.get_context("spawn")) as pool:
        t0 = time.perf_counter()
        two = run_search(spec, settings, pool, workers=2)
        t2 = time.perf_counter() - t0
    same = [c.row() for c in one.candidates] == [c.row() for c in two.candidates]
    print(f"  2 processes: {t2:.1f} s ({t1 / t2:.2f}× faster; identical results: {same})")
    print(f"  10 000 candidates would take about {1e4 * t2 / n:.0f} s on 2 cores")
    small = SearchSettings(step_km=step * 2.5, radius_km=radius)
    m = len(candidate_sites(spec, small)[0])
    for extra in (0, 20, 50):
        s = with_extra(spec, extra)
        t0 = time.perf_counter()
        run_search(s, small, None)
        dt = time.perf_counter() - t0
        print(f"  {len(s.interference.neighbours)} neighbours: {1e3 * dt / m:.1f} ms per candidate "
              f"({m} candidates, one process, including the per-study tables)")


if __name__ == "__main__":
    main()
