"""Uncertainty bands over the grounds' conductivity ranges: the sampling, the bands against
exact runs at the range's ends, the interpolated curves against exact fields, convergence with
more draws, the outputs and the refusals.

References: the 5 % and 95 % points of a log-normal σ (scipy.stats.lognorm); exact fields from
the study's own Millington kernel with the drawn conductivities (tests/test_mixedpath.py checks
that kernel against the per-path sums).
"""

import copy
import csv
import io
import json
import pathlib
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from mwreach.coverage.ground import Ground, GroundMap
from mwreach.coverage.inputs import load_study_doc, parse_study
from mwreach.coverage.study import Study
from mwreach.coverage.uncertainty import (UncertaintySettings, draw_fields, latin_hypercube,
                                          lognormal_params, ground_bands)

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor_uncertain.toml"


@pytest.fixture(scope="module")
def demo_doc():
    return load_study_doc(DEMO)[0]


def _homogeneous(doc, rng=(2.0, 8.0), draws=200, step=10.0):
    d = copy.deepcopy(doc)
    d["ground"] = {"sigma_ms_m": 4.0, "eps_r": 15.0}
    if rng is not None:
        d["ground"]["sigma_range_ms_m"] = list(rng)
    for k in ("interference", "neighbour", "protection", "night", "community", "population"):
        d.pop(k, None)
    d["study"]["bearing_step_deg"] = step
    d["uncertainty"] = {"draws": draws, "seed": 1}
    return parse_study(d, DEMO.parent / "x.toml")


def test_lognormal_range_is_the_5_and_95_percent_points():
    mu, s = lognormal_params(2.0, 8.0)
    dist = stats.lognorm(s=s, scale=np.exp(mu))  # scipy's log-normal
    assert dist.ppf(0.05) == pytest.approx(2.0, rel=1e-12)
    assert dist.ppf(0.95) == pytest.approx(8.0, rel=1e-12)


def test_latin_hypercube_columns_hold_every_stratum_once():
    z = latin_hypercube(200, 3, seed=4)
    ref = np.sort(stats.norm.ppf((np.arange(200) + 0.5) / 200))  # scipy.stats.norm
    for j in range(3):
        np.testing.assert_allclose(np.sort(z[:, j]), ref, rtol=0, atol=1e-12)
    assert not np.array_equal(z[:, 0], z[:, 1])  # each ground in its own order
    np.testing.assert_array_equal(latin_hypercube(200, 3, seed=4), z)  # repeatable


def test_homogeneous_bands_equal_the_contours_at_the_range_ends(demo_doc):
    spec = _homogeneous(demo_doc)
    res = Study(spec).run()
    ends = {}
    for sigma in (2.0, 8.0):
        d = copy.deepcopy(demo_doc)
        exact = _homogeneous(d, rng=None)
        exact = parse_study(dict(_doc_of(exact, sigma)), DEMO.parent / "x.toml")
        ends[sigma] = Study(exact).run(bands=False).contours
    for band, lo, hi in zip(res.bands, ends[2.0], ends[8.0]):
        # 0.5 % of distance (the bound): the field grows with σ, so the 5 % and 95 %
        # contours are the contours at σ = lo and σ = hi
        np.testing.assert_allclose(band.km["p05"], lo.first_km, rtol=0.005)
        np.testing.assert_allclose(band.km["p95"], hi.first_km, rtol=0.005)
        assert np.all(band.km["p05"] < band.km["p50"]) and np.all(band.km["p50"] < band.km["p95"])


def _doc_of(spec, sigma):
    from mwreach.coverage.inputs import spec_to_doc

    d = spec_to_doc(spec)
    d["ground"] = {"sigma_ms_m": sigma, "eps_r": 15.0}
    d.pop("uncertainty", None)
    return d


def test_drawn_fields_equal_exact_fields_with_the_drawn_grounds():
    """The interpolated curves against the kernel run with the drawn conductivities themselves
    (every curve exact), for three draws of the demo's three uncertain grounds."""
    doc, spec = load_study_doc(DEMO)
    spec = parse_study(dict(doc, study=dict(doc["study"], bearing_step_deg=15.0)), DEMO)
    st = spec.station
    res = Study(spec).run(bands=False, interference=False)
    rad = res.radials
    settings = UncertaintySettings(draws=20, seed=3)
    from mwreach.coverage.contours import radial_fields
    from mwreach.coverage.ground import Zone

    for i, sig, f in draw_fields(spec, rad, settings, res.max_km):
        if i not in (0, 7, 19):
            continue
        gm = spec.ground
        zones = [Zone(z.name, Ground(sig.get(k, z.ground.sigma_ms_m), z.ground.eps_r, z.name),
                      z.geometry) for k, z in enumerate(gm.zones, 1)]
        exact_map = GroundMap(Ground(sig.get(0, gm.default.sigma_ms_m), gm.default.eps_r),
                              zones)
        exact = radial_fields(st.freq_khz, exact_map, st.lat, st.lon, rad.bearings_deg,
                              rad.e1km_mv_m, res.max_km, spec.step_km, spec.mixed_path,
                              spec.earth_k, dist_km=rad.dist_km)
        # 0.02 dB: four-point interpolation in ln σ between exact curves 0.8 s apart, and the
        # draws' sums in single precision
        np.testing.assert_allclose(f, exact.field_dbu, atol=0.02)


def _bands(spec, draws, seed):
    res = Study(spec).run(bands=False, interference=False)
    levels = [lv.field_mv_m for lv in spec.levels]
    return ground_bands(spec, res.radials, levels, res.max_km, UncertaintySettings(draws, seed))


def test_200_draws_agree_with_2000_for_one_uncertain_ground(demo_doc):
    """The demo with only its default ground uncertain (the zones exact)."""
    doc, _ = load_study_doc(DEMO)
    doc = copy.deepcopy(doc)
    doc["study"]["bearing_step_deg"] = 10.0
    spec = parse_study(doc, DEMO)
    spec = type(spec)(**{**spec.__dict__, "ground": GroundMap(
        spec.ground.default, [type(z)(z.name, z.ground, z.geometry) for z in spec.ground.zones],
        default_range=spec.ground.default_range)})
    for a, b in zip(_bands(spec, 200, 1), _bands(spec, 2000, 2)):
        for k in ("p05", "p50", "p95"):
            ok = np.isfinite(a.km[k]) & np.isfinite(b.km[k]) & (b.km[k] > 0)
            # 1 % of distance (the bound), different seeds
            np.testing.assert_allclose(a.km[k][ok], b.km[k][ok], rtol=0.01)


def test_200_draws_agree_with_2000_for_three_uncertain_grounds(demo_doc):
    """The whole uncertain demo (default ground and two zones). Per bearing, a 5 % point of 200
    draws over three independent grounds carries a sampling error of about 2 % of distance
    where the spread is wide (measured: up to 3.3 % against 20 000 draws over five seeds; the
    quantile's standard error is sqrt(p(1 − p)/N) divided by the density there), so bearings
    are held to 4 %; the areas, sums over all bearings, to 1 %."""
    doc, spec = load_study_doc(DEMO)
    spec = parse_study(dict(doc, study=dict(doc["study"], bearing_step_deg=10.0)), DEMO)
    for a, b in zip(_bands(spec, 200, 1), _bands(spec, 2000, 2)):
        for k in ("p05", "p50", "p95"):
            ok = np.isfinite(a.km[k]) & np.isfinite(b.km[k]) & (b.km[k] > 0)
            np.testing.assert_allclose(a.km[k][ok], b.km[k][ok], rtol=0.04)
            assert a.area_km2[k] == pytest.approx(b.area_km2[k], rel=0.01)


def test_outputs_carry_the_bands(tmp_path):
    out = tmp_path / "out"
    p = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "run", str(DEMO), "-o",
                        str(out)], capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    assert "ground uncertainty: area" in p.stdout
    rows = list(csv.DictReader(io.StringIO((out / "radials.csv").read_text(encoding="utf-8"))))
    for lv in ("5", "2", "0.5", "0.1"):
        lo, mid, hi = (float(rows[0][f"{lv}mV_m_{b}_km"]) for b in ("p05", "p50", "p95"))
        assert lo < mid < hi
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    lv = summary["levels"][0]
    assert lv["area_km2_p05"] < lv["area_km2_p50"] < lv["area_km2_p95"]
    assert 0.0 <= lv["community_goal_probability"] <= 1.0 and lv["community_goal"] == 0.9
    assert summary["uncertainty"]["draws"] == 200
    assert [g["ground"] for g in summary["uncertainty"]["grounds"]] == [
        "default ground", "Hollin uplands", "Sarnel valley"]
    gj = json.loads((out / "contours.geojson").read_text(encoding="utf-8"))
    bands = [f["properties"] for f in gj["features"] if "band" in f["properties"]]
    assert sorted({b["band"] for b in bands}) == ["p05", "p95"] and len(bands) == 8


@pytest.mark.parametrize("value, text", [
    ("[8.0, 2.0]", "sigma_range_ms_m must have lo <= hi (got [8, 2])"),
    ("[0.0, 8.0]", "sigma_range_ms_m lo must be"),
    ("4.0", "sigma_range_ms_m must be a list [lo, hi]"),
    ('"2-8"', "sigma_range_ms_m must be a list [lo, hi]"),
    ("[5.0, 8.0]", "must hold the conductivity 4 mS/m"),
    ("[2.0, nan]", "sigma_range_ms_m hi must be"),
])
def test_bad_ranges_one_line_exit_2(tmp_path, value, text):
    import shutil

    for f in DEMO.parent.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    study = tmp_path / DEMO.name
    s = study.read_text(encoding="utf-8").replace("sigma_range_ms_m = [2.0, 8.0]",
                                                  f"sigma_range_ms_m = {value}")
    study.write_text(s, encoding="utf-8")
    p = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "run", str(study), "-o",
                        str(tmp_path / "out")], capture_output=True, text=True)
    assert p.returncode == 2
    lines = p.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0] and "[ground]" in lines[0]


def test_bad_zone_range_names_the_feature(tmp_path):
    import shutil

    for f in DEMO.parent.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    zones = json.loads((tmp_path / "zones.geojson").read_text(encoding="utf-8"))
    zones["features"][0]["properties"]["conductivity_range_ms_m"] = [1.0, 0.25]
    (tmp_path / "zones.geojson").write_text(json.dumps(zones), encoding="utf-8")
    p = subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "run",
                        str(tmp_path / DEMO.name), "-o", str(tmp_path / "out")],
                       capture_output=True, text=True)
    assert p.returncode == 2
    line = p.stderr.strip()
    assert "conductivity_range_ms_m must have lo <= hi" in line and "zones.geojson" in line
    assert "feature 1" in line
