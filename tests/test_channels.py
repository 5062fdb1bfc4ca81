"""Channel search: each channel's answers against full runs of the study moved to that channel,
the study's own channel against `mwreach run`, the same numbers on any number of workers, and
the command's refusals.

The reference for a channel is a full study run (Study.run) of the study rebuilt at that
frequency; tolerances are the issue's: maximum powers within 0.05 dB.
"""

import csv
import io
import json
import math
import pathlib
import subprocess
import sys

import numpy as np
import pytest

from mwreach.coverage.channels import band_channels, run_channels
from mwreach.coverage.inputs import load_study_doc, retune
from mwreach.coverage.study import Study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"


@pytest.fixture(scope="module")
def demo():
    return load_study_doc(DEMO)


@pytest.fixture(scope="module")
def near(demo):
    """The eleven channels around the demo's, where its neighbours are (1340–1440 kHz)."""
    doc, spec = demo
    return run_channels(spec, doc, 1340.0, 1440.0)


def _db(got, ref):
    if ref == 0.0 or got == 0.0:
        return 0.0 if got == ref else math.inf
    return 10 * math.log10(got / ref)


def _full_max(spec, period):
    mp = Study(spec).run(bearings=np.arange(0.0, 360.0, 5.0)).interference.max_power[period]
    return None if mp is None else mp["max_power_kw"]


def test_channels_on_the_raster_in_frequency_order(demo, near):
    doc, spec = demo
    assert [r.freq_khz for r in near.rows] == [1340.0 + 10 * k for k in range(11)]
    assert band_channels(spec, 530, 1700)[:2] == [530.0, 540.0]
    assert len(band_channels(spec, 530, 1700)) == 118  # (1700 − 530)/10 + 1
    assert band_channels(spec, 1391, 1419) == [1400.0, 1410.0]
    assert [r.freq_khz for r in near.rows if r.study_channel] == [1390.0]


def test_the_study_channel_agrees_with_a_run(demo, near):
    doc, spec = demo
    own = next(r for r in near.rows if r.study_channel)
    mp = Study(spec).run().interference.max_power
    for got, period in ((own.max_day_kw, "day"), (own.max_night_kw, "night")):
        assert _db(got, mp[period]["max_power_kw"]) == pytest.approx(0.0, abs=0.05)  # dB
        who = f"{mp[period]['limiting_neighbour']} ({mp[period]['check']})"
        assert (own.day_limited_by if period == "day" else own.night_limited_by) == who


def test_five_random_channels_equal_full_runs(demo, near):
    doc, spec = demo
    picks = np.random.default_rng(5).choice(len(near.rows), 5, replace=False)
    kinds = set()
    for k in picks:
        row = near.rows[int(k)]
        moved = retune(spec, doc, row.freq_khz)
        assert moved.station.freq_khz == row.freq_khz
        for got, period in ((row.max_day_kw, "day"), (row.max_night_kw, "night")):
            ref = _full_max(moved, period)
            if got is None or ref is None:
                assert got is ref is None
            else:
                assert _db(got, ref) == pytest.approx(0.0, abs=0.05)  # dB, the bound
        kinds |= {row.day_limit_kind, row.night_limit_kind}
    assert len(kinds) >= 2  # the sample meets more than one kind of limit


def test_retune_rebuilds_towers_given_in_metres(demo):
    doc, spec = demo
    a = retune(spec, doc, 700.0).station.antenna.elements[0].tower.height_deg
    b = spec.station.antenna.elements[0].tower.height_deg
    # 62 m is 360·62/λ degrees: λ = c/f (c = 299 792.458 km/s, SI definition)
    assert a == pytest.approx(360 * 62.0 / (299_792.458 / 700.0), rel=1e-9)
    assert b == pytest.approx(360 * 62.0 / (299_792.458 / 1390.0), rel=1e-9)
    with pytest.raises(ValueError, match="off the 10 kHz raster.*1390 and 1400 kHz"):
        retune(spec, doc, 1395.0)


def test_same_numbers_on_two_processes(demo, near):
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    doc, spec = demo
    with ProcessPoolExecutor(2, mp_context=mp.get_context("spawn")) as pool:
        two = run_channels(spec, doc, 1340.0, 1440.0, executor=pool, workers=2)
    assert two.rows == near.rows  # bit for bit


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "mwreach.coverage.cli", "channels", *args],
                          capture_output=True, text=True)


@pytest.mark.parametrize("extra, text", [
    (["--from", "1500", "--to", "1400"], "--from (1500 kHz) must not be above --to (1400 kHz)"),
    (["--from", "400"], "--from must be a frequency in 525–1705 kHz"),
    (["--to", "1800"], "--to must be a frequency in 525–1705 kHz"),
    (["--from", "nan"], "--from must be a frequency in 525–1705 kHz"),
    (["--workers", "0"], "--workers must be 1–"),
])
def test_bad_options_one_line_exit_2(tmp_path, extra, text):
    p = _cli(str(DEMO), "-o", str(tmp_path / "out"), *extra)
    assert p.returncode == 2
    lines = p.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0]
    assert not (tmp_path / "out").exists()


def test_command_writes_the_set(tmp_path):
    out = tmp_path / "out"
    p = _cli(str(DEMO), "-o", str(out), "--from", "1370", "--to", "1410", "--workers", "1")
    assert p.returncode == 0, p.stderr
    rows = list(csv.DictReader(io.StringIO((out / "channels.csv").read_text(encoding="utf-8"))))
    assert [float(r["freq_khz"]) for r in rows] == [1370.0, 1380.0, 1390.0, 1400.0, 1410.0]
    for col in ("freq_khz", "max_day_kw", "max_night_kw", "day_limited_by", "night_limited_by",
                "community_share"):
        assert col in rows[0]
    summary = json.loads((out / "channels.json").read_text(encoding="utf-8"))
    assert len(summary["channels"]) == 5 and summary["raster_khz"] == 10.0
    assert sorted(summary["ranked_by_max_day_power"]) == [1370.0, 1380.0, 1390.0, 1400.0, 1410.0]
    assert (out / "channels.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "Planning estimate only" in p.stdout
