"""Uncertainty bands, run by hand:  .venv/bin/python benchmarks/bench_uncertainty.py [DRAWS]

Target (issue): 200 draws of the demo day study in under 5 s on 2 cores. The study is
data/demo/quellmoor_uncertain.toml (its default ground and two zones carry conductivity ranges);
prints the whole run with and without the bands and where the band time goes.
"""

from __future__ import annotations

import dataclasses
import os
import pathlib
import sys
import time

from mwreach.coverage.inputs import load_study
from mwreach.coverage.study import Study
from mwreach.coverage.uncertainty import UncertaintySettings

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor_uncertain.toml"


def main():
    draws = int(sys.argv[1]) if len(sys.argv) > 1 else 200
    spec = load_study(DEMO)
    spec = dataclasses.replace(spec, uncertainty=UncertaintySettings(draws, 1))
    study = Study(spec)
    study.run(interference=False, bands=False)  # curves and zone geometry cached, as in the GUI
    t0 = time.perf_counter()
    study.run(interference=False, bands=False)
    plain = time.perf_counter() - t0
    t0 = time.perf_counter()
    res = study.run(interference=False)
    both = time.perf_counter() - t0
    print(f"demo day study, {res.radials.bearings_deg.size} radials × "
          f"{res.radials.dist_km.size} distances: {plain:.2f} s without bands, {both:.2f} s with "
          f"{draws} draws ({both - plain:.2f} s for the bands; node fields on up to {min(4, os.cpu_count() or 1)} threads)")
    for b in res.bands:
        print(f"  {b.level_mv_m:g} mV/m: area {b.area_km2['p05']:.0f} / {b.area_km2['p50']:.0f} /"
              f" {b.area_km2['p95']:.0f} km² at 5 / 50 / 95 %")


if __name__ == "__main__":
    main()
