"""Golden outputs: the demo's run, the README's site search and fit give the same files.

A restructuring of the code must not change a single number. The demo's summary.json,
radials.csv, night.json, interference.csv, contours.geojson and contours.kml, the search's
candidates.csv, candidates.geojson and search.json, and the fit's fit.json and fit.csv are
compared, after removing what changes from run to run (creation time, elapsed time, version,
paths, worker count), with the SHA-256 digests in tests/golden/outputs.json.

When a change is meant to move results, regenerate the digests and say why in the commit:
    .venv/bin/python tests/test_golden.py
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import pathlib
import sys

import pytest

ROOT = pathlib.Path(__file__).parents[1]
DEMO = ROOT / "data" / "demo" / "quellmoor.toml"
DIGESTS = ROOT / "tests" / "golden" / "outputs.json"
#: keys whose values change from run to run and say nothing about the results
VOLATILE = {"created", "elapsed_s", "seconds_per_candidate", "mwreach_version", "study_file",
            "workers", "readings_file",
            "out_dir", "path", "plots"}
RUNS = {
    "run": (["run", str(DEMO), "--out", "{out}"],
            ("summary.json", "radials.csv", "night.json", "interference.csv", "contours.geojson",
             "contours.kml", "patterns.csv")),
    "search": (["search", str(DEMO), "--radius-km", "40", "--step-km", "3", "-o", "{out}"],
               ("candidates.csv", "candidates.geojson", "search.json")),
    "fit": (["fit", str(DEMO), str(DEMO.parent / "measurements.csv"), "-o", "{out}"],
            ("fit.json", "fit.csv")),
}


def _strip(obj):
    if isinstance(obj, dict):
        return {k: _strip(v) for k, v in obj.items() if k not in VOLATILE}
    if isinstance(obj, list):
        return [_strip(v) for v in obj]
    return obj


def digests(tmp: pathlib.Path) -> dict:
    from mwreach.coverage import cli

    out = {}
    for name, (argv, files) in RUNS.items():
        d = tmp / name
        with contextlib.redirect_stdout(io.StringIO()):
            assert cli.main([a.replace("{out}", str(d)) for a in argv]) == 0
        for f in files:
            text = (d / f).read_text(encoding="utf-8")
            if f.endswith((".json", ".geojson")):
                text = json.dumps(_strip(json.loads(text)), sort_keys=True)
            out[f"{name}/{f}"] = hashlib.sha256(text.encode()).hexdigest()
    return out


def test_outputs_equal_the_golden_digests(tmp_path):
    want = json.loads(DIGESTS.read_text())
    got = digests(tmp_path)
    changed = sorted(k for k in want if got.get(k) != want[k])
    assert not changed, f"outputs changed: {changed} (see this module's docstring)"
    assert set(got) == set(want)


if __name__ == "__main__":  # regenerate the digests
    import tempfile

    with tempfile.TemporaryDirectory() as t:
        DIGESTS.write_text(json.dumps(digests(pathlib.Path(t)), indent=1, sort_keys=True) + "\n")
    print(f"wrote {DIGESTS}", file=sys.stderr)
