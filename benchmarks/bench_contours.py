"""Contour polygons: the demo day study now (isolines of the polar field, contourpy) against an
earlier revision of the project (per-bearing polygons with 1° wedge tiles), measured in one run:

    .venv/bin/python benchmarks/bench_contours.py [--baseline REV]   (default REV: df9c5ab)

Target: the demo day study (361 bearings × 4 levels) within 10 % of the baseline's time, and the
polygon step itself reported. The baseline is checked out into a temporary git worktree and
timed in a subprocess with the same Python and packages; nothing of it is kept.
"""

from __future__ import annotations

import argparse
import pathlib
import subprocess
import sys
import tempfile
import textwrap

ROOT = pathlib.Path(__file__).parents[1]
DEMO = ROOT / "data" / "demo" / "quellmoor.toml"

TIMER = textwrap.dedent("""
    import sys, time
    sys.path.insert(0, sys.argv[1])
    from mwreach.coverage.study import Study
    study = Study.from_file(sys.argv[2])
    study.run(interference=False)
    best = []
    for _ in range(7):
        t0 = time.perf_counter()
        res = study.run(interference=False)
        best.append(time.perf_counter() - t0)
    print(min(best), res.radials.bearings_deg.size, len(res.contours))
""")


def _time_tree(src: pathlib.Path) -> tuple[float, int, int]:
    """Best of 7 warm demo day runs of the package whose folders are in ``src`` (on that tree's
    own demo study, which the other version may not read)."""
    with tempfile.TemporaryDirectory() as shim:
        pkg = pathlib.Path(shim) / "mwreach"
        pkg.mkdir()
        (pkg / "__init__.py").write_text("")
        (pkg / "coverage").symlink_to(src / "coverage")
        demo = src / "data" / "demo" / "quellmoor.toml"
        out = subprocess.run([sys.executable, "-c", TIMER, shim, str(demo)], check=True,
                             capture_output=True, text=True).stdout.split()
    return float(out[0]), int(out[1]), int(out[2])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--baseline", default="df9c5ab", help="git revision to compare with")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        wt = pathlib.Path(tmp) / "base"
        subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", str(wt),
                        args.baseline], check=True, capture_output=True)
        try:
            base = _time_tree(wt)
            now = _time_tree(ROOT)
            base2 = _time_tree(wt)  # again, so that drift of the machine shows
        finally:
            subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force", str(wt)],
                           check=True, capture_output=True)
    b = min(base[0], base2[0])
    print(f"demo day study, {now[1]} bearings × {now[2]} levels, best of 7 warm runs "
          "(the day run does not read the neighbours, so both trees' demos give the same job)")
    print(f"  baseline {args.baseline}: {b * 1e3:.0f} ms ({base[0] * 1e3:.0f} / {base2[0] * 1e3:.0f})")
    print(f"  now: {now[0] * 1e3:.0f} ms ({100 * (now[0] - b) / b:+.1f} %)")

    import numpy as np  # noqa: F401  (the polygon step alone, in this process)
    import time

    from mwreach.coverage import contours as C
    from mwreach.coverage.geodesy import local_projection
    from mwreach.coverage.study import Study

    study = Study.from_file(DEMO)
    res = study.run(interference=False)
    rad, spec = res.radials, study.spec
    proj = local_projection(spec.station.lat, spec.station.lon)
    t = []
    for _ in range(5):
        t0 = time.perf_counter()
        for lv in spec.levels:
            g = C.polar_region(rad.bearings_deg, rad.dist_km, rad.field_dbu,
                               float(C.mv_m_to_dbu(lv.field_mv_m)))
            C.contour_geometry(g, proj, spec.community.geometry)
        t.append(time.perf_counter() - t0)
    print(f"  of which contour polygons, areas and community share: {min(t) * 1e3:.1f} ms")


if __name__ == "__main__":
    main()
