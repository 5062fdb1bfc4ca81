"""A band-wide neighbour list: the whole study (day and night) with N neighbours spread over the
AM band, run by hand:  .venv/bin/python benchmarks/bench_band.py [N ...]   (default 200 1000)

Target: 1000 neighbours under 10 s on one core, with the time per neighbour not growing with
their number. Neighbours are invented: single towers, 0.25–5 kW, on random 10 kHz channels from
540 to 1700 kHz, scattered 20–2500 km from the demo site.
"""

from __future__ import annotations

import dataclasses
import pathlib
import sys
import time

import numpy as np

from mwreach.coverage.antenna import Array, Tower
from mwreach.coverage.geodesy import fwd_points
from mwreach.coverage.inputs import load_study
from mwreach.coverage.interference import Neighbour
from mwreach.coverage.study import Study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def study_with(n: int, seed: int = 11):
    spec = load_study(DEMO)
    rng = np.random.default_rng(seed)
    st = spec.station
    lat, lon = fwd_points(st.lat, st.lon, rng.uniform(0, 360, n), rng.uniform(20, 2500, n))
    freqs = 540.0 + 10.0 * rng.integers(0, 117, n)
    powers = rng.choice([0.25, 1.0, 2.5, 5.0], n)
    classes = rng.choice(["B", "B", "B", "C", "D", "A"], n)
    tower = Array.single(Tower(90.0, loss_ohm=1.0))
    neighbours = tuple(
        Neighbour(f"N{i:04d}", float(a), float(o), float(f), float(p), float(p), tower,
                  station_class=str(c))
        for i, (a, o, f, p, c) in enumerate(zip(lat, lon, freqs, powers, classes)))
    plan = dataclasses.replace(spec.interference, neighbours=neighbours)
    return dataclasses.replace(spec, interference=plan)


def main():
    sizes = [int(a) for a in sys.argv[1:]] or [200, 1000]
    for n in sizes:
        spec = study_with(n)
        study = Study(spec)
        t0 = time.perf_counter()
        res = study.run()
        dt = time.perf_counter() - t0
        inter = res.interference
        near = sum(1 for r in inter.neighbour_summary())
        print(f"{n} neighbours: whole run {dt:.2f} s ({1e3 * dt / n:.1f} ms per neighbour); "
              f"{len(inter.rows)} check points, {len(inter.neighbour_limits)} neighbour night "
              f"limits, {len(inter.overlaps)} overlap checks, {near} summary rows")


if __name__ == "__main__":
    main()
