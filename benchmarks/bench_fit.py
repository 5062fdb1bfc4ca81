"""Fitting speed, run by hand:  .venv/bin/python benchmarks/bench_fit.py

Target (issue): 10 radials × 30 readings in under 1 s, from cached curve tables. Prints the
one-time cost of the table family for a frequency and permittivity, then the fit itself.
"""

from __future__ import annotations

import time

import numpy as np

from mwreach.coverage import groundwave as gw
from mwreach.coverage.fit import Reading, curve_family, fit_radial
from mwreach.coverage.ground import Ground


def main():
    t0 = time.perf_counter()
    fam = curve_family(1000.0, 15.0)
    print(f"curve family (73 conductivities, built once per frequency and εr): "
          f"{time.perf_counter() - t0:.2f} s")
    rng = np.random.default_rng(0)
    radials = []
    for k in range(10):
        d = np.geomspace(1.0, 80.0, 30)
        s = float(rng.uniform(1.0, 20.0))
        y = (float(gw.mv_m_to_dbu(300.0)) - 20 * np.log10(d)
             + gw.model(1000.0, Ground(s, 15.0)).gain_db(d) + rng.normal(0, 1.0, d.size))
        radials.append([Reading(float(a), float(b), 0, 0, 36.0 * k, line=i)
                        for i, (a, b) in enumerate(zip(d, y))])
    t0 = time.perf_counter()
    fits = [fit_radial(f"r{k}", r, fam, None, 0.9) for k, r in enumerate(radials)]
    dt = time.perf_counter() - t0
    print(f"10 radials × 30 readings: {dt:.2f} s ({1e3 * dt / 10:.0f} ms per radial)")
    assert len(fits) == 10


if __name__ == "__main__":
    main()
