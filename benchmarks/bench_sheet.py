"""Speed of the three-page demo contour sheet, run by hand:
    QT_QPA_PLATFORM=offscreen .venv/bin/python benchmarks/bench_sheet.py
Target (issue): under 3 s, study run included.
"""

import pathlib
import tempfile
import time

from mwreach.coverage.study import Study
from mwreach.gui.qt import ensure_app
from mwreach.gui.sheet import write_sheet

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def main():
    ensure_app()
    t0 = time.perf_counter()
    result = Study.from_file(DEMO).run()
    t1 = time.perf_counter()
    with tempfile.TemporaryDirectory() as d:
        pages = write_sheet(result, pathlib.Path(d) / "sheet.pdf")
    t2 = time.perf_counter()
    print(f"study {t1 - t0:.2f} s + sheet ({pages} pages) {t2 - t1:.2f} s = {t2 - t0:.2f} s")


if __name__ == "__main__":
    main()
