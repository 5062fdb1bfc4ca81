"""Writers for a study's results: summary JSON, radial CSV, GeoJSON and KML (open formats)."""

from __future__ import annotations

import datetime as _dt
import io
import json
import math
import pathlib
from xml.sax.saxutils import escape

import numpy as np

from .groundwave import mv_m_to_dbu
from .pattern import elevation_table
from .station import period_rows
from .sun import MID_MONTH_DAY, monthly_sun_times
from .report import field_text, margin_text, mv_m_text
from .inputs import spec_to_doc
from . import version
from .safefiles import atomic_write, csv_writer, json_text, write_set
from .study import StudyResult

__all__ = ["KM_PER_MI", "version", "write_outputs", "summary_dict", "radials_csv", "contours_geojson",
           "contours_kml", "atomic_write"]

KM_PER_MI = 1.609344
#: Every file a run may write; a new run replaces the whole set (a file the new run does not
#: produce, such as night.json after the night part was removed, goes too).
OUTPUT_NAMES = ("summary.json", "radials.csv", "contours.geojson", "contours.kml", "night.json",
                "interference.csv", "patterns.csv")


def _num(v, digits: int | None = None):
    """JSON-safe number: NaN/inf become None; integers stay integers; ``digits`` rounds."""
    if v is None:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    v = float(v)
    if not math.isfinite(v):
        return None
    return round(v, digits) if digits is not None else v


#: Decimals kept for shares (0.1 % of a community is 1e-3; four decimals are ample).
SHARE_DIGITS = 4


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
        "population": (None if result.population is None else
                       {k: (v if isinstance(v, str) else _num(v, 1))
                        for k, v in result.population.items() if k != "levels"}),
        "operating_periods": [{k: (v if isinstance(v, (str, list)) else _num(v))
                               for k, v in row.items()} for row in period_rows(st)],
        "sun": sun_summary(spec),
        "inputs": spec_to_doc(spec),
        "levels": [{k: (v if isinstance(v, str) else
                        _num(v, SHARE_DIGITS if k == "community_share" else
                             1 if k == "population" else None))
                    for k, v in row.items()} for row in result.level_rows()],
        "uncertainty": uncertainty_summary(result),
        "elapsed_s": result.elapsed_s,
        "caution": "Planning estimate only; not a compliance determination. Filings must follow "
                   "local rules and be checked by a licensed engineer. RF exposure near towers "
                   "is not assessed.",
    }
    if extra:
        out.update(extra)
    return out


def uncertainty_summary(result: StudyResult) -> dict | None:
    """How the bands were drawn: the draws, the seed and each uncertain ground's range."""
    spec = result.spec
    if not result.bands:
        return None
    from .uncertainty import uncertain_grounds

    names = ["default ground"] + [z.name for z in spec.ground.zones]
    return {"draws": spec.uncertainty.draws, "seed": spec.uncertainty.seed,
            "sampling": "midpoint Latin hypercube, log-normal conductivity with the range as its "
                        "5 % and 95 % points; percentiles by the (k + 1/2)/N plotting position",
            "grounds": [{"ground": names[row], "sigma_ms_m": g.sigma_ms_m,
                         "range_ms_m": list(rng)}
                        for row, g, rng in uncertain_grounds(spec.ground)]}


def sun_summary(spec) -> dict:
    """Month-by-month sunrise, sunset and critical hours at the site (coverage/sun.py)."""
    year = spec.output.get("sun_year") or _dt.date.today().year
    offset = spec.output.get("utc_offset_h")
    st = spec.station
    return {"year": year, "day_of_month": MID_MONTH_DAY, "utc_offset_h": offset,
            "clock": "UTC" if offset is None else f"local standard time (UTC{offset:+g} h)",
            "source": "Meeus, Astronomical Algorithms, ch. 25 and 28; sun's centre 0.833 deg "
                      "below the horizon; critical hours per 47 CFR 73.187(a)",
            "months": monthly_sun_times(st.lat, st.lon, year, offset)}


def patterns_csv(spec) -> str:
    """The pattern of each operating period every 5° of elevation (0–60°) and every
    ``table_step_deg`` of azimuth [mV/m at 1 km at the period's power]: theoretical and the
    pattern the rules use (standard, with augmentations), as 47 CFR 73.150(b)(1) tabulates."""
    st = spec.station
    step = float(spec.output.get("table_step_deg", 10.0))
    buf = io.StringIO()
    w = csv_writer(buf)
    w.writerow(["period", "pattern", "power_kw", "elevation_deg", "azimuth_deg",
                "theoretical_mv_m", "pattern_mv_m"])
    for row in period_rows(st):
        if row["power_kw"] <= 0:
            continue
        t = elevation_table(st.radiator(row["period"]), row["power_kw"],
                            np.arange(0.0, 360.0 - 1e-9, step))
        for i, el in enumerate(t["elevation_deg"]):
            for j, az in enumerate(t["azimuth_deg"]):
                w.writerow([row["period"], row["pattern"], f"{row['power_kw']:g}", f"{el:g}",
                            f"{az:g}", f"{t['theoretical_mv_m'][i, j]:.2f}",
                            f"{t['pattern_mv_m'][i, j]:.2f}"])
    return buf.getvalue()


def radials_csv(result: StudyResult) -> str:
    """Bearing × level distances in km and mi, and the stretches beyond the first crossing
    where the field is above the level again (recovery), each in two numeric columns
    (``…_further_N_from_km``, ``…_further_N_to_km``)."""
    buf = io.StringIO()
    w = csv_writer(buf)
    head = ["bearing_deg", "e1km_mv_m"]
    spans = [max((len(f) for f in c.further), default=0) for c in result.contours]
    bands = result.bands or ()
    for c, n in zip(result.contours, spans):
        tag = f"{c.level_mv_m:g}mV_m"
        head += [f"{tag}_km", f"{tag}_mi"]
        for k in range(1, n + 1):
            head += [f"{tag}_further_{k}_from_km", f"{tag}_further_{k}_to_km"]
    for band in bands:  # the contour at the 5 %, 50 % and 95 % points of the ground draws
        head += [f"{band.level_mv_m:g}mV_m_{b}_km" for b in ("p05", "p50", "p95")]
    w.writerow(head)
    for i, b in enumerate(result.radials.bearings_deg):
        row = [f"{b:g}", f"{result.radials.e1km_mv_m[i]:.2f}"]
        for c, n in zip(result.contours, spans):
            d = c.first_km[i]
            if np.isnan(d):
                row += ["not reached", "not reached"]
            elif np.isinf(d):
                row += [f">{result.max_km:.1f}", f">{result.max_km / KM_PER_MI:.1f}"]
            else:
                row += [f"{d:.2f}", f"{d / KM_PER_MI:.2f}"]
            for k in range(n):
                if k < len(c.further[i]):
                    a, e = c.further[i][k]
                    row += [f"{a:.2f}", f"{e:.2f}"]
                else:
                    row += ["", ""]
        for band in bands:
            for b in ("p05", "p50", "p95"):
                d = band.km[b][i]
                row.append(f">{result.max_km:.1f}" if np.isinf(d) else f"{d:.2f}")
        w.writerow(row)
    return buf.getvalue()


#: GeoJSON coordinates are rounded to 1e-6° (about 0.1 m), as RFC 7946 §11.2 suggests.
COORD_PRECISION_DEG = 1e-6


def geojson_geometry(geom) -> dict:
    """A lon/lat (multi)polygon as an RFC 7946 geometry: coordinates on a 1e-6° grid (snapped
    so that the result stays valid), exteriors counter-clockwise, holes clockwise."""
    import shapely
    from shapely.geometry import mapping

    g = shapely.set_precision(geom, COORD_PRECISION_DEG)
    parts = [p for p in shapely.get_parts(g) if p.geom_type == "Polygon" and not p.is_empty]
    if len(parts) == 1:
        g = parts[0]
    else:
        g = shapely.MultiPolygon(parts)
    g = shapely.orient_polygons(g, exterior_cw=False)
    out = mapping(g)
    return json.loads(json.dumps(out))  # tuples → lists


def _feature(kind: str, level, label: str, station, geom, area_km2, extra=None) -> dict:
    props = {"kind": kind, "level_mv_m": level, "label": label, "station": station.name,
             "freq_khz": station.freq_khz, "area_km2": round(float(area_km2), 3)}
    props.update(extra or {})
    return {"type": "Feature", "properties": props, "geometry": geojson_geometry(geom)}


def site_feature(result: StudyResult) -> dict:
    """The transmitter site as a GeoJSON Point."""
    st = result.spec.station
    lon = ((st.lon + 180.0) % 360.0) - 180.0
    return {"type": "Feature",
            "properties": {"kind": "site", "label": st.name, "station": st.name,
                           "freq_khz": st.freq_khz, "power_day_kw": st.power_day_kw,
                           "power_night_kw": st.power_night_kw},
            "geometry": {"type": "Point", "coordinates": [round(lon, 6), round(st.lat, 6)]}}


def contours_geojson(result: StudyResult, extra_features=()) -> dict:
    """The site and one Feature per level (lon/lat, WGS84, RFC 7946): the area where the field
    is at or above the level, recovery areas and holes included."""
    st = result.spec.station
    feats = [site_feature(result)]
    for c in result.contours:
        if c.polygon_lonlat.is_empty:
            continue
        share = None if c.community_share is None else round(c.community_share, SHARE_DIGITS)
        feats.append(_feature("day ground wave", c.level_mv_m, c.label or f"{c.level_mv_m:g} mV/m",
                              st, c.polygon_lonlat, c.area_km2, {"community_share": share}))
    for band in result.bands or ():  # the 5 % and 95 % contours of the ground draws
        for b in ("p05", "p95"):
            g = band.polygons.get(b)
            if g is None or g.is_empty:
                continue
            feats.append(_feature("day ground wave, uncertainty band", band.level_mv_m,
                                  f"{band.level_mv_m:g} mV/m, {b[1:].lstrip('0')} % point", st,
                                  g, band.area_km2[b], {"band": b}))
    feats.extend(extra_features)
    return {"type": "FeatureCollection", "features": feats}


def _kml_coords(coords) -> str:
    return " ".join(f"{x:.6f},{y:.6f},0" for x, y in coords)


def _kml_geometry(geom: dict) -> str:
    if geom["type"] == "Point":
        x, y = geom["coordinates"]
        return f"<Point><coordinates>{x:.6f},{y:.6f},0</coordinates></Point>"
    polys = [geom["coordinates"]] if geom["type"] == "Polygon" else geom["coordinates"]
    out = []
    for rings in polys:
        inner = "".join("<innerBoundaryIs><LinearRing><coordinates>" + _kml_coords(r)
                        + "</coordinates></LinearRing></innerBoundaryIs>" for r in rings[1:])
        out.append("<Polygon><outerBoundaryIs><LinearRing><coordinates>" + _kml_coords(rings[0])
                   + "</coordinates></LinearRing></outerBoundaryIs>" + inner + "</Polygon>")
    return "<MultiGeometry>" + "".join(out) + "</MultiGeometry>"


def _kml_description(p: dict) -> str:
    lines = [f"{p['station']}, {p['freq_khz']:g} kHz"]
    if p.get("kind") == "site":
        lines.append(f"transmitter site; {p['power_day_kw']:g} kW day, "
                     f"{p['power_night_kw']:g} kW night")
    elif p.get("area_km2") is None:  # neighbours' contours and check points
        lines = [f"{p['station']}, {p['freq_khz']:g} kHz" if p.get("freq_khz") else p["station"],
                 f"{p['kind']}: {p['label']}"]
    else:
        lines.append(f"{p['kind']}: {p['label']}")
        lines.append(f"area {p['area_km2']:,.1f} km²")
        if p.get("community_share") is not None:
            lines.append(f"community inside: {100 * p['community_share']:.1f} %")
    return "\n".join(lines)


def contours_kml(geojson: dict, name: str) -> str:
    """KML 2.2 document with one Placemark per GeoJSON feature (outer and inner boundaries),
    outlines coloured by level, and plain-text descriptions."""
    styles, marks = [], []
    for i, f in enumerate(geojson["features"]):
        p = f["properties"]
        kind = p.get("kind")
        if kind == "site":
            style = "<IconStyle><scale>1.1</scale></IconStyle>"
        elif f["geometry"]["type"] == "Point":  # check points: red
            style = "<IconStyle><color>ff1c19d7</color><scale>0.8</scale></IconStyle>"
        elif kind == "neighbour protected contour":
            style = ("<LineStyle><color>ff606060</color><width>1</width></LineStyle>"
                     "<PolyStyle><fill>0</fill></PolyStyle>")
        else:
            colour = ("ff202020" if kind == "night service"
                      else kml_colour(p.get("level_mv_m")))
            style = (f"<LineStyle><color>{colour}</color><width>2</width></LineStyle>"
                     "<PolyStyle><fill>0</fill></PolyStyle>")
        styles.append(f'<Style id="s{i}">{style}</Style>')
        marks.append(f"<Placemark><name>{escape(str(p.get('label')))}</name>"
                     f"<styleUrl>#s{i}</styleUrl>"
                     f"<description>{escape(_kml_description(p))}</description>"
                     f"{_kml_geometry(f['geometry'])}</Placemark>")
    return ('<?xml version="1.0" encoding="UTF-8"?>\n<kml xmlns="http://www.opengis.net/kml/2.2">'
            f"<Document><name>{escape(name)}</name>" + "".join(styles) + "".join(marks)
            + "</Document></kml>\n")


def kml_colour(level_mv_m) -> str:
    """KML colour (aabbggrr) of a contour level: the fixed level colours of the map."""
    from .levels import level_style

    r, g, b = level_style(level_mv_m).rgb
    return f"ff{b:02x}{g:02x}{r:02x}"


def interference_summary(result: StudyResult) -> dict:
    """Maximum powers, per-neighbour worst margins, ratios used and notes (for summary.json)."""
    inter = result.interference
    if inter is None:
        return {}
    def value(v):
        if isinstance(v, str):
            return v
        return [_num(x) for x in v] if isinstance(v, list) else _num(v)

    def clean(d):
        return None if d is None else {k: value(v) for k, v in d.items()}

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
             "night_limit_dbu": float(db), "contour_km": _num(d), "interferers_used": used,
             "carried_by": [f"{m} wave" for m in mech]}
            for b, lim, db, d, used, mech in zip(n.bearings_deg, n.limit_mv_m, n.limit_dbu,
                                                 n.contour_km, n.contributors,
                                                 n.mechanisms or [[]] * len(n.contributors))
        ],
        "neighbour_night_limits": [
            {"neighbour": lim.neighbour, "proposal_excluded": lim.excluded,
             "increase_db": round(lim.increase_db, 3),
             "margin_db": round(lim.margin_db(), 3),
             "points": [{"bearing_deg": float(b), "lat": round(float(a), 6),
                         "lon": round(float(o), 6),
                         "limit_without_mv_m": round(float(10 ** (w / 20) / 1e3), 4),
                         "limit_with_mv_m": round(float(10 ** (x / 20) / 1e3), 4),
                         "proposal_in_rss": bool(u)}
                        for b, a, o, w, x, u in zip(lim.bearings_deg, lim.lat, lim.lon,
                                                    lim.without_dbu, lim.with_dbu,
                                                    lim.proposal_used)]}
            for lim in inter.neighbour_limits],
        "day_overlaps": [{"neighbour": ov.neighbour, "offset_channels": ov.offset_channels,
                          "own_contour_mv_m": ov.own_mv_m, "other_contour_mv_m": ov.other_mv_m,
                          "area_km2": round(ov.area_km2, 3), "points": [list(p) for p in ov.points],
                          "passed": ov.passed, "source": ov.source} for ov in inter.overlaps],
        "skipped": skipped,
        "notes": list(inter.notes),
    }


def interference_csv(result: StudyResult) -> str:
    """One row per neighbour and check point: fields, ratio, margin, pass."""
    buf = io.StringIO()
    w = csv_writer(buf)
    w.writerow(["kind", "neighbour", "offset_channels", "bearing_deg", "lat", "lon",
                "wanted_dbu", "wanted_mv_m", "unwanted_dbu", "unwanted_mv_m", "ratio_db",
                "margin_db", "pass", "mechanism", "overlap_km2"])
    inter = result.interference
    for r in inter.rows:
        w.writerow([r.kind, r.neighbour, r.offset_channels, f"{r.bearing_deg:g}", f"{r.lat:.5f}",
                    f"{r.lon:.5f}", field_text(r.wanted_dbu), mv_m_text(r.wanted_dbu),
                    field_text(r.unwanted_dbu), mv_m_text(r.unwanted_dbu),
                    f"{r.ratio_db:g}", margin_text(r.margin_db, 2), "yes" if r.passed else "NO",
                    f"{r.mechanism} wave", ""])
    # the neighbours' RSS night limits: wanted is the limit without the proposal, unwanted the
    # proposal's ratio × field, at the point that decides; margin as in the summary
    for lim in inter.neighbour_limits:
        i = lim.deciding_point()
        if i is None:
            continue
        w.writerow(["night limit entry", lim.neighbour, "", f"{float(lim.bearings_deg[i]):g}",
                    f"{float(lim.lat[i]):.5f}", f"{float(lim.lon[i]):.5f}",
                    field_text(float(lim.without_dbu[i])), mv_m_text(float(lim.without_dbu[i])),
                    field_text(float(lim.proposal_dbu[i])), mv_m_text(float(lim.proposal_dbu[i])),
                    "", margin_text(lim.margin_db(), 2), "yes" if lim.excluded else "NO",
                    "RSS", ""])
    for ov in inter.overlaps:
        for lat, lon in ov.points or ((None, None),):
            w.writerow(["day overlap", ov.neighbour, ov.offset_channels, "",
                        "" if lat is None else f"{lat:.5f}", "" if lon is None else f"{lon:.5f}",
                        f"{mv_m_to_dbu(ov.other_mv_m):.2f}", f"{ov.other_mv_m:g}",
                        f"{mv_m_to_dbu(ov.own_mv_m):.2f}", f"{ov.own_mv_m:g}", "", "",
                        "yes" if ov.passed else "NO", "ground wave", f"{ov.area_km2:.2f}"])
    return buf.getvalue()


def night_feature(result: StudyResult) -> dict | None:
    """The night service contour as a GeoJSON Feature (None without a night result)."""
    inter = result.interference
    if inter is None or inter.night is None or inter.night.polygon_lonlat.is_empty:
        return None
    n = inter.night
    med = round(float(np.median(n.limit_mv_m)), 4)
    return _feature("night service", med, f"night service (night limit {med:.3g} mV/m median)",
                    result.spec.station, n.polygon_lonlat, n.area_km2,
                    {"night_limit_min_mv_m": round(float(n.limit_mv_m.min()), 4),
                     "night_limit_max_mv_m": round(float(n.limit_mv_m.max()), 4)})


def _point(lat: float, lon: float, props: dict) -> dict:
    lon = ((lon + 180.0) % 360.0) - 180.0
    return {"type": "Feature", "properties": props,
            "geometry": {"type": "Point", "coordinates": [round(lon, 6), round(lat, 6)]}}


def interference_features(result: StudyResult) -> list[dict]:
    """The neighbours' protected contours the checks used, a point in each failing contour
    overlap and every failed D/U check point, each saying what it is."""
    inter = result.interference
    if inter is None:
        return []
    spec = result.spec
    freqs = {n.name: n.freq_khz for n in spec.interference.neighbours}
    feats = []
    for (name, period), geom in inter.protected_contours.items():
        if geom.is_empty:
            continue
        feats.append({"type": "Feature",
                      "properties": {"kind": "neighbour protected contour",
                                     "label": f"{name}: protected {period} contour",
                                     "station": name, "freq_khz": freqs.get(name),
                                     "period": period},
                      "geometry": geojson_geometry(geom)})
    for ov in inter.overlaps:
        if ov.passed:
            continue
        for lat, lon in ov.points:
            feats.append(_point(lat, lon, {
                "kind": "contour overlap", "station": ov.neighbour,
                "freq_khz": freqs.get(ov.neighbour),
                "label": f"{ov.neighbour}: {ov.own_mv_m:g} and {ov.other_mv_m:g} mV/m contours "
                         f"overlap ({ov.area_km2:.1f} km²)",
                "overlap_km2": round(ov.area_km2, 3), "offset_channels": ov.offset_channels}))
    for r in inter.rows:
        if r.passed:
            continue
        feats.append(_point(r.lat, r.lon, {
            "kind": "failed check", "station": r.neighbour, "freq_khz": freqs.get(r.neighbour),
            "label": f"{r.neighbour}: {r.kind}, margin {r.margin_db:.2f} dB",
            "check": r.kind, "margin_db": round(r.margin_db, 3), "ratio_db": r.ratio_db,
            "mechanism": f"{r.mechanism} wave"}))
    return feats


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
        extra_features.extend(interference_features(result))
        extra_files["night.json"] = json_text(night_json(result), indent=1)
        extra_files["interference.csv"] = interference_csv(result)
    gj = contours_geojson(result, extra_features)
    files = {
        "summary.json": json_text(summary_dict(result, extra_summary), indent=1),
        "radials.csv": radials_csv(result),
        "contours.geojson": json_text(gj),
        "contours.kml": contours_kml(gj, result.spec.title),
        "patterns.csv": patterns_csv(result.spec),
    }
    files.update(extra_files or {})
    return write_set(out, files, known_names=OUTPUT_NAMES, inputs=result.spec.input_files)
