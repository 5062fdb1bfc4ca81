"""Speed of counting people inside the demo's four contours, run by hand:
    .venv/bin/python benchmarks/bench_population.py
Target (issue: people served): 10^6 population points or 10^5 polygons inside four contours in
under 2 s. The layers are random (invented) around the demo site; building them is not timed,
counting is (the STRtree and the cells' areas are built inside the timed part, as a run does).
"""

from __future__ import annotations

import pathlib
import time

import numpy as np
import shapely

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


def main() -> None:
    from mwreach.coverage.population import Population
    from mwreach.coverage.study import Study

    res = Study.from_file(DEMO).run(interference=False)
    regions = [c.polygon_lonlat for c in res.contours]
    st = res.spec.station
    rng = np.random.default_rng(1)
    n = 1_000_000
    lon = st.lon + rng.uniform(-6.0, 6.0, n)
    lat = st.lat + rng.uniform(-5.0, 5.0, n)
    pts = Population(np.array([], dtype=object), np.array([]), lon, lat,
                     rng.integers(0, 100, n).astype(float))
    t0 = time.perf_counter()
    counts = [pts.count_in(r) for r in regions]
    t_pts = time.perf_counter() - t0
    m = 100_000
    size = 0.03  # deg: cells about 3 km
    x = st.lon + rng.uniform(-6.0, 6.0, m)
    y = st.lat + rng.uniform(-5.0, 5.0, m)
    cells = shapely.box(x, y, x + size, y + size)
    polys = Population(cells, rng.integers(0, 500, m).astype(float), np.array([]), np.array([]),
                       np.array([]))
    t0 = time.perf_counter()
    counts_p = [polys.count_in(r) for r in regions]
    t_poly = time.perf_counter() - t0
    print(f"10^6 points, 4 contours: {t_pts:.2f} s ({', '.join(f'{c:,.0f}' for c in counts)})")
    print(f"10^5 polygons, 4 contours: {t_poly:.2f} s "
          f"({', '.join(f'{c:,.0f}' for c in counts_p)})")


if __name__ == "__main__":
    main()
