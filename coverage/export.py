"""Writers for a study's results: summary JSON, radial CSV, GeoJSON and KML (open formats)."""

from __future__ import annotations

import csv
import io
import json
import math
import pathlib
from xml.sax.saxutils import escape

import numpy as np

from .inputs import spec_to_doc
from .safefiles import atomic_write, write_set
from .study import StudyResult

__all__ = ["KM_PER_MI", "version", "write_outputs", "summary_dict", "radials_csv", "contours_geojson",
           "contours_kml", "atomic_write"]

KM_PER_MI = 1.609344
#: Every file a run may write; a new run replaces the whole set (a file the new run does not
#: produce, such as night.json after the night part was removed, goes too).
OUTPUT_NAMES = ("summary.json", "radials.csv", "contours.geojson", "contours.kml", "night.json",
                "interference.csv")


def _num(v):
    """JSON-safe number: NaN/inf become None."""
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def summary_dict(result: StudyResult, extra: dict | None = None) -> dict:
    """Inputs echoed, antenna summary and one entry per level."""
    spec = result.spec
    st = spec.station
    out = {
        "mwreach_version": version(),
        "created": result.created,
        "study_file": spec.path,
        "title": spec.title,
        "station": {
            "name": st.name, "lat": st.lat, "lon": st.lon, "freq_khz": st.freq_khz,
            "power_day_kw": st.power_day_kw, "power_night_kw": st.power_night_kw,
            "towers": len(st.antenna.elements),
        },
        "antenna": {k: _num(v) for k, v in result.antenna_summary.items()},
        "ground": {
            "default": {"sigma_ms_m": spec.ground.default.sigma_ms_m,
                        "eps_r": spec.ground.default.eps_r},
            "zones": [{"name": z.name, "sigma_ms_m": z.ground.sigma_ms_m,
                       "eps_r": z.ground.eps_r} for z in spec.ground.zones],
            "zones_file": spec.zones_path or None,
            "overlaps_later_wins": [list(p) for p in spec.ground.overlaps],
        },
        "input_notes": list(spec.input_notes),
        "method": {
            "ground_wave": "smooth earth: Sommerfeld-Norton flat earth with curvature correction "
                           "below x = 0.1, Van der Pol-Bremmer/Wait residue series beyond "
                           "(ITU-R P.368 theory)",
            "mixed_path": spec.mixed_path,
            "earth_k": spec.earth_k,
            "bearing_step_deg": spec.bearing_step_deg,
            "step_km": spec.step_km,
            "radial_length_km": result.max_km,
        },
        "community": spec.community.name if spec.community else None,
        "inputs": spec_to_doc(spec),
        "levels": [{k: (_num(v) if not isinstance(v, str) else v) for k, v in row.items()}
                   for row in result.level_rows()],
        "elapsed_s": result.elapsed_s,
        "caution": "Planning estimate only; not a compliance determination. Filings must follow "
                   "local rules and be checked by a licensed engineer. RF exposure near towers "
                   "is not assessed.",
    }
    if extra:
        out.update(extra)
    return out


def version() -> str:
    """The installed mwreach version ("unknown" when running from an uninstalled tree)."""
    from importlib.metadata import PackageNotFoundError
    from importlib.metadata import version as dist_version

    try:
        return dist_version("mwreach")
    except PackageNotFoundError:  # running from a source tree without install
        return "unknown"


def radials_csv(result: StudyResult) -> str:
    """Bearing × level distances in km and mi; crossings beyond the first listed per level."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    head = ["bearing_deg", "e1km_mv_m"]
    for c in result.contours:
        tag = f"{c.level_mv_m:g}mV_m"
        head += [f"{tag}_km", f"{tag}_mi", f"{tag}_further_km"]
    w.writerow(head)
    for i, b in enumerate(result.radials.bearings_deg):
        row = [f"{b:g}", f"{result.radials.e1km_mv_m[i]:.2f}"]
        for c in result.contours:
            d = c.first_km[i]
            if np.isnan(d):
                row += ["not reached", "not reached"]
            elif np.isinf(d):
                row += [f">{result.max_km:.1f}", f">{result.max_km / KM_PER_MI:.1f}"]
            else:
                row += [f"{d:.2f}", f"{d / KM_PER_MI:.2f}"]
            row.append(" ".join(f"{a:.2f}-{e:.2f}" for a, e in c.further[i]))
        w.writerow(row)
    return buf.getvalue()


def contours_geojson(result: StudyResult, extra_features=()) -> dict:
    """One Feature per level (lon/lat, WGS84)."""
    from shapely.geometry import mapping

    st = result.spec.station
    feats = []
    for c in result.contours:
        if c.polygon_lonlat.is_empty:
            continue
        feats.append({
            "type": "Feature",
            "properties": {"level": c.level_mv_m, "units": "mV/m", "label": c.label,
                           "station": st.name, "freq_khz": st.freq_khz, "kind": "day ground wave",
                           "area_km2": round(c.area_km2, 3)},
            "geometry": mapping(c.polygon_lonlat),
        })
    feats.extend(extra_features)
    return {"type": "FeatureCollection", "features": feats}


def _kml_rings(geom) -> str:
    polys = getattr(geom, "geoms", [geom])
    out = []
    for p in polys:
        if p.geom_type != "Polygon" or p.is_empty:
            continue
        coords = " ".join(f"{x:.6f},{y:.6f},0" for x, y in p.exterior.coords)
        inner = "".join(
            "<innerBoundaryIs><LinearRing><coordinates>"
            + " ".join(f"{x:.6f},{y:.6f},0" for x, y in r.coords)
            + "</coordinates></LinearRing></innerBoundaryIs>"
            for r in p.interiors
        )
        out.append("<Polygon><outerBoundaryIs><LinearRing><coordinates>" + coords
                   + "</coordinates></LinearRing></outerBoundaryIs>" + inner + "</Polygon>")
    return "<MultiGeometry>" + "".join(out) + "</MultiGeometry>"


#: Line colours of the contours in KML (aabbggrr), strongest level first.
KML_COLOURS = ["ff2b18b2", "ff1482e0", "ff37781b", "ffac6621", "ff832a76", "ff4d4d4d"]


def contours_kml(geojson: dict, name: str) -> str:
    """KML 2.2 document with one Placemark per GeoJSON feature, outlines coloured by level."""
    from shapely.geometry import shape

    styles, marks = [], []
    for i, f in enumerate(geojson["features"]):
        p = f["properties"]
        night = p.get("kind") == "night service"
        colour = "ff202020" if night else KML_COLOURS[i % len(KML_COLOURS)]
        styles.append(f'<Style id="s{i}"><LineStyle><color>{colour}</color><width>2</width>'
                      "</LineStyle><PolyStyle><fill>0</fill></PolyStyle></Style>")
        title = f"{p.get('label') or p.get('level')} ({p.get('kind', '')})"
        marks.append(f"<Placemark><name>{escape(str(title))}</name><styleUrl>#s{i}</styleUrl>"
                     f"<description>{escape(json.dumps(p, ensure_ascii=False))}</description>"
                     f"{_kml_rings(shape(f['geometry']))}</Placemark>")
    return ('<?xml version="1.0" encoding="UTF-8"?>\n<kml xmlns="http://www.opengis.net/kml/2.2">'
            f"<Document><name>{escape(name)}</name>" + "".join(styles) + "".join(marks)
            + "</Document></kml>\n")


def interference_summary(result: StudyResult) -> dict:
    """Maximum powers, per-neighbour worst margins, ratios used and notes (for summary.json)."""
    inter = result.interference
    if inter is None:
        return {}
    clean = lambda d: None if d is None else {k: (_num(v) if not isinstance(v, str) else v)  # noqa: E731
                                               for k, v in d.items()}
    return {
        "max_power": {k: clean(v) for k, v in inter.max_power.items()},
        "neighbours": [{k: (_num(v) if isinstance(v, float) else v) for k, v in row.items()}
                       for row in inter.neighbour_summary()],
        "protection_ratios": inter.protection.rows(),
        "interference_notes": list(inter.notes),
    }


def night_json(result: StudyResult) -> dict:
    """Night limit and night service contour per bearing, with the method settings."""
    inter = result.interference
    n = inter.night
    s = inter.settings
    skipped = [dict(x) for x in inter.skipped]
    if n is None:
        return {"station": result.spec.station.name, "power_night_kw": 0.0,
                "method": None, "area_km2": None, "bearings": [], "skipped": skipped,
                "notes": list(inter.notes)}
    return {
        "station": result.spec.station.name,
        "power_night_kw": n.power_kw,
        "method": {"sky_wave": "47 CFR 73.190" if s.method == "cfr" else "ITU-R P.1147",
                   "percent_of_time": s.percent, "rss_exclusion_percent": s.exclusion_percent,
                   "layer_height_km": s.layer_height_km, "floor_mv_m": s.floor_mv_m},
        "area_km2": n.area_km2,
        "bearings": [
            {"bearing_deg": float(b), "night_limit_mv_m": float(lim),
             "night_limit_dbu": float(db), "contour_km": _num(d), "interferers_used": used}
            for b, lim, db, d, used in zip(n.bearings_deg, n.limit_mv_m, n.limit_dbu,
                                           n.contour_km, n.contributors)
        ],
        "skipped": skipped,
        "notes": list(inter.notes),
    }


def interference_csv(result: StudyResult) -> str:
    """One row per neighbour and check point: fields, ratio, margin, pass."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["kind", "neighbour", "offset_channels", "bearing_deg", "lat", "lon",
                "wanted_dbu", "wanted_mv_m", "unwanted_dbu", "unwanted_mv_m", "ratio_db",
                "margin_db", "pass"])
    for r in result.interference.rows:
        w.writerow([r.kind, r.neighbour, r.offset_channels, f"{r.bearing_deg:g}", f"{r.lat:.5f}",
                    f"{r.lon:.5f}", f"{r.wanted_dbu:.2f}", f"{10 ** (r.wanted_dbu / 20) / 1e3:.4g}",
                    f"{r.unwanted_dbu:.2f}", f"{10 ** (r.unwanted_dbu / 20) / 1e3:.4g}",
                    f"{r.ratio_db:g}", f"{r.margin_db:.2f}", "yes" if r.passed else "NO"])
    return buf.getvalue()


def night_feature(result: StudyResult) -> dict | None:
    """The night service contour as a GeoJSON Feature (None without a night result)."""
    from shapely.geometry import mapping

    inter = result.interference
    if inter is None or inter.night is None or inter.night.polygon_lonlat.is_empty:
        return None
    n = inter.night
    st = result.spec.station
    return {"type": "Feature",
            "properties": {"level": round(float(np.median(n.limit_mv_m)), 4), "units": "mV/m",
                           "label": "night service (night limit, median shown)",
                           "station": st.name, "freq_khz": st.freq_khz,
                           "kind": "night service", "area_km2": round(n.area_km2, 3)},
            "geometry": mapping(n.polygon_lonlat)}


def write_outputs(result: StudyResult, out_dir, extra_summary=None, extra_features=(),
                  extra_files=None) -> list[pathlib.Path]:
    """Write summary.json, radials.csv, contours.geojson and contours.kml into ``out_dir``,
    and night.json and interference.csv when the study ran the night/interference work."""
    out = pathlib.Path(out_dir)
    extra_summary = dict(extra_summary or {}) | interference_summary(result)
    extra_features = list(extra_features)
    extra_files = dict(extra_files or {})
    if result.interference is not None:
        nf = night_feature(result)
        if nf is not None:
            extra_features.append(nf)
        extra_files["night.json"] = json.dumps(night_json(result), indent=1,
                                               ensure_ascii=False) + "\n"
        extra_files["interference.csv"] = interference_csv(result)
    gj = contours_geojson(result, extra_features)
    files = {
        "summary.json": json.dumps(summary_dict(result, extra_summary), indent=1,
                                   ensure_ascii=False) + "\n",
        "radials.csv": radials_csv(result),
        "contours.geojson": json.dumps(gj) + "\n",
        "contours.kml": contours_kml(gj, result.spec.title),
    }
    files.update(extra_files or {})
    return write_set(out, files, known_names=OUTPUT_NAMES, inputs=result.spec.input_files)
