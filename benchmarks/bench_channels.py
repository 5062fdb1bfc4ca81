"""The channel search at band scale, run by hand:
    .venv/bin/python benchmarks/bench_channels.py [N] [--from 530 --to 1700]   (default N = 2000)

Target (issue): all 118 channels of 530–1700 kHz against 2000 band neighbours in under 10 s on
2 cores, with identical results on 1 and 2 workers. Neighbours are bench_band.py's invented
list (single towers, 0.25–5 kW, random 10 kHz channels, 20–2500 km from the demo site); the
demo study's own [[neighbour]] is kept. Prints the time per channel and the slowest channels.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import pathlib
import sys
import time
from concurrent.futures import ProcessPoolExecutor

sys.path.insert(0, str(pathlib.Path(__file__).parent))

from bench_band import study_with  # noqa: E402

from mwreach.coverage.channels import evaluate_channel, run_channels  # noqa: E402
from mwreach.coverage.inputs import load_study_doc  # noqa: E402

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("n", nargs="?", type=int, default=2000)
    ap.add_argument("--from", dest="lo", type=float, default=530.0)
    ap.add_argument("--to", dest="hi", type=float, default=1700.0)
    ap.add_argument("--one-only", action="store_true", help="skip the 1-worker run")
    a = ap.parse_args()
    doc, _ = load_study_doc(DEMO)
    spec = study_with(a.n)
    rows = {}
    for workers in ((2,) if a.one_only else (1, 2)):
        t0 = time.perf_counter()
        if workers == 1:
            res = run_channels(spec, doc, a.lo, a.hi)
        else:
            with ProcessPoolExecutor(2, mp_context=mp.get_context("spawn")) as pool:
                res = run_channels(spec, doc, a.lo, a.hi, executor=pool, workers=2)
        dt = time.perf_counter() - t0
        rows[workers] = res.rows
        print(f"{a.n} neighbours, {len(res.rows)} channels on {workers} worker(s): {dt:.1f} s "
              f"({1e3 * dt * workers / len(res.rows):.0f} ms of one core per channel)")
    if len(rows) == 2:
        print("1 and 2 workers identical:", rows[1] == rows[2])
    # the slowest channels, one at a time
    times = []
    for r in rows[min(rows)][::10]:
        t0 = time.perf_counter()
        evaluate_channel(spec, doc, r.freq_khz, 5.0)
        times.append((time.perf_counter() - t0, r.freq_khz, r.neighbours_checked))
    for dt, f, n in sorted(times, reverse=True)[:5]:
        print(f"  {f:g} kHz: {dt:.2f} s, {n} neighbours checked")


if __name__ == "__main__":
    main()
