"""Speed of the physics core, run by hand:  .venv/bin/python benchmarks/bench_core.py

Targets (issues): 100 000 ground-wave distances for one cached (f, ground) < 50 ms; a new
(f, ground) including roots < 20 ms; a 6-tower pattern on a 1°×1° grid with normalisation
< 30 ms. Also the ratio against the mpmath reference on the same points.
"""

from __future__ import annotations

import pathlib
import sys
import time

import mpmath as mp
import numpy as np

from mwreach.coverage import groundwave as gw
from mwreach.coverage.antenna import Array, Element, Tower
from mwreach.coverage.ground import Ground, ground_class

sys.path.insert(0, str(pathlib.Path(__file__).parents[1] / "tests" / "reference"))
import mp_groundwave as mpref  # noqa: E402


def best_of(fn, n=7):
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times) * 1e3


def main():
    land = ground_class("land")
    m = gw.model(1000.0, land)
    d = np.linspace(1.0, 2000.0, 100_000)
    print(f"ground wave, 100 000 distances 1–2000 km, cached roots: {best_of(lambda: m.field_dbu(d)):.1f} ms")

    sig = iter(np.linspace(0.5, 50, 1000))
    first = best_of(lambda: gw.GroundWaveModel(1000.0, Ground(next(sig), 15.0)).field_dbu([5, 50, 500]))
    print(f"ground wave, new (f, ground) incl. roots, 3 distances: {first:.1f} ms")

    pts = [300.0, 700.0]
    fast = best_of(lambda: m.field_dbu(pts))
    mp.mp.dps = 20
    t0 = time.perf_counter()
    for x in pts:
        mpref.series_attenuation(1000, 3, 22, x, exponent=15)
    slow = (time.perf_counter() - t0) * 1e3
    print(f"mpmath reference on {len(pts)} points: {slow:.0f} ms vs {fast:.3f} ms (ratio {slow / fast:.0f}×)")

    arr = Array(tuple(Element(Tower(100.0, loss_ohm=1.0), 1.0 - 0.1 * i, 40.0 * i, 90.0 * i, 30.0)
                      for i in range(6)))
    az, el = np.meshgrid(np.arange(0.0, 360.0), np.arange(0.0, 91.0))

    def pattern():
        a = Array(arr.elements)  # fresh object: normalisation not cached
        a.field_mv_m(az, el, 1.0)

    print(f"6-tower pattern, 1°×1° grid incl. normalisation: {best_of(pattern):.1f} ms")


if __name__ == "__main__":
    main()
