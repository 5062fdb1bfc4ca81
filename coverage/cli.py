"""Command line: ``mwreach field | antenna | run | sky | sheet | gui``.

Errors in user input exit with status 2 and a one-line message on stderr. Qt is imported only by
the ``gui`` and ``sheet`` commands.
"""

from __future__ import annotations

import argparse
import json
import sys

import numpy as np

__all__ = ["main"]


class UsageError(Exception):
    """A mistake in what the user typed: printed as one line, exit status 2."""


def _ground_from_args(args):
    from .ground import Ground, ground_class

    if args.ground:
        if args.sigma_ms_m is not None or args.eps_r is not None:
            raise UsageError("give either --ground or --sigma-ms-m/--eps-r, not both")
        return ground_class(args.ground)
    if args.sigma_ms_m is None or args.eps_r is None:
        raise UsageError("give --ground NAME or both --sigma-ms-m and --eps-r")
    return Ground(args.sigma_ms_m, args.eps_r)


def _cmd_field(args) -> int:
    from . import groundwave as gw

    ground = _ground_from_args(args)
    m = gw.model(args.freq_khz, ground, args.earth_k)
    km = np.asarray(args.km, dtype=float)
    if np.any(km <= 0):
        raise UsageError(f"--km values must be > 0 (got {args.km})")
    e1 = args.e1km_mv_m
    if not (np.isfinite(e1) and e1 > 0):
        raise UsageError(f"--e1km-mv-m must be > 0 (got {e1})")
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


def _load_toml(path: str) -> dict:
    """Read a TOML file; parse errors keep tomllib's line and column and name the file."""
    import tomllib

    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: {exc}") from None
    except UnicodeDecodeError as exc:
        raise ValueError(f"{path}: not UTF-8 text (byte {exc.start})") from None


def _cmd_antenna(args) -> int:
    from .antenna import Array, Tower, array_from_table, height_m

    if args.array:
        if args.height_deg is not None or args.height_m is not None:
            raise UsageError("give --array FILE or a single tower's height, not both")
        array = array_from_table(_load_toml(args.array), args.freq_khz, args.array)
    else:
        if (args.height_deg is None) == (args.height_m is None):
            raise UsageError("give exactly one of --height-deg, --height-m or --array")
        loss = dict(loss_ohm=args.loss_ohm or 0.0, efficiency=args.efficiency)
        tower = (
            Tower(args.height_deg, **loss)
            if args.height_deg is not None
            else Tower.from_height_m(args.height_m, args.freq_khz, **loss)
        )
        array = Array.single(tower)
    summ = array.horizontal_summary(args.power_kw)
    pattern = array.field_mv_m(np.arange(360.0), 0.0, args.power_kw)
    single = len(array.elements) == 1
    out = {
        "freq_khz": args.freq_khz,
        "power_kw": args.power_kw,
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
    from .study import Study

    study = Study.from_file(args.study)
    result = study.run(progress=_Progress("day ground wave"))
    files = write_outputs(result, args.out)
    st = result.spec.station
    print(f"{result.spec.title}")
    print(f"{st.name}: {st.freq_khz:g} kHz, {st.power_day_kw:g} kW day, "
          f"{result.antenna_summary['rms_mv_m']:.1f} mV/m RMS at 1 km, "
          f"site {st.lat:.5f}, {st.lon:.5f}")
    for a, b in result.spec.ground.overlaps:
        print(f"note: ground zones '{a}' and '{b}' overlap; '{b}' (later) is used there")
    print(f"{'contour':<24} {'min km':>8} {'mean km':>8} {'max km':>8} {'area km²':>10} "
          f"{'community':>9}")
    for row in result.level_rows():
        fmt = lambda v: "—" if v is None else f"{v:.1f}"  # noqa: E731
        share = "—" if row["community_share"] is None else f"{100 * row['community_share']:.0f} %"
        print(f"{row['label']:<24} {fmt(row['min_km']):>8} {fmt(row['mean_km']):>8} "
              f"{fmt(row['max_km']):>8} {row['area_km2']:>10.0f} {share:>9}")
        if row["radials_with_further_crossings"]:
            print(f"  {row['radials_with_further_crossings']} radial(s) cross this level again "
                  "further out (field recovers over water); see radials.csv")
    if result.interference is not None:
        _print_interference(result)
    print(f"{len(result.radials.bearings_deg)} radials in {result.elapsed_s:.2f} s; wrote "
          + ", ".join(str(f) for f in files))
    print("Planning estimate only: filings must follow local rules and be checked by a "
          "licensed engineer.")
    return 0


def _print_interference(result) -> None:
    inter = result.interference
    n = inter.night
    method = "47 CFR 73.190" if inter.settings.method == "cfr" else "ITU-R P.1147"
    print(f"Night ({method}, {inter.settings.percent} % sky wave, "
          f"RSS {inter.settings.exclusion_percent} % exclusion), {n.power_kw:g} kW:")
    print(f"  night limit {n.limit_mv_m.min():.2f}–{n.limit_mv_m.max():.2f} mV/m; night service "
          f"contour {np.nanmin(n.contour_km):.1f}–{np.nanmax(n.contour_km):.1f} km, "
          f"{n.area_km2:.0f} km²")
    print(f"  {'neighbour':<20} {'check':<13} {'offset':>6} {'D/U dB':>7} {'worst margin':>13}")
    for row in inter.neighbour_summary():
        flag = "" if row["passed"] else "  FAILS"
        print(f"  {row['neighbour']:<20} {row['kind']:<13} {row['offset_channels']:>6d} "
              f"{row['ratio_db']:>7g} {row['worst_margin_db']:>10.1f} dB{flag}")
    from .interference import describe_max_power

    for period, mp in inter.max_power.items():
        print("  " + describe_max_power(period, mp))
    for note in inter.notes:
        print(f"  note: {note}")


def _cmd_sky(args) -> int:
    from .skywave import sky_field_dbu, sky_path

    if args.hops is not None and args.hops < 1:
        raise UsageError(f"--hops must be >= 1 (got {args.hops})")
    path = sky_path(args.from_[0], args.from_[1], args.to[0], args.to[1], hops=args.hops,
                    height_km=args.height_km)
    ref = 100.0 if args.method == "cfr" else 300.0
    e = ref if args.e1km_mv_m is None else args.e1km_mv_m
    if not (np.isfinite(e) and e > 0):
        raise UsageError(f"--e1km-mv-m must be > 0 (got {e})")
    kw = dict(freq_khz=args.freq_khz, tx=tuple(args.from_), rx=tuple(args.to))
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
    name = "47 CFR 73.190" if args.method == "cfr" else "ITU-R P.1147"
    print(f"Sky wave ({name}), {args.freq_khz:g} kHz, {e:g} mV/m at 1 km toward the receiver")
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

    study = Study.from_file(args.study)
    result = study.run(progress=_Progress("computing"))
    from mwreach.gui.qt import ensure_app  # Qt only for this command

    ensure_app()
    from mwreach.gui.sheet import write_sheet

    pages = write_sheet(result, args.output, args.paper, args.orientation)
    print(f"wrote {args.output} ({pages} pages)")
    return 0


def _cmd_gui(args) -> int:
    from mwreach.gui.app import run_gui  # Qt only for this command

    return run_gui(args.study, screenshot=args.screenshot)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="mwreach",
        description="Medium-wave coverage and interference estimates (planning estimates only; "
        "filings must be checked by a licensed engineer under local rules).",
    )
    sub = p.add_subparsers(dest="command", required=True)

    f = sub.add_parser("field", help="ground-wave field over a smooth homogeneous earth")
    f.add_argument("--freq-khz", type=float, required=True, help="frequency [kHz], 10–30000")
    f.add_argument("--sigma-ms-m", type=float, help="ground conductivity [mS/m]")
    f.add_argument("--eps-r", type=float, help="relative permittivity")
    f.add_argument("--ground", help="ITU-R P.368 ground class name instead of σ/εr")
    f.add_argument("--km", type=float, nargs="+", required=True, help="distances [km]")
    f.add_argument("--e1km-mv-m", type=float, default=300.0,
                   help="unattenuated field at 1 km [mV/m] (default 300: 1 kW, short monopole)")
    f.add_argument("--earth-k", type=float, default=4.0 / 3.0,
                   help="effective earth-radius factor (default 4/3)")
    f.add_argument("--json", action="store_true", help="print JSON instead of a table")
    f.set_defaults(func=_cmd_field)

    a = sub.add_parser("antenna", help="tower or directional-array field at 1 km")
    a.add_argument("--freq-khz", type=float, required=True, help="frequency [kHz]")
    a.add_argument("--height-deg", type=float, help="electrical height of a single tower [deg]")
    a.add_argument("--height-m", type=float, help="physical height of a single tower [m]")
    a.add_argument("--power-kw", type=float, default=1.0, help="power into the antenna [kW]")
    a.add_argument("--loss-ohm", type=float, help="loss resistance at the current loop [Ω]")
    a.add_argument("--efficiency", type=float, help="radiation efficiency (0–1]")
    a.add_argument("--array", help="TOML file with rotation_deg and [[tower]] tables")
    a.add_argument("--json", action="store_true", help="print JSON instead of text")
    a.set_defaults(func=_cmd_antenna)

    r = sub.add_parser("run", help="run a study file: contours, tables, GeoJSON, KML")
    r.add_argument("study", help="study file (TOML)")
    r.add_argument("--out", required=True, help="output folder (created if missing)")
    r.set_defaults(func=_cmd_run)

    k = sub.add_parser("sky", help="night-time sky wave on one path")
    k.add_argument("--freq-khz", type=float, required=True, help="frequency [kHz]")
    k.add_argument("--from", dest="from_", type=float, nargs=2, required=True,
                   metavar=("LAT", "LON"), help="transmitter [deg]")
    k.add_argument("--to", type=float, nargs=2, required=True, metavar=("LAT", "LON"),
                   help="receiver [deg]")
    k.add_argument("--method", choices=("cfr", "itu"), default="cfr",
                   help="47 CFR 73.190 (cfr) or ITU-R P.1147 (itu)")
    k.add_argument("--e1km-mv-m", type=float,
                   help="radiation toward the receiver at the departure angle [mV/m at 1 km] "
                        "(default: 100 for cfr, 300 for itu)")
    k.add_argument("--hops", type=int, help="number of hops (default: fewest possible)")
    k.add_argument("--height-km", type=float, default=100.0, help="reflection height [km]")
    k.add_argument("--json", action="store_true", help="print JSON instead of text")
    k.set_defaults(func=_cmd_sky)

    sh = sub.add_parser("sheet", help="contour sheet (PDF) for permit paperwork")
    sh.add_argument("study", help="study file (TOML)")
    sh.add_argument("-o", "--output", required=True, help="PDF file to write")
    sh.add_argument("--paper", choices=("A4", "Letter"), help="paper size (default: study file)")
    sh.add_argument("--orientation", choices=("portrait", "landscape"),
                    help="page orientation (default: study file)")
    sh.set_defaults(func=_cmd_sheet)

    g = sub.add_parser("gui", help="the desktop application")
    g.add_argument("study", nargs="?", help="study file to open")
    g.add_argument("--screenshot", help="open, compute, save a PNG of the window and exit")
    g.set_defaults(func=_cmd_gui)

    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except BrokenPipeError:  # output piped into e.g. `head`
        sys.stderr.close()
        return 0
    except (UsageError, ValueError, FileNotFoundError, IsADirectoryError) as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        print(f"mwreach {args.command}: error: {msg}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
