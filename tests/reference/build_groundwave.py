"""Regenerate ``groundwave_mpmath.json``: independent mpmath ground-wave values at 30 digits.

Run by hand (takes about ten minutes on 2 cores):  python tests/reference/build_groundwave.py
Each case is (frequency kHz, σ mS/m, εr, distance km); K = 4/3, 300 mV/m at 1 km.
Long distances use the residue series; short ones (x < 0.03) the Norton flat-earth form,
where the earth's curvature changes the field by less than 0.01 dB.
"""

from __future__ import annotations

import json
import multiprocessing as mproc
import pathlib
import sys

import mpmath as mp

sys.path.insert(0, str(pathlib.Path(__file__).parent))
import mp_groundwave as ref  # noqa: E402

SERIES_CASES = [
    (150, 3, 22, 100), (150, 3, 22, 500), (150, 3, 22, 2000), (150, 5000, 70, 300),
    (150, 0.1, 3, 150),
    (1000, 3, 22, 50), (1000, 3, 22, 300), (1000, 5000, 70, 1000), (1000, 10, 30, 300),
    (1000, 1, 15, 200),
    (1700, 0.1, 3, 60), (1700, 0.1, 3, 200), (1700, 30, 40, 1000), (1700, 5000, 70, 2000),
    # the ends of the method's range (ITU-R P.368: 10 kHz to 30 MHz)
    (10, 3, 22, 1000), (10, 5000, 70, 3000), (10000, 30, 40, 60), (30000, 5000, 70, 100),
]
#: Just beyond the crossover (x = 0.13 and 0.18 at 1000 kHz over land), where many terms are
#: needed: 20 digits and terms while (√3/2)|t_s|x < 15 (about 90 s each).
NEAR_CASES = [(1000, 3, 22, 25), (1000, 3, 22, 34)]
FLAT_CASES = [(1000, 3, 22, 1), (540, 5000, 70, 2), (1700, 0.1, 3, 3), (150, 1, 15, 5)]


def _series(case):
    mp.mp.dps = 30
    f, s, e, d = case
    w = ref.series_attenuation(f, s, e, d, exponent=20)
    return {"freq_khz": f, "sigma_ms_m": s, "eps_r": e, "dist_km": d, "method": "residue series",
            "field_dbu": float(ref.field_dbu(w, d))}


def _near(case):
    mp.mp.dps = 20
    f, s, e, d = case
    w = ref.series_attenuation(f, s, e, d, exponent=15)
    return {"freq_khz": f, "sigma_ms_m": s, "eps_r": e, "dist_km": d,
            "method": "residue series, 20 digits", "field_dbu": float(ref.field_dbu(w, d))}


def _flat(case):
    mp.mp.dps = 30
    f, s, e, d = case
    w = ref.flat_attenuation(f, s, e, d)
    return {"freq_khz": f, "sigma_ms_m": s, "eps_r": e, "dist_km": d, "method": "flat earth",
            "field_dbu": float(ref.field_dbu(w, d))}


if __name__ == "__main__":
    with mproc.Pool(2) as pool:
        rows = (pool.map(_series, SERIES_CASES, chunksize=1) + pool.map(_near, NEAR_CASES)
                + [_flat(c) for c in FLAT_CASES])
    out = {
        "source": "mpmath 30-digit evaluation, tests/reference/mp_groundwave.py",
        "earth_k": 4 / 3,
        "e1km_mv_m": 300,
        "cases": rows,
    }
    path = pathlib.Path(__file__).with_name("groundwave_mpmath.json")
    path.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {len(rows)} cases to {path}")
