"""Regenerate the demo's field-strength readings (measurements.csv). INVENTED DATA.

The readings are made up for the demo: they are the project's own smooth-earth curve for an
invented "true" ground (6 mS/m, εr 15, where the demo map says 4 mS/m) along three radials of
Radio Quellmoor that stay on the default ground, with 1 dB of Gaussian scatter, two readings in
the near field and one spoilt reading (a parked truck) to show how the fit reports them.

Run:  .venv/bin/python data/demo/make_measurements.py
"""

from __future__ import annotations

import csv
import pathlib

import numpy as np

from mwreach.coverage import groundwave as gw
from mwreach.coverage.geodesy import fwd_points
from mwreach.coverage.ground import Ground
from mwreach.coverage.inputs import load_study

HERE = pathlib.Path(__file__).parent
TRUE = Ground(6.0, 15.0)


def main():
    spec = load_study(HERE / "quellmoor.toml")
    st = spec.station
    rng = np.random.default_rng(1390)
    rows = []
    for name, bearing in (("south", 180.0), ("south-south-west", 195.0), ("south-west", 210.0)):
        # two readings inside the near-field distance of 47 CFR 73.186(a)(1) (5 × the 62 m
        # tower: 0.31 km), which the fit must leave out and report
        d = np.concatenate([[0.24, 0.28], np.geomspace(1.2, 40.0, 14)])
        e1 = float(st.antenna.field_mv_m(bearing, 0.0, st.power_day_kw))
        f = gw.model(st.freq_khz, TRUE, spec.earth_k).field_dbu(d, e1) + rng.normal(0, 1.0, d.size)
        lat, lon = fwd_points(st.lat, st.lon, np.full(d.size, bearing), d)
        for k, (a, o, x) in enumerate(zip(lat, lon, f)):
            note = ""
            if name == "south" and k == 9:
                x -= 9.0  # a reading taken beside a parked truck
                note = "beside a parked truck"
            rows.append({"lat": f"{a:.6f}", "lon": f"{o:.6f}", "field_dbu": f"{x:.2f}",
                         "radial": name, "note": note})
    with open(HERE / "measurements.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=["lat", "lon", "field_dbu", "radial", "note"])
        w.writeheader()
        w.writerows(rows)
    print(f"wrote {len(rows)} invented readings to {HERE / 'measurements.csv'}")


if __name__ == "__main__":
    main()
