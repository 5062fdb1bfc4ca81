"""Command line: ``mwreach field | antenna | run | sky | sheet | gui``.

Errors in user input exit with status 2 and a one-line message on stderr. Qt is imported only by
the ``gui`` and ``sheet`` commands.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import pathlib
import sys

# numpy and the core load inside the commands (and inside main's handling of Ctrl-C), so that
# starting up is quick and an interrupt while starting is one line, not a traceback


def check_finite(*args, **kwargs):
    from .validate import check_finite as check

    return check(*args, **kwargs)

__all__ = ["main", "EXIT_BAD_INPUT", "EXIT_VIOLATION"]


class UsageError(Exception):
    """A mistake in what the user typed: printed as one line, exit status 2."""


def _ground_from_args(args):
    from .ground import SIGMA_RANGE_MS_M, EPS_R_RANGE, Ground, ground_class

    if args.ground:
        if args.sigma_ms_m is not None or args.eps_r is not None:
            raise UsageError("give either --ground or --sigma-ms-m/--eps-r, not both")
        return ground_class(args.ground.lower())
    if args.sigma_ms_m is None or args.eps_r is None:
        raise UsageError("give --ground NAME or both --sigma-ms-m and --eps-r")
    return Ground(check_finite("--sigma-ms-m", args.sigma_ms_m, *SIGMA_RANGE_MS_M),
                  check_finite("--eps-r", args.eps_r, *EPS_R_RANGE))


def _freq(args, low_high=None):
    from .groundwave import FREQ_RANGE_KHZ

    return check_finite("--freq-khz", args.freq_khz, *(low_high or FREQ_RANGE_KHZ))


def _cmd_field(args) -> int:
    import numpy as np

    from . import groundwave as gw

    ground = _ground_from_args(args)
    freq = _freq(args)
    earth_k = check_finite("--earth-k", args.earth_k, *gw.EARTH_K_RANGE)
    lam = gw.C0 / (freq * 1e3) / 1e3  # one wavelength [km]: the method's shortest distance
    km = np.array([check_finite("--km", d, lam, round(gw.MAX_DIST_KM, 1))
                   for d in args.km])
    e1 = check_finite("--e1km-mv-m", args.e1km_mv_m, 0.0, 1e6, low_open=True)
    m = gw.model(freq, ground, earth_k)
    att = m.attenuation(km)
    fld = e1 / km * np.abs(att)
    rows = [
        {
            "km": float(d),
            "field_mv_m": float(f),
            "field_dbu": float(gw.mv_m_to_dbu(f)),
            "attenuation_db": float(-20 * np.log10(abs(a))),
        }
        for d, f, a in zip(km, fld, att)
    ]
    if args.json:
        print(
            json.dumps(
                {
                    "freq_khz": m.freq_khz,
                    "sigma_ms_m": ground.sigma_ms_m,
                    "eps_r": ground.eps_r,
                    "earth_k": m.earth_k,
                    "e1km_mv_m": e1,
                    "points": rows,
                },
                indent=1,
            )
        )
        return 0
    print(
        f"Ground wave, {m.freq_khz:g} kHz, {ground.label()}, K = {m.earth_k:.4g}, "
        f"{e1:g} mV/m at 1 km unattenuated"
    )
    print(f"{'km':>10} {'mV/m':>12} {'dBµV/m':>8} {'atten. dB':>10}")
    for r in rows:
        print(
            f"{r['km']:10.2f} {r['field_mv_m']:12.5g} {r['field_dbu']:8.2f} "
            f"{r['attenuation_db']:10.2f}"
        )
    return 0


def _cmd_antenna(args) -> int:
    import numpy as np

    from .antenna import HEIGHT_RANGE_DEG, Array, Tower, height_m
    from .inputs import facility_from_table, read_toml
    from .pattern import StandardPattern

    freq = _freq(args)
    power = check_finite("--power-kw", args.power_kw, 0.0, 1e4, low_open=True)
    elev = check_finite("--elevation-deg", args.elevation_deg, 0.0, 90.0)
    augmentations = ()
    if args.array:
        if args.height_deg is not None or args.height_m is not None:
            raise UsageError("give --array FILE or a single tower's height, not both")
        fac = facility_from_table(read_toml(args.array, "array file"), freq, args.array)
        array, augmentations = fac.array, fac.augmentations
    else:
        if (args.height_deg is None) == (args.height_m is None):
            raise UsageError("give exactly one of --height-deg, --height-m or --array")
        if args.loss_ohm is not None and args.efficiency is not None:
            raise UsageError("give --loss-ohm or --efficiency, not both")
        loss = dict(
            loss_ohm=0.0 if args.loss_ohm is None else check_finite("--loss-ohm", args.loss_ohm,
                                                                    0.0, 1e4),
            efficiency=None if args.efficiency is None else check_finite(
                "--efficiency", args.efficiency, 0.0, 1.0, low_open=True))
        if args.height_deg is not None:
            tower = Tower(check_finite("--height-deg", args.height_deg, *HEIGHT_RANGE_DEG), **loss)
        else:
            tower = Tower.from_height_m(check_finite("--height-m", args.height_m, 0.0, 1000.0,
                                                     low_open=True), freq, **loss)
        array = Array.single(tower)
    args.freq_khz, args.power_kw = freq, power
    summ = array.horizontal_summary(args.power_kw)
    azimuths = np.arange(360.0)
    pattern = array.field_mv_m(azimuths, elev, args.power_kw)
    single = len(array.elements) == 1
    std = None
    if not single:  # 47 CFR 73.150: the standard pattern at this power, with the augmentations
        try:
            std = StandardPattern(array, args.power_kw, augmentations)
        except ValueError as exc:
            raise ValueError(f"{exc} in {args.array}") from None
    out = {
        "freq_khz": args.freq_khz,
        "power_kw": args.power_kw,
        "elevation_deg": elev,
        "towers": len(array.elements),
        "e1km_mv_m": summ["rms_mv_m"],
        "max_mv_m": summ["max_mv_m"],
        "max_azimuth_deg": summ["max_azimuth_deg"],
        "min_mv_m": summ["min_mv_m"],
        "min_azimuth_deg": summ["min_azimuth_deg"],
        "radiated_power_kw": array.radiated_power_kw(args.power_kw),
        "radiation_resistance_ohm": (
            array.elements[0].tower.radiation_resistance_ohm if single else None
        ),
        "pattern_mv_m": [float(v) for v in pattern],
        "rms_mv_m": float(array.rms_mv_m(args.power_kw, elev)),
        "standard_pattern_mv_m": (None if std is None else
                                  [float(v) for v in std.field_mv_m(azimuths, elev,
                                                                    args.power_kw)]),
        "standard_rms_mv_m": None if std is None else std.rms_mv_m(args.power_kw, elev),
        "augmentations": len(augmentations),
    }
    if args.json:
        print(json.dumps(out, indent=1))
        return 0
    print(f"Antenna at {args.freq_khz:g} kHz, {args.power_kw:g} kW into the antenna, "
          f"{len(array.elements)} tower(s)")
    if single:
        t = array.elements[0].tower
        print(f"  height               {t.height_deg:.1f}° ({float(height_m(t.height_deg, args.freq_khz)):.1f} m)")
        where = "base" if t.base_current_factor < 1 else "current loop"
        print(f"  radiation resistance {t.radiation_resistance_ohm:.2f} Ω at the {where}")
    print(f"  radiated power       {out['radiated_power_kw']:.3f} kW")
    print(f"  RMS field at 1 km    {out['e1km_mv_m']:.1f} mV/m (horizontal plane)")
    print(f"  maximum              {out['max_mv_m']:.1f} mV/m at {out['max_azimuth_deg']:.1f}°")
    print(f"  minimum              {out['min_mv_m']:.2f} mV/m at {out['min_azimuth_deg']:.1f}°")
    if std is not None:
        at = f"at {elev:g}° elevation" if elev else "horizontal plane"
        print(f"  standard pattern     RMS {out['standard_rms_mv_m']:.1f} mV/m ({at}; "
              f"47 CFR 73.150, Q = {float(std.q_mv_m(elev)):.2f} mV/m from the "
              f"{'E_rss' if std.q_branch() == 'rss' else 'power'} term"
              + (f", {len(augmentations)} augmentation(s)" if augmentations else "") + ")")
        e_th = pattern
        e_std = np.asarray(out["standard_pattern_mv_m"])
        print(f"  {'azimuth':>8} {'theoretical':>12} {'standard':>10}   [mV/m at 1 km, {at}]")
        for az in range(0, 360, 30):
            print(f"  {az:>7}° {e_th[az]:>12.1f} {e_std[az]:>10.1f}")
    return 0


class _Progress:
    """A one-line progress bar on a terminal; silent when stderr is not a terminal."""

    def __init__(self, label: str, stream=None):
        self.stream = stream or sys.stderr
        self.label = label
        self.active = self.stream.isatty()
        self._last = -1

    def __call__(self, done: int, total: int):
        if not self.active:
            return
        pct = int(100 * done / max(total, 1))
        if pct == self._last:
            return
        self._last = pct
        bar = "#" * (pct // 4)
        self.stream.write(f"\r{self.label} [{bar:<25}] {pct:3d}%")
        if done >= total:
            self.stream.write("\n")
        self.stream.flush()


def _cmd_run(args) -> int:
    from .export import write_outputs
    from .report import describe_period, people_parts, people_text
    from .station import period_rows
    from .study import Study

    from .export import OUTPUT_NAMES
    from .safefiles import refuse_overwriting_inputs, writable_folder

    study = Study.from_file(args.study)
    refuse_overwriting_inputs(args.out, OUTPUT_NAMES, study.spec.input_files)
    writable_folder(args.out)  # fail before the computation, not after it
    result = study.run(progress=_Progress("day ground wave"))
    files = write_outputs(result, args.out)
    st = result.spec.station
    print(f"{result.spec.title}")
    print(f"{st.name}: {st.freq_khz:g} kHz, {st.power_day_kw:g} kW day, "
          f"{result.antenna_summary['rms_mv_m']:.1f} mV/m RMS at 1 km, "
          f"site {st.lat:.5f}, {st.lon:.5f}")
    for row in period_rows(st):
        print(f"  {describe_period(row)}")
    for a, b in result.spec.ground.overlaps:
        print(f"note: ground zones '{a}' and '{b}' overlap; '{b}' (later) is used there")
    for note in result.spec.input_notes:
        print(f"note: {note}")
    people = result.population is not None
    print(f"{'contour':<24} {'min km':>8} {'mean km':>8} {'max km':>8} {'area km²':>10} "
          f"{'community':>9}" + (f" {'people':>10}" if people else ""))
    for row in result.level_rows():
        fmt = lambda v: "—" if v is None else f"{v:.1f}"  # noqa: E731
        share = "—" if row["community_share"] is None else f"{100 * row['community_share']:.0f} %"
        print(f"{row['label']:<24} {fmt(row['min_km']):>8} {fmt(row['mean_km']):>8} "
              f"{fmt(row['max_km']):>8} {row['area_km2']:>10.0f} {share:>9}"
              + (f" {people_text(row['population']):>10}" if people else ""))
        if "area_km2_p05" in row:  # the ground draws' 5 %, 50 % and 95 % contours
            goal = ""
            if row.get("community_goal") is not None:
                goal = (f"; community share ≥ {100 * row['community_goal']:.0f} % in "
                        f"{100 * row['community_goal_probability']:.0f} % of draws")
            print(f"  ground uncertainty: area {row['area_km2_p05']:.0f} / "
                  f"{row['area_km2_p50']:.0f} / {row['area_km2_p95']:.0f} km² at the 5 / 50 / "
                  f"95 % contours{goal}")
        if row["radials_with_further_crossings"]:
            print(f"  {row['radials_with_further_crossings']} radial(s) cross this level again "
                  "further out (field recovers over water); see radials.csv")
    if result.bands:
        u = result.spec.uncertainty
        print(f"ground uncertainty: {u.draws} draws (seed {u.seed}) over the conductivity "
              "ranges; the 5 %–95 % contours are in radials.csv and contours.geojson")
    if people:
        pop = result.population
        extra = people_parts(pop)
        print(f"people ({pathlib.Path(pop['source']).name}, '{pop['property']}'): "
              + "; ".join(extra + [f"layer total {people_text(pop['total'])}"]))
    if result.interference is not None:
        _print_interference(result)
    print(f"{len(result.radials.bearings_deg)} radials in {result.elapsed_s:.2f} s; wrote "
          + ", ".join(str(f) for f in files))
    print("Planning estimate only: filings must follow local rules and be checked by a "
          "licensed engineer.")
    if args.fail_on_violation and result.interference is not None:
        failed = [r for r in result.interference.neighbour_summary() if not r["passed"]]
        if failed:
            print(f"mwreach run: {len(failed)} protection check(s) fail "
                  f"(--fail-on-violation): exit status 3", file=sys.stderr)
            return EXIT_VIOLATION
    return 0


def _print_interference(result) -> None:
    import numpy as np

    inter = result.interference
    n = inter.night
    method = "47 CFR 73.190" if inter.settings.method == "cfr" else "ITU-R P.1147"
    if n is not None:
        print(f"Night ({method}, {inter.settings.percent} % sky wave, "
              f"RSS {inter.settings.exclusion_percent} % exclusion), {n.power_kw:g} kW:")
        reach = n.contour_km[np.isfinite(n.contour_km)]
        span = f"{reach.min():.1f}–{reach.max():.1f} km" if reach.size else "not reached"
        print(f"  night limit {n.limit_mv_m.min():.2f}–{n.limit_mv_m.max():.2f} mV/m; night "
              f"service contour {span}, {n.area_km2:.0f} km²")
    summary = inter.neighbour_summary()
    if not summary:
        print("  no neighbour with a protection ratio or overlap rule: no checks")
    width = max([20] + [len(r["neighbour"]) for r in summary])
    if summary:
        print(f"  {'neighbour':<{width}} {'check':<18} {'offset':>6} {'D/U dB':>7} "
              f"{'worst margin':>16}  by")
    from .report import summary_cells

    for row in summary:
        c = summary_cells(row)
        flag = "" if row["passed"] else "  FAILS"
        print(f"  {row['neighbour']:<{width}} {row['kind']:<18} {c['offset']:>6} {c['ratio']:>7} "
              f"{c['value']:>16}  {c['by']}{flag}")
    from .report import describe_max_power

    for period, mp in inter.max_power.items():
        print("  " + describe_max_power(period, mp))
    for note in inter.notes:
        print(f"  note: {note}")


MAX_HOPS = 20  # the longest path either method covers (12 000 km) needs fewer than 10 hops


def _cmd_sky(args) -> int:
    from .geodesy import check_site
    from .skywave import METHOD_DISTANCE_KM, METHOD_FREQ_KHZ, sky_field_dbu, sky_path

    method = args.method
    freq = _freq(args, METHOD_FREQ_KHZ[method])
    tx = check_site(*args.from_, where="--from", names=("--from LAT", "--from LON"))
    rx = check_site(*args.to, where="--to", names=("--to LAT", "--to LON"))
    if args.hops is not None and not 1 <= args.hops <= MAX_HOPS:
        raise UsageError(f"--hops must be 1–{MAX_HOPS} (got {args.hops})")
    height = check_finite("--height-km", args.height_km, 50.0, 500.0)
    path = sky_path(tx[0], tx[1], rx[0], rx[1], hops=args.hops, height_km=height,
                    geometry="cfr" if method == "cfr" else "geodesic")
    lo, hi = METHOD_DISTANCE_KM[method]
    d = float(path.distance_km)
    if not lo <= d <= hi:
        raise UsageError(f"the path is {d:.1f} km long; the {_method_name(method)} method covers "
                         f"{lo:g}–{hi:g} km")
    ref = 100.0 if args.method == "cfr" else 300.0
    e = ref if args.e1km_mv_m is None else check_finite("--e1km-mv-m", args.e1km_mv_m, 0.0, 1e6,
                                                        low_open=True)
    args.freq_khz = freq
    kw = dict(freq_khz=freq, tx=tx, rx=rx)
    f50 = float(sky_field_dbu(path, e, args.method, 50, **kw))
    f10 = float(sky_field_dbu(path, e, args.method, 10, **kw))
    out = {
        "method": args.method, "freq_khz": args.freq_khz, "e1km_mv_m": e,
        "distance_km": float(path.distance_km), "azimuth_deg": float(path.azimuth_deg),
        "slant_km": float(path.slant_km), "midpoint_lat": float(path.mid_lat),
        "midpoint_lon": float(path.mid_lon),
        "midpoint_geomagnetic_lat_deg": float(path.geomagnetic_lat_deg),
        "hops": int(path.hops), "departure_deg": float(path.departure_deg),
        "field_50_dbu": f50, "field_10_dbu": f10,
        "field_50_mv_m": 10 ** (f50 / 20) / 1e3, "field_10_mv_m": 10 ** (f10 / 20) / 1e3,
    }
    if args.json:
        print(json.dumps(out, indent=1))
        return 0
    name = _method_name(args.method)
    given = ("given" if args.e1km_mv_m is not None
             else "the method's reference; --e1km-mv-m sets another")
    print(f"Sky wave ({name}), {args.freq_khz:g} kHz, {e:g} mV/m at 1 km toward the receiver "
          f"({given})")
    print(f"  distance {out['distance_km']:.1f} km, slant {out['slant_km']:.1f} km, "
          f"azimuth {out['azimuth_deg']:.1f}°, {out['hops']} hop(s), departure "
          f"{out['departure_deg']:.1f}°")
    print(f"  midpoint {out['midpoint_lat']:.3f}, {out['midpoint_lon']:.3f}, geomagnetic "
          f"latitude {out['midpoint_geomagnetic_lat_deg']:.2f}°")
    print(f"  field 50 %: {f50:.2f} dBµV/m ({out['field_50_mv_m']:.4g} mV/m); "
          f"10 %: {f10:.2f} dBµV/m ({out['field_10_mv_m']:.4g} mV/m)")
    return 0


def _cmd_sheet(args) -> int:
    from .study import Study

    import pathlib

    out = pathlib.Path(args.out)
    study = Study.from_file(args.study)
    # fail before the computation, not after it: never an input, a folder or a device
    _check_file_target("--out", out, list(study.spec.input_files) + [args.study])
    result = study.run(progress=_Progress("computing"))
    from mwreach.gui.qt import ensure_app  # Qt only for this command

    ensure_app()
    from mwreach.gui.sheet import write_sheet

    pages = write_sheet(result, out, args.paper, args.orientation)
    print(f"wrote {out} ({pages} pages)")
    return 0


class _Eta:
    """A progress bar with the time left, on a terminal only."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.active = self.stream.isatty()

    def __call__(self, done, total, elapsed):
        if not self.active or not total:
            return
        left = elapsed / max(done, 1) * (total - done)
        bar = "#" * int(25 * done / total)
        self.stream.write(f"\rsearching [{bar:<25}] {done}/{total}, about {left:.0f} s left ")
        if done >= total:
            self.stream.write("\n")
        self.stream.flush()


def _cmd_search(args) -> int:
    import json
    import pathlib

    import numpy as np

    from .export import OUTPUT_NAMES  # noqa: F401  (the run's names stay distinct)
    from .inputs import load_study, read_boundary
    from .safefiles import json_text, refuse_overwriting_inputs, writable_folder, write_set
    from .search import (
        SearchSettings,
        candidate_sites,
        candidates_csv,
        candidates_geojson,
        run_search,
        search_summary,
    )

    spec = load_study(args.study)
    if (args.area is None) == (args.radius_km is None):
        raise UsageError("give exactly one of --area FILE or --radius-km R")
    notes: list = []
    inputs = list(spec.input_files)
    area = excl = None
    if args.area:
        area = read_boundary(args.area, notes, "search area")
        inputs.append(args.area)
    if args.exclude:
        excl = read_boundary(args.exclude, notes, "exclusion")
        inputs.append(args.exclude)
    settings = SearchSettings(
        step_km=check_finite("--step-km", args.step_km, 0.05, 100.0),
        radius_km=None if args.radius_km is None else check_finite("--radius-km", args.radius_km,
                                                                   0.1, 2000.0),
        area_lonlat=area, exclusion_lonlat=excl, score=args.score,
        service_mv_m=check_finite("--service-mv-m", args.service_mv_m, 1e-3, 1e3))
    names = ["candidates.csv", "candidates.geojson", "search.json", "heatmap.png"]
    refuse_overwriting_inputs(args.out, names, inputs)
    writable_folder(args.out)
    n = len(candidate_sites(spec, settings)[0])
    if n == 0:
        raise UsageError("no candidate site in the area (all water, excluded or outside)")
    workers = _workers(args.workers)
    print(f"{n} candidate sites every {settings.step_km:g} km; score: {settings.score}")
    if args.scheduler is not None:
        timeout = check_finite("--connect-timeout", args.connect_timeout, 0.5, 600.0)
        client, lost = _connect_scheduler(args.scheduler, timeout)
        with client:
            workers = len(client.scheduler_info().get("workers", {})) or 1
            search = run_search(spec, settings, client.get_executor(), _Eta(), workers, lost)
        if search.stop_reason not in ("", "interrupted"):
            print(f"mwreach search: lost the scheduler at {args.scheduler} "
                  f"({search.stop_reason}); writing the "
                  f"{len(search.candidates)} candidates done", file=sys.stderr)
    elif workers == 1:
        search = run_search(spec, settings, None, _Eta(), 1)
    else:
        from concurrent.futures import ProcessPoolExecutor
        import multiprocessing as mp

        from .search import ignore_interrupts

        with ProcessPoolExecutor(workers, mp_context=mp.get_context("spawn"),
                                 initializer=ignore_interrupts) as pool:
            search = run_search(spec, settings, pool, _Eta(), workers)
    from .study import Study

    files = {
        "candidates.csv": candidates_csv(search),
        "candidates.geojson": json_text(candidates_geojson(search)),
        "search.json": json_text(search_summary(search, spec), indent=1),
    }
    base = Study(spec).run(bearings=np.arange(0.0, 360.0, 5.0), interference=False)
    from mwreach.gui.qt import ensure_app  # Qt only for the picture

    ensure_app()
    from mwreach.gui.heatmap import heatmap_png

    files["heatmap.png"] = heatmap_png(base, search)
    written = write_set(pathlib.Path(args.out), files, inputs=inputs)
    for note in notes:
        print(f"note: {note}")
    done = len(search.candidates)
    per = search.elapsed_s * search.workers / max(done, 1)
    print(f"{done} of {n} candidates in {search.elapsed_s:.1f} s on {search.workers} worker(s) "
          f"({per * 1e3:.0f} ms of one core each)" + (" — stopped early, partial results"
                                                      if search.stopped_early else ""))
    print(f"{'rank':>4} {'lat':>10} {'lon':>11} {'score':>9} {'max day kW':>11} "
          f"{'max night kW':>13}  limited by (day / night)")
    for k, c in enumerate(search.candidates[:5], 1):
        day = "—" if c.max_day_kw is None else f"{c.max_day_kw:.3g}"
        night = "—" if c.max_night_kw is None else f"{c.max_night_kw:.3g}"
        print(f"{k:>4} {c.lat:>10.5f} {c.lon:>11.5f} {c.score:>9.4g} {day:>11} {night:>13}  "
              f"{c.day_limited_by or '—'} / {c.night_limited_by or '—'}")
    print("wrote " + ", ".join(str(f) for f in written))
    print("Planning estimate only: a site needs field checks, land rights, local codes and a "
          "licensed engineer's review.")
    return 130 if search.stopped_early else 0


def _cmd_channels(args) -> int:
    """The study on every channel of its plan's raster in a range of the band."""
    import pathlib

    from .channels import band_channels, channels_csv, channels_summary, run_channels
    from .inputs import load_study_doc
    from .safefiles import json_text, refuse_overwriting_inputs, writable_folder, write_set

    doc, spec = load_study_doc(args.study)
    if spec.interference is None:
        raise UsageError(f"{args.study}: the study has no neighbours ([interference] or "
                         "[[neighbour]]): there is nothing to protect, every channel is open")
    from_khz, to_khz = args.from_khz, args.to_khz
    freqs = band_channels(spec, from_khz, to_khz)  # refuses NaN, out of band, --from > --to
    service = check_finite("--service-mv-m", args.service_mv_m, 1e-3, 1e3)
    names = ["channels.csv", "channels.json", "channels.png"]
    workers = _workers(args.workers)
    refuse_overwriting_inputs(args.out, names, spec.input_files)
    writable_folder(args.out)
    print(f"{len(freqs)} channels {freqs[0]:g}–{freqs[-1]:g} kHz "
          f"({spec.interference.protection.raster_khz:g} kHz raster), "
          f"{len(spec.interference.neighbours)} neighbours listed")
    if workers == 1:
        search = run_channels(spec, doc, from_khz, to_khz, service, None, 1, _Eta())
    else:
        from concurrent.futures import ProcessPoolExecutor
        import multiprocessing as mp

        from .search import ignore_interrupts

        with ProcessPoolExecutor(workers, mp_context=mp.get_context("spawn"),
                                 initializer=ignore_interrupts) as pool:
            search = run_channels(spec, doc, from_khz, to_khz, service, pool, workers, _Eta())
    summary = channels_summary(search, spec)
    from mwreach.gui.qt import ensure_app  # Qt only for the picture

    ensure_app()
    from mwreach.gui.bandplot import channels_png

    written = write_set(pathlib.Path(args.out), {
        "channels.csv": channels_csv(search),
        "channels.json": json_text(summary, indent=1),
        "channels.png": channels_png(summary)}, inputs=spec.input_files)
    print(f"{len(search.rows)} of {len(freqs)} channels in {search.elapsed_s:.1f} s on "
          f"{search.workers} worker(s)" + (" — stopped early, partial results"
                                           if search.stopped_early else ""))
    print(f"{'kHz':>6} {'max day kW':>11} {'max night kW':>13} {'share':>6}  limited by (day / "
          "night)")
    best = [r for f in summary["ranked_by_max_day_power"][:8]
            for r in search.rows if r.freq_khz == f]
    own = [r for r in search.rows if r.study_channel and r not in best]
    for r in best + own:
        day = "—" if r.max_day_kw is None else f"{r.max_day_kw:.3g}"
        night = "—" if r.max_night_kw is None else f"{r.max_night_kw:.3g}"
        share = "" if r.community_share is None else f"{r.community_share:.2f}"
        mark = "  (the study's channel)" if r.study_channel else ""
        print(f"{r.freq_khz:>6g} {day:>11} {night:>13} {share:>6}  "
              f"{r.day_limited_by or '—'} / {r.night_limited_by or '—'}{mark}")
    print("wrote " + ", ".join(str(f) for f in written))
    print("Planning estimate only: a channel must be confirmed by a licensed engineer's study "
          "under the rules that apply and by the administration that assigns it.")
    return 130 if search.stopped_early else 0


def _workers(given) -> int:
    """Local worker processes: ``given`` (--workers), else every core this process may use."""
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    cores = cores or 1
    workers = cores if given is None else int(given)
    if not 1 <= workers <= cores:
        raise UsageError(f"--workers must be 1–{cores}, the cores available (got {workers})")
    return workers


def _connect_scheduler(address: str, timeout_s: float):
    """A Dask client for ``address`` and the test that tells a lost scheduler, or a UsageError
    naming the address within about ``timeout_s`` seconds: a refused or silent port, or
    something there that does not speak Dask's protocol (a web proxy answers with text that
    the protocol would read as a message length)."""
    import logging
    import socket
    import urllib.parse

    where = f"--scheduler {address!r}"
    url = urllib.parse.urlsplit(address.strip())
    try:
        port = url.port
    except ValueError:
        port = None
    if url.scheme not in ("tcp", "tls") or not url.hostname or port is None or url.path:
        raise UsageError(f"{where}: give the scheduler as tcp://HOST:PORT (or tls://HOST:PORT)")
    try:
        from dask.distributed import Client
    except ImportError:
        raise UsageError("--scheduler needs the cluster extra: pip install -e '.[cluster]'") from None
    # the cluster library logs each failed attempt on stderr: our one line says it instead
    for name in ["tornado", "asyncio"] + [n for n in logging.root.manager.loggerDict
                                          if n.split(".")[0] == "distributed"]:
        logging.getLogger(name).setLevel(logging.CRITICAL + 1)
    try:  # a refused or unreachable port answers fast, without the client's retries
        socket.create_connection((url.hostname, port), timeout=timeout_s).close()
    except OSError as exc:
        raise UsageError(f"{where}: cannot connect ({exc.strerror or exc})") from None
    kind = _scheduler_identity(address.strip(), timeout_s)
    if kind != "Scheduler":
        raise UsageError(f"{where}: no Dask scheduler answered within {timeout_s:g} s ({kind})")
    try:
        client = Client(address.strip(), timeout=timeout_s, set_as_default=False)
    except Exception as exc:  # it answered the probe but not the client: not usable either
        text = (str(exc).splitlines() or [""])[0][:160] or type(exc).__name__
        raise UsageError(f"{where}: the scheduler did not take a client ({text})") from None

    def lost(exc) -> bool:
        import concurrent.futures

        from distributed.comm.core import CommClosedError

        return isinstance(exc, (CommClosedError, OSError, concurrent.futures.CancelledError,
                                concurrent.futures.TimeoutError)) or client.status != "running"

    return client, lost


def _scheduler_identity(address: str, timeout_s: float) -> str:
    """Ask what answers at ``address``: "Scheduler" for a Dask scheduler, else a short reason.

    One handshake and one ``identity`` request on a connection of our own, bounded by
    ``timeout_s`` as a whole, so that neither a silent port nor a stranger's reply (which the
    protocol could read as an absurd message length) reaches the client library."""
    import asyncio

    from distributed.comm import connect

    async def ask():
        comm = await connect(address, timeout=timeout_s)
        try:
            await comm.write({"op": "identity", "reply": True})
            reply = await comm.read()
        finally:
            comm.abort()
        return reply.get("type", "no type in its reply") if isinstance(reply, dict) else \
            "its reply is not a Dask message"

    try:
        return str(asyncio.run(asyncio.wait_for(ask(), timeout_s)))
    except (asyncio.TimeoutError, TimeoutError):
        return "no reply"
    except Exception:  # what answers does not speak Dask's protocol
        return "what answers there does not speak Dask's protocol"


def _cmd_compare(args) -> int:
    """Gains and losses per level between two studies (coverage/compare.py)."""
    from .compare import NO_COMMON_LEVEL, compare_geojson, compare_results
    from .report import people_text
    from .safefiles import json_text, refuse_overwriting_inputs, writable_folder, write_set
    from .study import Study

    names = ("compare.json", "compare.geojson", "compare.png")
    before, after = Study.from_file(args.before), Study.from_file(args.after)
    inputs = tuple(before.spec.input_files) + tuple(after.spec.input_files)
    refuse_overwriting_inputs(args.out, names, inputs)
    if not ({round(lv.field_mv_m, 9) for lv in before.spec.levels}
            & {round(lv.field_mv_m, 9) for lv in after.spec.levels}):
        raise ValueError(NO_COMMON_LEVEL)  # before any folder is made
    writable_folder(args.out)
    r0 = before.run(interference=False)
    r1 = after.run(interference=False)
    comp = compare_results(r0, r1)

    def clean(row):
        return {k: (None if v is None else round(float(v), 3))
                if k not in ("label", "gain", "loss") else v
                for k, v in row.items() if k not in ("gain", "loss")}

    out = {"before": str(args.before), "after": str(args.after),
           "population_source": comp["population_source"],
           "levels": [clean(r) for r in comp["levels"]],
           "caution": "Planning estimate only; filings must follow local rules and be checked "
                      "by a licensed engineer."}
    from mwreach.gui.qt import ensure_app  # Qt only for the picture

    ensure_app()
    from mwreach.gui.comparemap import compare_png

    files = write_set(args.out, {"compare.json": json_text(out, indent=1),
                                 "compare.geojson": json_text(compare_geojson(comp)),
                                 "compare.png": compare_png(comp, r0, r1)},
                      known_names=names, inputs=inputs)
    print(f"{'contour':<24} {'before km²':>11} {'after km²':>10} {'gained km²':>11} "
          f"{'lost km²':>9} {'people +':>10} {'people −':>10}")
    for row in comp["levels"]:
        print(f"{row['label']:<24} {row['before_km2']:>11,.0f} {row['after_km2']:>10,.0f} "
              f"{row['gain_km2']:>11,.0f} {row['loss_km2']:>9,.0f} "
              f"{people_text(row['gain_population']):>10} "
              f"{people_text(row['loss_population']):>10}")
    print("wrote " + ", ".join(str(f) for f in files))
    print("Planning estimate only: filings must follow local rules and be checked by a "
          "licensed engineer.")
    return 0


def _cmd_exposure(args) -> int:
    """RF exposure screening near the towers (coverage/exposure.py)."""
    import pathlib

    from .exposure import CAUTION, screening
    from .inputs import load_study
    from .safefiles import json_text, refuse_overwriting_inputs, writable_folder, write_set

    spec = load_study(args.study)
    height = args.height_m if args.height_m is not None else \
        (spec.exposure or {}).get("height_m", 2.0)
    height = check_finite("--height-m", height, 0.0, 100.0, low_open=True)
    try:
        result = screening(spec, args.period, height, args.standard)
    except ValueError as exc:
        text = str(exc)
        opt = "--standard" if "standard" in text or "covers" in text else "--period"
        raise UsageError(f"{args.study}: {opt}: {text}") from None
    refuse_overwriting_inputs(args.out, ["exposure.json", "exposure.png"], spec.input_files)
    writable_folder(args.out)
    from mwreach.gui.qt import ensure_app  # Qt only for the picture

    ensure_app()
    from mwreach.gui.exposureplan import exposure_png

    write_set(args.out, {"exposure.json": json_text(result, indent=1),
                         "exposure.png": exposure_png(result)},
              known_names=("exposure.json", "exposure.png"), inputs=spec.input_files)
    st = spec.station
    print(f"RF exposure screening, {st.name}, {st.freq_khz:g} kHz, {result['power_kw']:g} kW "
          f"({args.period}), {height:g} m above ground:")
    for name, v in result["standards"].items():
        far = (" — still above at the end of the screened range: look farther"
               if v["beyond_screened_range"] else "")
        print(f"  {name}: E {v['e_limit_v_m']:.4g} V/m, H {v['h_limit_a_m']:.4g} A/m "
              f"({v['source']}): fields above them out to {v['largest_distance_m']:g} m from "
              f"the reference point{far}")
    p0 = result["profile"]["points"][0]
    print(f"  largest field at 1 m from the reference point toward "
          f"{result['profile']['bearing_deg']:g}°: {p0['e_v_m']:g} V/m, {p0['h_a_m']:g} A/m")
    print(f"wrote {pathlib.Path(args.out) / 'exposure.json'} and exposure.png")
    print(CAUTION)
    return 0


def _cmd_fit(args) -> int:
    import pathlib

    from .fit import fit_all, fit_combined, fit_csv, fit_json, near_field_km, unknown_grounds
    from .inputs import load_study, read_measurements
    from .safefiles import (atomic_write, json_text, refuse_overwriting_inputs, writable_folder,
                            write_set)

    spec = load_study(args.study)
    groups = read_measurements(args.measurements, spec)
    inputs = list(spec.input_files) + [args.measurements]
    plots = _plot_names(groups)
    names = ["fit.json", "fit.csv", "fit.pdf"] + list(plots.values())
    refuse_overwriting_inputs(args.out, names, inputs)
    if args.write_zones:  # every target is checked before anything is computed or written
        _check_file_target("--write-zones", args.write_zones, inputs)
        if not spec.zones_path:
            raise UsageError("--write-zones needs a study with a zones file ([ground] zones)")
    writable_folder(args.out)
    unknown = unknown_grounds(spec)
    default_eps = next(iter(unknown))[1]  # the ground key is (σ, εr)
    eps = check_finite("--eps-r", args.eps_r, 1.0, 100.0) if args.eps_r is not None else default_eps
    near = near_field_km(spec.station.freq_khz, spec.station.antenna)
    try:
        fits = fit_all(spec, groups, eps, near)
        combined = fit_combined(spec, groups, eps, near) if len(groups) > 1 else None
    except ValueError as exc:  # too few usable readings: the file is what to mend
        raise UsageError(f"{args.measurements}: {exc}") from None
    summary = fit_json(fits, combined, spec, eps, near)
    summary["plots"] = {f.radial: plots[f.radial] for f in fits}
    files = {"fit.json": json_text(summary, indent=1), "fit.csv": fit_csv(fits)}
    zones_text = (_fitted_zones_text(spec, combined, fits, unknown) if args.write_zones
                  else None)
    from mwreach.gui.qt import ensure_app  # Qt only for the plots

    ensure_app()
    from mwreach.gui.fitplot import fit_pdf, fit_png

    for f in fits:
        files[plots[f.radial]] = fit_png(spec, f, eps)
    files["fit.pdf"] = fit_pdf(spec, fits, eps, near)
    written = write_set(pathlib.Path(args.out), files, inputs=inputs,
                        known_patterns=("fit_*.png",))
    print(f"{spec.station.name}, {spec.station.freq_khz:g} kHz: {sum(len(g) for g in groups.values())} "
          f"readings on {len(groups)} radial(s); εr {eps:g}; near field < {near:.2f} km")
    print(f"{'radial':<18} {'σ mS/m':>8} {'95 % interval':>17} {'E0 mV/m':>9} {'RMS dB':>7}  used")
    for f in fits:
        flag = "" if f.constrained else "  NOT CONSTRAINED"
        print(f"{f.radial:<18} {f.sigma_ms_m:>8.3g} {f.sigma_low_ms_m:>8.3g}–{f.sigma_high_ms_m:<8.3g} "
              f"{f.e0_mv_m:>9.1f} {f.rms_db:>7.2f}  {len(f.used)}{flag}")
        for w in f.warnings:
            print(f"  warning: {w}")
        for r in f.outliers:
            print(f"  outlier left out: line {r.line}, {r.dist_km:.2f} km"
                  + (f" ({r.note})" if r.note else ""))
    if combined is not None:
        for name, sg in combined.sigma_ms_m.items():
            print(f"all radials together: {name} σ {sg:.3g} mS/m "
                  f"({combined.sigma_low_ms_m[name]:.3g}–{combined.sigma_high_ms_m[name]:.3g}); "
                  f"RMS field at 1 km {combined.e1km_rms_mv_m:.1f} mV/m")
    if zones_text is not None:
        atomic_write(args.write_zones, zones_text[0],
                     check=lambda b: json.loads(b.decode("utf-8")))
        written.append(pathlib.Path(args.write_zones))
        if not zones_text[1]:
            print("note: no zone is marked \"fit\": true; the fitted σ belongs to [ground] "
                  "sigma_ms_m of the study (zones written unchanged)")
    print("wrote " + ", ".join(str(f) for f in written))
    print("Planning estimate only: measurements for a filing follow the regulator's procedures "
          "and a licensed engineer's review.")
    return 0


def _plot_names(groups) -> dict:
    """{radial: file name} for the plots, one file per radial: characters a file name cannot
    hold become "_", and names that then meet (``a b``, ``a_b``, ``a/b``; or differ only in
    case, for file systems that ignore it) get ``_2``, ``_3`` …"""
    out, taken = {}, set()
    for radial in groups:
        base = "fit_" + "".join(c if c.isalnum() or c in "-_" else "_" for c in radial)
        name, k = f"{base}.png", 1
        while name.casefold() in taken:
            k += 1
            name = f"{base}_{k}.png"
        taken.add(name.casefold())
        out[radial] = name
    return out


def _check_file_target(option: str, target, inputs) -> None:
    """One output file named on the command line: not a file the run reads, not a folder, a
    link's target or a device, and in a folder that can be written; checked before any work."""
    import pathlib

    from .safefiles import refuse_overwriting_inputs, writable_folder

    path = pathlib.Path(target)
    refuse_overwriting_inputs(path.parent, [path.name], inputs)
    real = path.resolve() if path.is_symlink() else path
    if real.is_dir():
        raise UsageError(f"{option} {target}: is a folder; give a file name")
    if real.exists() and not real.is_file():
        raise UsageError(f"{option} {target}: is not a regular file (a device, pipe or "
                         "socket); give a file name")
    try:
        writable_folder(real.parent)
    except ValueError as exc:
        raise UsageError(f"{option} {target}: {exc}") from None
    if real.exists() and not os.access(real, os.W_OK):
        raise UsageError(f"{option} {target}: the file is read-only")


def _fitted_zones_text(spec, combined, fits, unknown) -> tuple[str, int]:
    """(the study's zones with the fitted conductivities written into the zones marked fit, as
    GeoJSON text; how many zones changed). With none marked, the fitted σ belongs to the
    default ground, which lives in the study file, not the zones."""
    import pathlib

    from .inputs import read_json
    from .safefiles import json_text

    src = pathlib.Path(spec.path).parent / spec.zones_path
    data = read_json(src)
    by_name, ranges = {}, {}
    if combined is not None:
        by_name = dict(combined.sigma_ms_m)
        ranges = {k: (combined.sigma_low_ms_m[k], combined.sigma_high_ms_m[k])
                  for k in by_name}
    elif fits:
        by_name = {v[1]: fits[0].sigma_ms_m for v in unknown.values()}
        ranges = {v[1]: (fits[0].sigma_low_ms_m, fits[0].sigma_high_ms_m)
                  for v in unknown.values()}
    changed = 0
    for feat in data.get("features", []):
        props = feat.get("properties") or {}
        name = props.get("name")
        if props.get("fit") and name in by_name:
            props["conductivity_ms_m"] = round(float(by_name[name]), 4)
            # the fit's 95 % interval, read by the uncertainty bands as a 5 %–95 % range (a
            # little wider, so the bands err wide); rounded outward so it holds the value
            lo, hi = ranges[name]
            note = " conductivity fitted to measurements"
            if all(math.isfinite(v) and v > 0 for v in (lo, hi)):
                props["conductivity_range_ms_m"] = [
                    math.floor(min(lo, by_name[name]) * 1e4) / 1e4,
                    math.ceil(max(hi, by_name[name]) * 1e4) / 1e4]
            else:  # an open interval (it reaches the end of the searched range)
                props.pop("conductivity_range_ms_m", None)
                note += "; its 95 % interval is open, so no conductivity range is written"
            props["note"] = (props.get("note") or "") + note
            changed += 1
    return json_text(data, indent=1), changed


def _cmd_gui(args) -> int:
    if args.screenshot:
        # batch use never waits for a person: check the study and the picture's target (never
        # a file the study reads) before any window opens
        from .inputs import load_study

        inputs = list(load_study(args.study).input_files) if args.study else []
        if args.study:
            inputs.append(args.study)
        _check_file_target("--screenshot", args.screenshot, inputs)
    from mwreach.gui.app import run_gui  # Qt only for this command

    return run_gui(args.study, screenshot=args.screenshot)


class _HelpFormatter(argparse.HelpFormatter):
    """Shows each option's default where it has one."""

    def _get_help_string(self, action):
        text = action.help or ""
        if (action.default not in (None, False, argparse.SUPPRESS) and "%(default)" not in text
                and "default" not in text and action.option_strings):
            text += " (default: %(default)s)"
        return text


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors: ``mwreach run: error: …`` and exit status 2."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def _choices(*options):
    """An argparse type that takes ``options`` in any letter case and returns the spelling."""
    lookup = {o.lower(): o for o in options}

    def convert(text: str) -> str:
        try:
            return lookup[text.lower()]
        except KeyError:
            raise argparse.ArgumentTypeError(
                f"invalid choice {text!r} (choose from {', '.join(options)})") from None

    convert.__name__ = "choice"
    return convert


def _path(text: str) -> str:
    """An argparse type for file and folder names: an empty name would mean the current folder
    (or nothing at all), so it is refused."""
    if not text.strip():
        raise argparse.ArgumentTypeError("an empty name is not a file or folder; give one")
    return text


def _method_name(method: str) -> str:
    return "47 CFR 73.190" if method == "cfr" else "ITU-R P.1147"


def build_parser() -> argparse.ArgumentParser:
    from . import version

    p = _Parser(
        prog="mwreach", formatter_class=_HelpFormatter,
        description="Medium-wave coverage and interference estimates (planning estimates only; "
        "filings must be checked by a licensed engineer under local rules). Exit status: 0 done, "
        "2 bad input, 3 a protection check fails (run --fail-on-violation).",
    )
    p.add_argument("--version", action="version", version=f"mwreach {version()}")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    fmt = dict(formatter_class=_HelpFormatter)

    f = sub.add_parser("field", help="ground-wave field over a smooth homogeneous earth", **fmt)
    f.add_argument("--freq-khz", type=float, required=True, help="frequency [kHz], 10–30000")
    f.add_argument("--sigma-ms-m", type=float, help="ground conductivity [mS/m]")
    f.add_argument("--eps-r", type=float, help="relative permittivity")
    f.add_argument("--ground", help="ITU-R P.368 ground class name instead of σ/εr")
    f.add_argument("--km", type=float, nargs="+", required=True, help="distances [km]")
    f.add_argument("--e1km-mv-m", type=float, default=300.0,
                   help="unattenuated field at 1 km [mV/m] (300: 1 kW, short monopole)")
    f.add_argument("--earth-k", type=float, default=round(4.0 / 3.0, 4),
                   help="effective earth-radius factor")
    f.add_argument("--json", action="store_true", help="print JSON instead of a table")
    f.set_defaults(func=_cmd_field)

    a = sub.add_parser("antenna", help="tower or directional-array field at 1 km", **fmt)
    a.add_argument("--freq-khz", type=float, required=True, help="frequency [kHz]")
    a.add_argument("--height-deg", type=float, help="electrical height of a single tower [deg]")
    a.add_argument("--height-m", type=float, help="physical height of a single tower [m]")
    a.add_argument("--power-kw", type=float, default=1.0, help="power into the antenna [kW]")
    a.add_argument("--loss-ohm", type=float,
                   help="loss resistance at the current loop (base if shorter than 90°) [Ω]; "
                        "default 0")
    a.add_argument("--efficiency", type=float, help="radiation efficiency (0–1]")
    a.add_argument("--array", type=_path,
                   help="TOML file with rotation_deg, [[tower]] tables and optionally pattern "
                        "and [[augmentation]] tables")
    a.add_argument("--elevation-deg", type=float, default=0.0,
                   help="elevation angle of the patterns [deg], 0–90")
    a.add_argument("--json", action="store_true", help="print JSON instead of text")
    a.set_defaults(func=_cmd_antenna)

    r = sub.add_parser("run", help="run a study file: contours, tables, GeoJSON, KML", **fmt)
    r.add_argument("study", type=_path, help="study file (TOML)")
    r.add_argument("-o", "--out", type=_path, required=True,
                   help="output folder (created if missing; never a file the study reads)")
    r.add_argument("--fail-on-violation", action="store_true",
                   help="exit with status 3 when any protection check fails")
    r.set_defaults(func=_cmd_run)

    k = sub.add_parser("sky", help="night-time sky wave on one path", **fmt)
    k.add_argument("--freq-khz", type=float, required=True,
                   help="frequency [kHz]: 535–1705 for cfr, 150–1700 for itu")
    k.add_argument("--from", dest="from_", type=float, nargs=2, required=True,
                   metavar=("LAT", "LON"), help="transmitter [deg]")
    k.add_argument("--to", type=float, nargs=2, required=True, metavar=("LAT", "LON"),
                   help="receiver [deg]")
    k.add_argument("--method", type=_choices("cfr", "itu"), default="cfr",
                   help="47 CFR 73.190 (cfr) or ITU-R P.1147 (itu)")
    k.add_argument("--e1km-mv-m", type=float,
                   help="radiation toward the receiver at the departure angle [mV/m at 1 km] "
                        "(default: 100 for cfr, 300 for itu)")
    k.add_argument("--hops", type=int,
                   help="number of equal hops (default: one hop, departure angle 0° beyond "
                        "the grazing distance)")
    k.add_argument("--height-km", type=float, default=100.0, help="reflection height [km]")
    k.add_argument("--json", action="store_true", help="print JSON instead of text")
    k.set_defaults(func=_cmd_sky)

    sh = sub.add_parser("sheet", help="contour sheet (PDF) for permit paperwork", **fmt)
    sh.add_argument("study", type=_path, help="study file (TOML)")
    sh.add_argument("-o", "--out", "--output", dest="out", type=_path, required=True,
                    help="PDF file to write")
    sh.add_argument("--paper", type=_choices("A4", "Letter"),
                    help="paper size (default: [output] paper of the study, else A4)")
    sh.add_argument("--orientation", type=_choices("portrait", "landscape"),
                    help="page orientation (default: [output] orientation of the study, "
                         "else portrait)")
    sh.set_defaults(func=_cmd_sheet)

    se = sub.add_parser("search", help="site search: the study at every candidate site of an "
                        "area, ranked", **fmt)
    se.add_argument("study", type=_path, help="study file (TOML)")
    where = se.add_mutually_exclusive_group()
    where.add_argument("--area", type=_path, help="search area: GeoJSON polygon")
    where.add_argument("--radius-km", type=float, help="search within this distance of the "
                       "study's site [km]")
    se.add_argument("--step-km", type=float, default=2.0, help="candidate grid spacing [km]")
    se.add_argument("--exclude", type=_path, help="GeoJSON polygons where no tower may stand")
    se.add_argument("--score", type=_choices("community_share", "area", "max_power"),
                    default="community_share", help="what ranks the sites")
    se.add_argument("--service-mv-m", type=float, default=5.0,
                    help="service contour whose community share counts [mV/m]")
    se.add_argument("-o", "--out", type=_path, required=True, help="output folder")
    se.add_argument("--workers", type=int, help="local worker processes (default: all cores)")
    se.add_argument("--scheduler", help="tcp://HOST:PORT of a Dask distributed scheduler "
                    "(needs the cluster extra)")
    se.add_argument("--connect-timeout", type=float, default=10.0,
                    help="seconds to wait for the scheduler to answer [s], 0.5–600")
    se.set_defaults(func=_cmd_search)

    ch = sub.add_parser("channels", help="channel search: the study on every channel of its "
                        "plan's raster, the largest powers each allows", **fmt)
    ch.add_argument("study", type=_path, help="study file (TOML)")
    ch.add_argument("-o", "--out", type=_path, required=True, help="output folder")
    ch.add_argument("--from", dest="from_khz", type=float, default=530.0,
                    help="lowest channel [kHz]")
    ch.add_argument("--to", dest="to_khz", type=float, default=1700.0,
                    help="highest channel [kHz]")
    ch.add_argument("--service-mv-m", type=float, default=5.0,
                    help="service contour whose community share counts [mV/m]")
    ch.add_argument("--workers", type=int, help="local worker processes (default: all cores)")
    ch.set_defaults(func=_cmd_channels)

    fi = sub.add_parser("fit", help="ground conductivity and E0 from field-strength "
                        "measurements", **fmt)
    fi.add_argument("study", type=_path, help="study file (TOML)")
    fi.add_argument("measurements", type=_path, help="CSV: lat, lon, field_mv_m or field_dbu, "
                    "[bearing_deg, dist_km, radial, note]")
    fi.add_argument("-o", "--out", type=_path, required=True, help="output folder")
    fi.add_argument("--eps-r", type=float, help="relative permittivity (default: the fitted "
                    "ground's)")
    fi.add_argument("--write-zones", type=_path, help="write the zones with fitted conductivities to this "
                    "GeoJSON file")
    fi.set_defaults(func=_cmd_fit)

    cp = sub.add_parser("compare", help="what a change of site, power or antenna gains and "
                        "loses: areas and people per contour level", **fmt)
    cp.add_argument("before", type=_path, help="the study as it is (TOML)")
    cp.add_argument("after", type=_path, help="the study as changed (TOML)")
    cp.add_argument("-o", "--out", type=_path, required=True, help="output folder")
    cp.set_defaults(func=_cmd_compare)

    ex = sub.add_parser("exposure", help="RF exposure screening near the towers (a screening "
                        "estimate, not a compliance determination)", **fmt)
    ex.add_argument("study", type=_path, help="study file (TOML)")
    ex.add_argument("-o", "--out", type=_path, required=True, help="output folder")
    ex.add_argument("--period", type=_choices("day", "night"), default="day",
                    help="which power to screen")
    ex.add_argument("--height-m", type=float, default=None,
                    help="height above ground of the screened points [m], above 0 (default: "
                         "the study's [exposure] height_m, else 2)")
    ex.add_argument("--standard", nargs="+", default=None,
                    help="reference levels: fcc (47 CFR 1.1310), icnirp2020, icnirp2020-local, "
                         "icnirp1998, icnirp2010 (both populations each), or single rows such "
                         "as fcc-general (default: the study's [exposure] standard, else fcc)")
    ex.set_defaults(func=_cmd_exposure)

    g = sub.add_parser("gui", help="the desktop application", **fmt)
    g.add_argument("study", nargs="?", type=_path, help="study file to open (default: the demo, unsaved)")
    g.add_argument("--screenshot", type=_path, help="open, compute, save a PNG of the window and exit")
    g.set_defaults(func=_cmd_gui)

    return p


EXIT_BAD_INPUT = 2
EXIT_VIOLATION = 3


def _placed_count() -> int:
    safe = sys.modules.get("mwreach.coverage.safefiles")
    return len(safe.placed_sets) if safe is not None else 0


def _interrupted(command: str, mark: int) -> int:
    """Ctrl-C: say what is on disk. The writer holds Ctrl-C back during a swap, so an output
    set is either untouched or complete; ``mark`` counts the sets placed before this command."""
    safe = sys.modules.get("mwreach.coverage.safefiles")
    placed = list(dict.fromkeys(safe.placed_sets[mark:])) if safe is not None else []
    if placed:
        where = ", ".join(str(p) for p in placed)
        print(f"mwreach {command}: interrupted; the new outputs are complete in {where}",
              file=sys.stderr)
    else:
        print(f"mwreach {command}: interrupted; nothing was replaced", file=sys.stderr)
    return 130


def main(argv=None) -> int:
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
    except KeyboardInterrupt:  # Ctrl-C while starting: nothing was begun
        print("mwreach: interrupted", file=sys.stderr)
        return 130
    mark = _placed_count()
    try:
        return int(args.func(args) or 0)
    except BrokenPipeError:  # output piped into e.g. `head`
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        return _interrupted(args.command, mark)
    except (UsageError, ValueError, OSError) as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        if isinstance(exc, OSError) and exc.filename and str(exc.filename) not in msg:
            msg = f"{exc.filename}: {exc.strerror or msg}"
        print(f"mwreach {args.command}: error: {msg}", file=sys.stderr)
        return EXIT_BAD_INPUT


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
