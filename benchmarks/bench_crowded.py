"""Speed of a crowded channel: N co-channel and first-adjacent neighbours within 2500 km, day and
night checks, run by hand:
    .venv/bin/python benchmarks/bench_crowded.py 50 200 1000
Prints seconds and peak memory (MB, the process's maximum resident size) per N. Target (issue:
crowded channels): 1000 neighbours under 10 s and under 500 MB, time beyond start-up growing
about linearly. Each N runs in a fresh process, so caches and peaks do not carry over.
"""

from __future__ import annotations

import dataclasses
import pathlib
import resource
import subprocess
import sys
import time

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def one(n: int) -> None:
    import numpy as np

    from mwreach.coverage.antenna import Array, Tower
    from mwreach.coverage.geodesy import fwd_points
    from mwreach.coverage.inputs import load_study
    from mwreach.coverage.interference import Neighbour, run_interference

    spec = load_study(DEMO)
    st = spec.station
    rng = np.random.default_rng(34)
    lat, lon = fwd_points(st.lat, st.lon, rng.uniform(0, 360, n), rng.uniform(150, 2500, n))
    freqs = st.freq_khz + 10 * rng.integers(-1, 2, n)  # co-channel and first adjacent only
    nbs = tuple(Neighbour(f"N{i:04d}", float(a), float(o), float(f), 1.0, 1.0,
                          Array.single(Tower(90.0)))
                for i, (a, o, f) in enumerate(zip(lat, lon, freqs)))
    plan = dataclasses.replace(spec.interference, neighbours=nbs)
    spec = dataclasses.replace(spec, interference=plan)
    t0 = time.perf_counter()
    res = run_interference(spec, plan)
    dt = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"{n:5d} neighbours: {dt:7.2f} s, peak {peak:6.0f} MB, {len(res.rows)} rows, "
          f"max night {res.max_power['night']['max_power_kw']:.6g} kW", flush=True)


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--one":
        one(int(sys.argv[2]))
    else:
        for n in [int(a) for a in sys.argv[1:]] or [50, 200]:
            subprocess.run([sys.executable, __file__, "--one", str(n)], check=True)
