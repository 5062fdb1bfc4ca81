"""RF exposure screening: near fields of the towers' currents and the reference levels."""

import json

import numpy as np
import pytest
from scipy import integrate

from mwreach.coverage import cli
from mwreach.coverage import exposure as ex
from mwreach.coverage.antenna import ETA0, Array, Element, Tower

C0 = 299_792_458.0
POINTS = [(1.0, 2.0), (3.0, 0.5), (5.0, 2.0), (8.0, 40.0), (12.0, 70.0), (20.0, 30.0),
          (35.0, 2.0), (50.0, 2.0), (120.0, 10.0), (300.0, 1.5)]  # (ρ, z) [m]


@pytest.mark.parametrize("height_deg", [60.0, 90.0, 140.0])
def test_near_field_equals_schelkunoffs_closed_form(height_deg):
    # a tower without top loading: the sum of current elements (composite Gauss–Legendre)
    # against Schelkunoff's closed form at 10 points from 1 m to 300 m; both are exact for
    # the sinusoidal current; the quadrature's error is at most 4e-6 relative 1 m from a 140°
    # tower (2.4 m panels against a 1 m wide kernel) and below 1e-9 from 3 m on: 2e-5
    arr = Array.single(Tower(height_deg))
    f = 1000.0
    cur = ex.tower_currents(arr, 1.0)[0]
    for rho, z in POINTS:
        e, h = ex.near_field(arr, f, 1.0, rho, 0.0, z)
        er, ez, hp = ex.schelkunoff_field(height_deg, f, cur, rho, z)
        assert float(e) == pytest.approx(float(np.hypot(er, ez)), rel=2e-5), (rho, z)
        assert float(h) == pytest.approx(float(hp), rel=2e-5), (rho, z)


def test_top_loaded_tower_against_adaptive_quadrature():
    # no closed form with top loading: scipy.integrate.quad (adaptive) of the same element
    # fields along the tower and its image, at 4 points; 1e-6 relative
    t = Tower(70.0, top_loading_deg=30.0)
    arr = Array.single(t)
    f = 1200.0
    k = 2 * np.pi * f * 1e3 / C0
    a, b = np.radians(70.0), np.radians(30.0)
    h = a / k
    cur = ex.tower_currents(arr, 1.0)[0]
    for rho, z in [(2.0, 2.0), (10.0, 20.0), (30.0, 60.0), (80.0, 2.0)]:
        def comp(zp, part):
            r = np.hypot(rho, z - zp)
            c, s = (z - zp) / r, rho / r
            ph = np.exp(-1j * k * r)
            i = cur * np.sin(a + b - k * abs(zp))
            er = ETA0 * i / (2 * np.pi * r ** 2) * c * (1 + 1 / (1j * k * r)) * ph
            et = 1j * ETA0 * k * i / (4 * np.pi * r) * s * (1 + 1 / (1j * k * r)
                                                            - 1 / (k * r) ** 2) * ph
            hp = 1j * k * i / (4 * np.pi * r) * s * (1 + 1 / (1j * k * r)) * ph
            return {"rho": er * s + et * c, "z": er * c - et * s, "h": hp}[part]

        def q(part):
            re = integrate.quad(lambda zp: comp(zp, part).real, -h, h, points=[0.0, z],
                                limit=400, epsabs=1e-14, epsrel=1e-10)[0]
            im = integrate.quad(lambda zp: comp(zp, part).imag, -h, h, points=[0.0, z],
                                limit=400, epsabs=1e-14, epsrel=1e-10)[0]
            return complex(re, im)

        e, hh = ex.near_field(arr, f, 1.0, rho, 0.0, z)
        assert float(e) == pytest.approx(float(np.hypot(abs(q("rho")), abs(q("z")))), rel=1e-6)
        assert float(hh) == pytest.approx(abs(q("h")), rel=1e-6)


@pytest.mark.parametrize("arr, n_lambda", [
    (Array.single(Tower(90.0)), 10),
    (Array.single(Tower(60.0, top_loading_deg=25.0)), 10),
    # an array 90° wide: at 10 λ the towers still see the point from bearings 3° apart, which
    # moves a steep part of the pattern by 0.7 dB (measured; 0.24 dB at 30 λ, 0.07 at 100 λ:
    # it falls as 1/r, so it is the geometry, not the fields)
    (Array((Element(Tower(90.0)), Element(Tower(90.0), 0.8, 100.0, 90.0, 30.0))), 100),
])
def test_far_away_the_field_is_the_antenna_models_inverse_distance_field(arr, n_lambda):
    # far out the near-field terms have died away: |E| within 0.1 dB of the antenna model's
    # field at 1 km scaled by 1/r, on the ground, in four directions
    f = 1000.0
    lam = C0 / (f * 1e3)
    r = n_lambda * lam
    for az in (0.0, 75.0, 180.0, 290.0):
        t = np.radians(az)
        e, _ = ex.near_field(arr, f, 5.0, r * np.sin(t), r * np.cos(t), 0.0)
        want = float(arr.field_mv_m(az, 0.0, 5.0)) / r  # mV/m at 1 km = V/m at 1 m
        assert 20 * np.log10(float(e) / want) == pytest.approx(0.0, abs=0.1)  # dB


@pytest.mark.parametrize("standard, f_khz, e, h", [
    ("fcc-occupational", 1000.0, 614.0, 1.63),    # 47 CFR 1.1310 Table 1 (A), 0.3–3 MHz (read)
    ("fcc-occupational", 5000.0, 1842 / 5, 4.89 / 5),  # 3–30 MHz: 1842/f, 4.89/f (read)
    ("fcc-general", 1000.0, 614.0, 1.63),         # Table 1 (B), 0.3–1.34 MHz (from memory)
    ("fcc-general", 1500.0, 824 / 1.5, 2.19 / 1.5),  # 1.34–30 MHz: 824/f, 2.19/f (from memory)
    # ICNIRP 2010 Table (3 kHz–10 MHz), as reproduced in a handbook (read): E 83 V/m and
    # B 27 µT public, 170 V/m and 100 µT occupational; H = B/μ0 (CODATA 2018 μ0)
    ("icnirp2010-public", 1000.0, 83.0, 27e-6 / 1.25663706212e-6),
    ("icnirp2010-occupational", 1000.0, 170.0, 100e-6 / 1.25663706212e-6),
])
def test_reference_levels(standard, f_khz, e, h):
    got = ex.reference_levels(standard, f_khz)
    assert got[0] == pytest.approx(e, rel=1e-12) and got[1] == pytest.approx(h, rel=1e-12)
    assert ("1.1310" in got[2]) or ("ICNIRP 2010" in got[2])


MU0 = 1.25663706212e-6  # CODATA 2018


@pytest.mark.parametrize("standard, f_khz, e, h", [
    # ICNIRP 2020 local exposure (6 min), 0.1–30 MHz (read, as reproduced in a
    # bioelectromagnetism handbook, Table 7.8): public 671/f^0.7 V/m, 4.9/f A/m; occupational
    # 1504/f^0.7, 10.8/f (f in MHz)
    ("icnirp2020-public-local", 1500.0, 671 / 1.5 ** 0.7, 4.9 / 1.5),
    ("icnirp2020-occupational-local", 1000.0, 1504.0, 10.8),
    # ICNIRP 2020 whole body (30 min) (from memory): public 300/f^0.7, 2.2/f; occupational
    # 660/f^0.7, 4.9/f; below 10 MHz the ICNIRP 2010 nerve-stimulation levels (read: 83 V/m,
    # 27 µT public; 170 V/m, 100 µT occupational) apply too, and the lower of each counts
    ("icnirp2020-public", 1000.0, 83.0, 2.2),
    ("icnirp2020-occupational", 1000.0, 170.0, 4.9),
    ("icnirp2020-public", 20000.0, 300 / 20 ** 0.7, 2.2 / 20),  # above 10 MHz: 2020 alone
    # ICNIRP 1998 Tables 6–7 (from memory): public 87 V/m to 1 MHz, then 87/f^0.5; H 0.73/f;
    # occupational 610 V/m to 1 MHz, then 610/f; H 1.6/f
    ("icnirp1998-public", 800.0, 87.0, 0.73 / 0.8),
    ("icnirp1998-public", 1600.0, 87 / 1.6 ** 0.5, 0.73 / 1.6),
    ("icnirp1998-occupational", 1600.0, 610 / 1.6, 1.6 / 1.6),
])
def test_icnirp_reference_levels(standard, f_khz, e, h):
    got = ex.reference_levels(standard, f_khz)
    assert got[0] == pytest.approx(e, rel=1e-12) and got[1] == pytest.approx(h, rel=1e-12)
    assert "ICNIRP" in got[2] and ("read" in got[2] or "from memory" in got[2])


def test_fcc_general_e_at_the_top_of_the_band():
    # OET Bulletin 65, as quoted (read): 614 V/m to 1.34 MHz, "a bit under 482 V/m" at 1.71 MHz
    assert ex.reference_levels("fcc-general", 1340.0)[0] == pytest.approx(614.0, abs=1.0)
    assert 481.0 < ex.reference_levels("fcc-general", 1710.0)[0] < 482.0


def test_a_standard_expands_to_both_populations():
    assert ex.expand_standards(["icnirp2020"]) == ["icnirp2020-public",
                                                   "icnirp2020-occupational"]
    assert ex.expand_standards(["fcc", "fcc-general"]) == ["fcc-general", "fcc-occupational"]
    with pytest.raises(ValueError, match="standard must be one of fcc, icnirp2020"):
        ex.expand_standards(["nonesuch"])


def test_the_study_picks_the_standard_and_height(tmp_path, capsys):
    import shutil
    from pathlib import Path

    demo = Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
    for f in demo.parent.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    study = tmp_path / "quellmoor.toml"
    study.write_text(study.read_text(encoding="utf-8")
                     + '\n[exposure]\nstandard = "icnirp2020"\nheight_m = 1.5\n',
                     encoding="utf-8")
    out = tmp_path / "ex"
    assert cli.main(["exposure", str(study), "-o", str(out)]) == 0
    data = json.loads((out / "exposure.json").read_text())
    assert list(data["standards"]) == ["icnirp2020-public", "icnirp2020-occupational"]
    assert data["height_m"] == 1.5
    # the command line still chooses when given
    assert cli.main(["exposure", str(study), "-o", str(tmp_path / "ex2"), "--standard",
                     "fcc-general", "--height-m", "2"]) == 0
    data = json.loads((tmp_path / "ex2" / "exposure.json").read_text())
    assert list(data["standards"]) == ["fcc-general"] and data["height_m"] == 2.0


@pytest.mark.parametrize("table, needle", [
    ('standard = "nonesuch"', "standard must be one of fcc, icnirp2020"),
    ("standard = 3", "standard must be a name or a list of names"),
    ("height_m = 0", "height_m must be > 0"),
    ("height_m = -1", "height_m must be > 0"),
    ('colour = "red"', "unknown key"),
])
def test_bad_exposure_table_is_one_line_exit_2(tmp_path, capsys, table, needle):
    import shutil
    from pathlib import Path

    demo = Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
    for f in demo.parent.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    study = tmp_path / "quellmoor.toml"
    study.write_text(study.read_text(encoding="utf-8") + f"\n[exposure]\n{table}\n",
                     encoding="utf-8")
    assert cli.main(["exposure", str(study), "-o", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert needle in err and "[exposure]" in err and err.count("\n") == 1
    assert not (tmp_path / "o").exists()


def test_a_radial_through_another_tower_is_not_screened_at_the_wire():
    """The demo's night array: the 270° radial passes over the west tower, where the thin-wire
    kernel is singular; points within 1 m of a tower are not screened (fields at 1 m from
    either tower are about 10 V/m at 0.5 kW, far below every level)."""
    from pathlib import Path

    from mwreach.coverage.inputs import load_study

    spec = load_study(Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml")
    data = ex.screening(spec, "night", 2.0, ["fcc"], max_m=100.0, grid=False, profile=False)
    for v in data["standards"].values():
        assert v["largest_distance_m"] == 0.0


def test_screening_boundary_holds_every_point_beyond_it_below_the_levels():
    # 50 kW into a short (40°) tower: the fields near it exceed the occupational levels; the
    # screening distance on each radial is where they stop doing so for good
    arr = Array.single(Tower(40.0))
    e_lim, h_lim, _ = ex.reference_levels("fcc-occupational", 800.0)
    b, d, e, h = ex.fields_along_bearings(arr, 800.0, 50.0, 2.0, bearings=[0.0, 90.0],
                                         max_m=100.0, step_m=0.5)
    dist = ex.screening_distances(d, e, h, e_lim, h_lim)
    assert np.all(dist > 0.5) and np.all(dist < 100.0)
    for i, di in enumerate(dist):
        beyond = d >= di
        assert np.all(e[i][beyond] <= e_lim) and np.all(h[i][beyond] <= h_lim)
        assert (e[i][d == di - 0.5] > e_lim) | (h[i][d == di - 0.5] > h_lim)


def test_exposure_command_writes_its_screening_with_the_caution(tmp_path, capsys):
    from pathlib import Path

    demo = Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
    out = tmp_path / "ex"
    assert cli.main(["exposure", str(demo), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Screening estimate only" in text
    data = json.loads((out / "exposure.json").read_text())
    assert "qualified person" in data["caution"]
    for name in ("fcc-general", "fcc-occupational"):
        assert len(data["standards"][name]["bearings"]) == 72  # every 5°
    pts = data["profile"]["points"]
    assert pts[0]["distance_m"] == 1.0 and pts[-1]["distance_m"] == 500.0
    assert len(data["grid"]["e_v_m"]) == len(data["grid"]["y_m"]) == 41
    assert data["grid"]["e_v_m"][20][20] is None  # the tower's own point is not screened
    png = (out / "exposure.png").read_bytes()
    assert png.startswith(b"\x89PNG") and len(png) > 10_000


@pytest.mark.parametrize("argv, needle", [
    (["--height-m", "0"], "--height-m must be > 0"),
    (["--height-m", "-2"], "--height-m must be > 0"),
    (["--standard", "nonesuch"], "standard must be one of"),
])
def test_exposure_bad_input_is_one_line_exit_2(tmp_path, capsys, argv, needle):
    from pathlib import Path

    demo = Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
    assert cli.main(["exposure", str(demo), "-o", str(tmp_path / "o"), *argv]) == 2
    err = capsys.readouterr().err
    assert needle in err and err.count("\n") == 1


def test_a_study_without_towers_is_one_line_exit_2(tmp_path, capsys):
    import shutil
    from pathlib import Path

    demo = Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"
    for f in demo.parent.iterdir():
        if f.is_file():
            shutil.copy(f, tmp_path / f.name)
    text = demo.read_text(encoding="utf-8")
    text = text[:text.index("[[antenna.tower]]")] + text[text.index("# Night:"):]
    study = tmp_path / "notower.toml"
    study.write_text(text, encoding="utf-8")
    assert cli.main(["exposure", str(study), "-o", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert "missing key 'tower' in [antenna]" in err and err.count("\n") == 1
