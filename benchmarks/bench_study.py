"""Speed of a whole daytime study, run by hand:  .venv/bin/python benchmarks/bench_study.py

Target (issue): 360 bearings × 4 levels over the 5-zone demo ground, mixed paths included,
under 1 s on 2 cores. Prints the total and where the time goes (cProfile, top entries).
"""

from __future__ import annotations

import cProfile
import pathlib
import pstats
import time

from mwreach.coverage import groundwave
from mwreach.coverage.study import Study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def main():
    study = Study.from_file(DEMO)
    groundwave._model_cached.cache_clear()
    t0 = time.perf_counter()
    study.run(interference=False)
    cold = time.perf_counter() - t0
    times = []
    for _ in range(3):
        t0 = time.perf_counter()
        res = study.run(interference=False)
        times.append(time.perf_counter() - t0)
    print(f"demo study, {res.radials.bearings_deg.size} bearings × {len(res.contours)} levels, "
          f"{res.radials.dist_km.size} distances per radial:")
    print(f"  day ground wave: first run (curves built) {cold * 1e3:.0f} ms, warm best "
          f"{min(times) * 1e3:.0f} ms")
    t0 = time.perf_counter()
    study.run()
    print(f"  with night and interference (5 neighbours): {(time.perf_counter() - t0) * 1e3:.0f} ms")
    groundwave._model_cached.cache_clear()
    prof = cProfile.Profile()
    prof.enable()
    study.run(interference=False)
    prof.disable()
    pstats.Stats(prof).sort_stats("cumulative").print_stats(12)


if __name__ == "__main__":
    main()
