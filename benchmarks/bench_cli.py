"""Start-up cost of the command line, run by hand:  .venv/bin/python benchmarks/bench_cli.py

Target (issue): `mwreach --help` and `--version` cost little more than starting Python with
numpy, because the heavy modules (scipy, shapely, pyproj, Qt) load only in the commands that
need them. Prints the median of 15 runs of each.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time


def median_s(argv, n=15) -> float:
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        subprocess.run(argv, capture_output=True, check=False)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main():
    py = sys.executable
    base = median_s([py, "-c", "import numpy"])
    print(f"python -c 'import numpy'   {base * 1e3:6.0f} ms")
    for argv in (["--help"], ["--version"], ["run", "--help"]):
        t = median_s([py, "-m", "mwreach.coverage.cli", *argv])
        print(f"mwreach {' '.join(argv):<18} {t * 1e3:6.0f} ms  ({(t - base) * 1e3:+.0f} ms)")


if __name__ == "__main__":
    main()
