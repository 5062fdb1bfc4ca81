"""Speed of a night study with 50 neighbours on 360 bearings, run by hand:
    .venv/bin/python benchmarks/bench_night.py
Target: under 1 s on one core with night ground wave and the neighbours' own limits (1.6–1.9 s
before them). Neighbours are invented, scattered 150–2500 km from the demo site on co- and
adjacent channels; the first line includes building the curve tables.
"""

from __future__ import annotations

import dataclasses
import pathlib
import time

import numpy as np

from mwreach.coverage.antenna import Array, Tower
from mwreach.coverage.geodesy import fwd_points
from mwreach.coverage.interference import Neighbour, ProtectionTable, run_interference
from mwreach.coverage.inputs import load_study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def main():
    spec = load_study(DEMO)
    rng = np.random.default_rng(7)
    st = spec.station
    lat, lon = fwd_points(st.lat, st.lon, rng.uniform(0, 360, 50), rng.uniform(150, 2500, 50))
    freqs = st.freq_khz + 10 * rng.integers(-1, 2, 50)
    neighbours = tuple(
        Neighbour(f"N{i:02d}", float(a), float(o), float(f), 1.0, 1.0, Array.single(Tower(90.0)))
        for i, (a, o, f) in enumerate(zip(lat, lon, freqs))
    )
    plan = dataclasses.replace(spec.interference, neighbours=neighbours,
                               night=dataclasses.replace(spec.interference.night,
                                                         bearing_step_deg=1.0))
    spec = dataclasses.replace(spec, interference=plan)
    night_only = dataclasses.replace(plan, protection=ProtectionTable(
        ratios={k: v for k, v in plan.protection.ratios.items() if k[0] == "night"}))
    for label, p in (("night only (limit, night contour, caused sky wave)", night_only),
                     ("night and day interference", plan)):
        t0 = time.perf_counter()
        res = run_interference(spec, p)
        print(f"{label}, 50 neighbours, 360 bearings: {time.perf_counter() - t0:.2f} s "
              f"({len(res.rows)} check points)")
    from mwreach.coverage.interference import night_service

    t0 = time.perf_counter()
    night_service(spec, plan, [(n, 26.0) for n in neighbours])
    print(f"night limit and night contour alone, 360 bearings: {time.perf_counter() - t0:.2f} s")


if __name__ == "__main__":
    main()
