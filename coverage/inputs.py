"""Every file the tool reads, and every key of every table, checked in one place.

Study files (TOML), array files (TOML), conductivity zones and community boundaries (GeoJSON) and
neighbour lists (CSV) are read here and nowhere else. The physics modules take plain records
(:class:`~.ground.Ground`, :class:`~.antenna.Array`, :class:`~.interference.Neighbour` …) and
never open a file.

Rules that hold for every input:

- A mistake raises ``ValueError`` with one line that names the file, the table (or line and
  column) and the key, the bad value and what is valid.
- Numbers must be numbers: TOML booleans and quoted strings are refused, not converted. CSV
  cells are text by nature and are converted here, with the line and column in any error.
- A UTF-8 byte-order mark (as spreadsheets write) is accepted; text that is not UTF-8 is refused
  with the file's name; a folder given where a file is expected is named as a folder.
- Geometry that had to be repaired (self-intersections) is used repaired and reported in the
  study's notes; an empty geometry or a coordinate that is not a finite lon/lat is an error.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import json
import math
import pathlib
import tomllib
import warnings

import numpy as np

from .validate import check_finite, check_keys, shown, where_join

__all__ = [
    "read_text",
    "read_toml",
    "read_json",
    "read_csv",
    "file_key",
    "text_value",
    "choice",
    "load_zones",
    "read_boundary",
    "read_population",
    "array_from_table",
    "array_to_table",
    "facility_from_table",
    "facility_to_table",
    "neighbour_from_table",
    "read_neighbours_csv",
    "protection_from_table",
    "night_from_table",
    "parse_study",
    "load_study",
    "load_study_doc",
    "dump_toml",
    "spec_to_doc",
    "spec_to_toml",
    "check_round_trip",
]


# --- plain files -----------------------------------------------------------------------------

def _article(what: str) -> str:
    return ("an " if what[:1].lower() in "aeiou" else "a ") + what


#: the largest input file read [bytes]: far above any study, zones or neighbours file a person
#: makes (the demo's largest is tens of kB), low enough that /dev/zero or a wrong file named
#: by mistake is refused at once instead of filling memory
MAX_INPUT_BYTES = 64 * 1024 * 1024


def _existing_file(path, what: str = "file") -> pathlib.Path:
    path = pathlib.Path(path)
    if path.is_dir():
        raise ValueError(f"{path}: is a folder; expected {_article(what)}")
    if not path.exists():
        raise ValueError(f"{path}: {what} not found")
    if not path.is_file():  # a device, a pipe (which would block), a socket
        raise ValueError(f"{path}: is not a regular file (a device, pipe or socket); "
                         f"expected {_article(what)}")
    return path


def read_text(path, what: str = "file") -> str:
    """A UTF-8 text file's contents (a leading byte-order mark is dropped).

    Errors name the file: not found, a folder, a device or pipe, larger than
    :data:`MAX_INPUT_BYTES`, not UTF-8 text, unreadable.
    """
    path = _existing_file(path, what)
    try:
        with path.open("rb") as fh:
            raw = fh.read(MAX_INPUT_BYTES + 1)
    except OSError as exc:
        raise ValueError(f"{path}: cannot read ({exc.strerror})") from None
    if len(raw) > MAX_INPUT_BYTES:
        raise ValueError(f"{path}: larger than {MAX_INPUT_BYTES // 2**20} MiB, the most "
                         f"{_article(what)} may be")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ValueError(f"{path}: not UTF-8 text (byte {exc.start}); save it as UTF-8") from None


def read_toml(path, what: str = "TOML file") -> dict:
    """Parse a TOML file; syntax errors keep tomllib's line and column and name the file."""
    text = read_text(path, what)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: {exc}") from None
    except ValueError:  # Python's limit on the digits of an integer (4300)
        import re

        m = re.search(r"\d{4000,}", text)
        line = text.count("\n", 0, m.start()) + 1 if m else "?"
        raise ValueError(f"{path}: line {line}: a number with more digits than any value "
                         "needs (Python reads at most 4300)") from None


def read_json(path, what: str = "GeoJSON file"):
    """Parse a JSON/GeoJSON file; syntax errors name the file, line and column."""
    text = read_text(path, what)
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise ValueError(f"{path}: not valid JSON (line {exc.lineno}, column {exc.colno}): "
                         f"{exc.msg}") from None
    except RecursionError:
        raise ValueError(f"{path}: JSON nested too deeply") from None


def read_csv(path, columns, required=()) -> list[tuple[str, dict]]:
    """Rows of a CSV file with a header row: a list of (``"line N of FILE"``, {column: text}).

    Empty cells are left out; unknown columns, missing required columns, rows with more cells
    than the header and semicolon-separated files are refused with the file and line.
    """
    path = pathlib.Path(path)
    text = read_text(path, "CSV file")
    reader = csv.DictReader(io.StringIO(text, newline=""))
    try:
        header = reader.fieldnames
    except csv.Error as exc:
        raise ValueError(f"{path}: not a CSV file ({exc})") from None
    if not header:
        raise ValueError(f"{path}: empty file; expected a header row ({', '.join(columns)})")
    names = [h.strip() for h in header]
    if len(names) == 1 and ";" in names[0]:
        raise ValueError(f"line 1 of {path}: the header is separated by semicolons; "
                         "save the file with commas as separators")
    for h in names:
        if h not in columns:
            raise ValueError(f"line 1 of {path}: unknown column {h!r}; valid columns: "
                             f"{', '.join(columns)}")
    for h in required:
        if h not in names:
            raise ValueError(f"line 1 of {path}: missing column {h!r}")
    rows = []
    try:
        for row in reader:
            where = f"line {reader.line_num} of {path}"
            if None in row:
                raise ValueError(f"{where}: more cells than header columns")
            clean = {k.strip(): v.strip() for k, v in row.items()
                     if isinstance(v, str) and v.strip() != ""}
            if clean:
                rows.append((where, clean))
    except csv.Error as exc:
        raise ValueError(f"line {reader.line_num} of {path}: not valid CSV ({exc})") from None
    return rows


def _csv_numbers(row: dict, keys, where: str) -> dict:
    """CSV cells are text: convert the numeric columns, naming the column on failure."""
    out = dict(row)
    for k in keys:
        if k in out:
            try:
                out[k] = float(out[k])
            except ValueError:
                raise ValueError(f"{k} must be a number (got {out[k]!r}) in {where}") from None
    return out


# --- typed values ----------------------------------------------------------------------------

TEXT_MAX_CHARS = 200


def text_value(name: str, value, where: str) -> str:
    """A text value (names, titles, labels); numbers, booleans and dates are refused, and so
    are control characters (a tab, a NUL: they break CSV, XML and file names downstream) and
    text longer than ``TEXT_MAX_CHARS``."""
    import unicodedata

    if not isinstance(value, str):
        raise ValueError(f"{name} must be text in quotes (got {_show(value)}) in {where}")
    bad = next((c for c in value if unicodedata.category(c) == "Cc"), None)
    if bad is not None:
        raise ValueError(f"{name} must not contain control characters (found U+{ord(bad):04X}) "
                         f"in {where}")
    if len(value) > TEXT_MAX_CHARS:
        raise ValueError(f"{name} must be at most {TEXT_MAX_CHARS} characters (got "
                         f"{len(value)}) in {where}")
    return value


def choice(name: str, value, options, where: str):
    """One of ``options``: text compared without regard to case, numbers by value; a boolean
    is never taken for a number. Returns the option as spelled in ``options``."""
    if not isinstance(value, (bool, np.bool_)):
        for o in options:
            if isinstance(o, str) and isinstance(value, str) and value.lower() == o.lower():
                return o
            if not isinstance(o, str) and isinstance(value, (int, float)) and value == o:
                return o
    shown = ", ".join(repr(o) if isinstance(o, str) else f"{o:g}" for o in options)
    raise ValueError(f"{name} must be one of {shown} (got {_show(value)}) in {where}")


def _show(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (_dt.date, _dt.time)):
        return f"the date/time {value.isoformat()}"
    return shown(value)


def file_key(table: dict, key: str, where: str, base: pathlib.Path, what: str) -> pathlib.Path:
    """A file named in a study table, resolved against the study's folder; it must exist."""
    rel = table[key]
    if not isinstance(rel, str) or not rel.strip():
        raise ValueError(f"{key} must be a file name in quotes (got {_show(rel)}) in {where}")
    path = base / rel
    if path.is_dir():
        raise ValueError(f"{key} = {rel!r} in {where} is a folder; expected {_article(what)}")
    if not path.exists():
        raise ValueError(f"{what} {str(path)!r} not found ({key} in {where})")
    return path


def _table(doc: dict, key: str, where: str) -> dict:
    value = doc.get(key, {})
    if not isinstance(value, dict):
        raise ValueError(f"[{key}] must be a table in {where}")
    return value


#: the most entries each list of a study may hold: each far above a real study (a crowded
#: channel has hundreds of neighbours, a band-wide list a few thousand), low enough that a
#: pasted column of 100 000 values is refused at once rather than run for hours
LIST_LIMITS = {"bearings": 3600, "contour": 20, "neighbour": 10_000, "station_class": 100,
               "zones": 10_000, "readings": 100_000, "augmentation": 72,
               "population": 2_000_000}


def check_count(key: str, n: int, where: str) -> None:
    """Refuse a list longer than ``LIST_LIMITS[key]``, naming the key and the file."""
    limit = LIST_LIMITS[key]
    if n > limit:
        raise ValueError(f"{key}: {n} entries, more than the {limit} a study may hold, in "
                         f"{where}")


def _list_of_tables(doc: dict, key: str, where: str, label: str) -> list:
    value = doc.get(key, [])
    if not isinstance(value, list):
        raise ValueError(f"{key} must be a list of {label} tables in {where}")
    check_count(key, len(value), where)
    for i, t in enumerate(value, 1):
        if not isinstance(t, dict):
            raise ValueError(f"{label} {i} must be a table in {where}")
    return value


# --- GeoJSON ---------------------------------------------------------------------------------

def _polygon(geom_json, where: str, notes: list):
    """A shapely (Multi)Polygon from a GeoJSON geometry: finite lon/lat, non-empty, valid
    (self-intersections repaired and reported in ``notes``)."""
    import shapely
    from shapely.geometry import shape

    if not isinstance(geom_json, dict) or geom_json.get("type") not in ("Polygon",
                                                                        "MultiPolygon"):
        got = geom_json.get("type") if isinstance(geom_json, dict) else geom_json
        raise ValueError(f"{where}: geometry must be a Polygon or MultiPolygon (got {got!r})")
    _numeric_coordinates(geom_json.get("coordinates"), where)
    try:
        with warnings.catch_warnings():  # NaN coordinates: refused just below, in one line
            warnings.simplefilter("ignore", RuntimeWarning)
            geom = shape(geom_json)
        coords = shapely.get_coordinates(geom)
    except Exception as exc:  # shapely raises several types for malformed coordinates
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise ValueError(f"{where}: malformed coordinates ({msg})") from None
    if coords.size and not np.isfinite(coords).all():
        raise ValueError(f"{where}: coordinates must be finite numbers (found NaN or infinity)")
    if geom.is_empty:
        raise ValueError(f"{where}: the polygon is empty (no area)")
    lon, lat = coords[:, 0], coords[:, 1]
    if lon.min() < -180 or lon.max() > 360 or lat.min() < -90 or lat.max() > 90:
        raise ValueError(f"{where}: coordinates must be lon/lat degrees (lon −180..360, lat "
                         f"−90..90; bounds {tuple(round(v, 4) for v in geom.bounds)})")
    from .geodesy import wrap_lonlat_polygons

    geom = wrap_lonlat_polygons(geom)  # a ring across ±180° covers what it encloses
    if not geom.is_valid:
        reason = shapely.is_valid_reason(geom)
        geom = shapely.make_valid(geom)
        geom = shapely.union_all([g for g in shapely.get_parts(geom)
                                  if g.geom_type in ("Polygon", "MultiPolygon")])
        notes.append(f"{where}: invalid polygon ({reason}) was repaired; check the drawing")
    if geom.is_empty or geom.area == 0:
        raise ValueError(f"{where}: the polygon is empty (no area)")
    return geom


def _numeric_coordinates(coords, where: str, depth: int = 0) -> None:
    """GeoJSON positions are JSON numbers (RFC 7946 §3.1.1): a coordinate written as text
    (``"-46.5"``) or a boolean is refused rather than converted."""
    if depth > 4 or not isinstance(coords, list):
        raise ValueError(f"{where}: coordinates must be nested lists of numbers")
    for c in coords:
        if isinstance(c, list):
            _numeric_coordinates(c, where, depth + 1)
        elif isinstance(c, bool) or not isinstance(c, (int, float)):
            raise ValueError(f"{where}: coordinates must be numbers (got {_show(c)})")


def _features(data, path) -> list:
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection":
        raise ValueError(f"{path}: expected a GeoJSON FeatureCollection")
    features = data.get("features", [])
    if not isinstance(features, list):
        raise ValueError(f"{path}: 'features' must be a list of GeoJSON Features")
    return features


def _feature_properties(features, path):
    """(``"feature N of FILE"``, feature, properties) for each GeoJSON Feature, refusing what
    is not a Feature or whose properties are not an object."""
    for i, feat in enumerate(features, 1):
        where = f"feature {i} of {path}"
        if not isinstance(feat, dict) or feat.get("type") != "Feature":
            raise ValueError(f"{where}: expected a GeoJSON Feature")
        props = feat.get("properties") or {}
        if not isinstance(props, dict):
            raise ValueError(f"{where}: properties must be an object")
        yield where, feat, props


ZONE_PROPERTIES = ("conductivity_ms_m", "permittivity", "name", "note", "buildable", "fit",
                   "conductivity_range_ms_m")


def sigma_range(name: str, value, nominal: float, where: str) -> tuple[float, float]:
    """A conductivity range [lo, hi] in mS/m (the 5 % and 95 % points of a log-normal σ):
    a list of two numbers with 0 < lo ≤ hi, holding the nominal conductivity."""
    if not isinstance(value, list) or len(value) != 2:
        raise ValueError(f"{name} must be a list [lo, hi] of two conductivities in mS/m "
                         f"(got {_show(value)}) in {where}")
    lo = check_finite(f"{name} lo", value[0], 1e-4, 1e7, where=where)
    hi = check_finite(f"{name} hi", value[1], 1e-4, 1e7, where=where)
    if lo > hi:
        raise ValueError(f"{name} must have lo <= hi (got [{lo:g}, {hi:g}]) in {where}")
    if not lo * (1 - 1e-9) <= nominal <= hi * (1 + 1e-9):
        raise ValueError(f"{name} [{lo:g}, {hi:g}] must hold the conductivity {nominal:g} mS/m "
                         f"in {where}")
    return (lo, hi)


def load_zones(path, default, notes: list | None = None):
    """Conductivity zones from a GeoJSON FeatureCollection → :class:`~.ground.GroundMap`.

    Each feature: a Polygon or MultiPolygon (lon/lat, WGS84) with properties
    ``conductivity_ms_m`` and ``permittivity`` (``name`` and ``note`` optional). Errors name the
    file, the feature and the property; repairs go into ``notes``.
    """
    from .ground import Ground, GroundMap, Zone

    notes = [] if notes is None else notes
    path = pathlib.Path(path)
    zones = []
    features = _features(read_json(path), path)
    check_count("zones", len(features), str(path))
    for i, (where, feat, props) in enumerate(_feature_properties(features, path), 1):
        check_keys(props, ZONE_PROPERTIES, f"properties of {where}",
                   required=("conductivity_ms_m", "permittivity"))
        name = props.get("name")
        name = f"zone {i}" if name in (None, "") else text_value("name", name, where)
        pw = f"properties of {where}"
        ground = Ground(check_finite("conductivity_ms_m", props["conductivity_ms_m"], 1e-4, 1e7,
                                     where=pw),
                        check_finite("permittivity", props["permittivity"], 1.0, 100.0, where=pw),
                        name=name, source=str(path.name))
        buildable = props.get("buildable", True)
        if not isinstance(buildable, bool):
            raise ValueError(f"buildable must be true or false (got {_show(buildable)}) in {pw}")
        fit = props.get("fit", False)
        if not isinstance(fit, bool):
            raise ValueError(f"fit must be true or false (got {_show(fit)}) in {pw}")
        rng = (sigma_range("conductivity_range_ms_m", props["conductivity_range_ms_m"],
                           ground.sigma_ms_m, pw)
               if "conductivity_range_ms_m" in props else None)
        zones.append(Zone(name, ground, _polygon(feat.get("geometry"), where, notes), buildable,
                          fit, rng))
    if not zones:
        notes.append(f"{path}: the zones file holds no feature; the default ground is used "
                     "everywhere")
    return GroundMap(default, zones, source=str(path))


def read_population(path, prop: str = "population", notes: list | None = None):
    """A population layer (:class:`~.population.Population`) from a GeoJSON FeatureCollection
    of Polygons/MultiPolygons (counted by area share) and Points (counted whole) with a numeric
    property ``prop``, or from a CSV of points with columns ``lat``, ``lon`` and ``prop``
    (``name`` optional). Every count must be a number >= 0; errors name the file, the feature
    or line, and the property."""
    from .population import Population

    notes = [] if notes is None else notes
    path = pathlib.Path(path)
    polys, poly_people, lon, lat, pt_people = [], [], [], [], []
    if path.suffix.lower() == ".csv":
        rows = read_csv(path, ("lat", "lon", prop, "name"), ("lat", "lon", prop))
        check_count("population", len(rows), str(path))
        for where, row in rows:
            nums = _csv_numbers(row, ("lat", "lon", prop), where)
            for k in ("lat", "lon", prop):
                if k not in nums:
                    raise ValueError(f"{where}: missing value in column {k!r}")
            la = check_finite("lat", nums["lat"], -90.0, 90.0, where=where)
            lo = check_finite("lon", nums["lon"], -180.0, 180.0, where=where)
            lat.append(la)
            lon.append(lo)
            pt_people.append(check_finite(prop, nums[prop], 0.0, 1e10, where=where))
    else:
        features = _features(read_json(path), path)
        check_count("population", len(features), str(path))
        for where, feat, props in _feature_properties(features, path):
            if prop not in props:
                raise ValueError(f"{where}: missing property {prop!r} (the population count; "
                                 "[population] property names another)")
            n = check_finite(prop, props[prop], 0.0, 1e10, where=f"properties of {where}")
            geom = feat.get("geometry")
            if isinstance(geom, dict) and geom.get("type") == "Point":
                c = geom.get("coordinates")
                _numeric_coordinates([c] if isinstance(c, list) else c, where)
                if len(c) < 2:
                    raise ValueError(f"{where}: a Point needs [lon, lat]")
                lon.append(check_finite("lon", c[0], -180.0, 180.0, where=where))
                lat.append(check_finite("lat", c[1], -90.0, 90.0, where=where))
                pt_people.append(n)
            else:
                polys.append(_polygon(geom, where, notes))
                poly_people.append(n)
    if not polys and not lon:
        notes.append(f"{path}: the population layer holds nobody; every count is 0")
    return Population(np.array(polys, dtype=object), np.array(poly_people, float),
                      np.array(lon, float), np.array(lat, float), np.array(pt_people, float),
                      source=str(path), key=prop)


def read_boundary(path, notes: list | None = None, what: str = "community boundary"):
    """A polygon file: GeoJSON Polygon/MultiPolygon, Feature or FeatureCollection (a community
    boundary, a search area, an exclusion …; ``what`` names it in messages)."""
    import shapely

    notes = [] if notes is None else notes
    path = pathlib.Path(path)
    data = read_json(path)
    if isinstance(data, dict) and data.get("type") == "FeatureCollection":
        geoms = [f.get("geometry") if isinstance(f, dict) else None
                 for f in _features(data, path)]
    elif isinstance(data, dict) and data.get("type") == "Feature":
        geoms = [data.get("geometry")]
    else:
        geoms = [data]
    if not geoms:
        raise ValueError(f"{path}: no boundary polygon found")
    parts = [_polygon(g, f"{what} {i} of {path}" if len(geoms) > 1 else f"{what} in {path}",
                      notes)
             for i, g in enumerate(geoms, 1)]
    return shapely.union_all(parts)


# --- antennas --------------------------------------------------------------------------------

TOWER_KEYS = (
    "height_deg", "height_m", "top_loading_deg", "loss_ohm", "efficiency",
    "field_ratio", "phase_deg", "spacing_deg", "orientation_deg",
)


def array_from_table(table: dict, freq_khz: float, where: str):
    """An :class:`~.antenna.Array` from the antenna table of a study or an array file.

    ``table`` holds ``rotation_deg`` (optional) and a list ``tower`` of tables with the keys of
    :data:`TOWER_KEYS`; a tower needs exactly one of ``height_deg`` or ``height_m``.
    """
    from .antenna import MAX_TOWERS, Array, Element, Tower

    check_keys(table, ("rotation_deg", "tower"), where, required=("tower",))
    towers = table["tower"]
    if not isinstance(towers, list) or not towers:
        raise ValueError(f"'tower' must be a non-empty list of [[tower]] tables in {where}")
    if len(towers) > MAX_TOWERS:
        raise ValueError(f"an array must have 1 to {MAX_TOWERS} towers (got {len(towers)}) "
                         f"in {where}")
    elements = []
    for i, t in enumerate(towers, 1):
        tw = where_join(f"tower {i}", where)
        if not isinstance(t, dict):
            raise ValueError(f"tower {i} must be a table in {where}")
        check_keys(t, TOWER_KEYS, tw)
        if ("height_deg" in t) == ("height_m" in t):
            raise ValueError(f"give exactly one of height_deg or height_m in {tw}")
        num = {k: check_finite(k, t[k], where=tw) for k in TOWER_KEYS if k in t}
        try:
            common = dict(top_loading_deg=num.get("top_loading_deg", 0.0),
                          loss_ohm=num.get("loss_ohm", 0.0), efficiency=num.get("efficiency"))
            tower = (Tower(num["height_deg"], **common) if "height_deg" in num
                     else Tower.from_height_m(num["height_m"], freq_khz, **common))
            elements.append(Element(tower, field_ratio=num.get("field_ratio", 1.0),
                                    phase_deg=num.get("phase_deg", 0.0),
                                    spacing_deg=num.get("spacing_deg", 0.0),
                                    orientation_deg=num.get("orientation_deg", 0.0)))
        except ValueError as exc:
            raise ValueError(f"{exc} in {tw}") from None
    rotation = check_finite("rotation_deg", table.get("rotation_deg", 0.0), where=where)
    try:
        return Array(tuple(elements), rotation_deg=rotation)
    except ValueError as exc:
        raise ValueError(f"{exc} in {where}") from None


FACILITY_KEYS = ("rotation_deg", "tower", "pattern", "augmentation")
AUGMENTATION_KEYS = ("azimuth_deg", "span_deg", "field_mv_m")


def facility_from_table(table: dict, freq_khz: float, where: str):
    """A :class:`~.pattern.Facility` (towers, pattern kind, augmentations) from an antenna
    table of a study (``[antenna]``, ``[antenna_night]`` …) or an array file."""
    from .pattern import PATTERN_KINDS, Augmentation, Facility

    check_keys(table, FACILITY_KEYS, where, required=("tower",))
    array = array_from_table({k: table[k] for k in ("rotation_deg", "tower") if k in table},
                             freq_khz, where)
    kind = ""
    if "pattern" in table:
        kind = choice("pattern", table["pattern"], PATTERN_KINDS, where)
    augs = table.get("augmentation", [])
    if not isinstance(augs, list):
        raise ValueError(f"'augmentation' must be a list of [[augmentation]] tables in {where}")
    check_count("augmentation", len(augs), where)
    parsed = []
    for i, t in enumerate(augs, 1):
        wa = where_join(f"augmentation {i}", where)
        if not isinstance(t, dict):
            raise ValueError(f"augmentation {i} must be a table in {where}")
        check_keys(t, AUGMENTATION_KEYS, wa, required=AUGMENTATION_KEYS)
        num = {k: check_finite(k, t[k], where=wa) for k in AUGMENTATION_KEYS}
        try:
            parsed.append(Augmentation(**num))
        except ValueError as exc:
            raise ValueError(f"{exc} in {wa}") from None
    try:
        return Facility(array, kind, tuple(parsed))
    except ValueError as exc:
        raise ValueError(f"{exc} in {where}") from None


def _check_facility(fac, power_kw: float, where: str) -> None:
    """Build the facility's pattern at its power now, so that a refused augmentation names
    the table it came from (augmented fields are stated at the period's power; a period
    without power has nothing to check)."""
    if not power_kw > 0:
        return
    try:
        fac.radiator(power_kw)
    except ValueError as exc:
        raise ValueError(f"{exc} in {where}") from None


def facility_to_table(array, kind: str = "", augmentations=()) -> dict:
    """Inverse of :func:`facility_from_table`, for writing studies."""
    out = array_to_table(array)
    if kind:
        out["pattern"] = kind
    if augmentations:
        out["augmentation"] = [{"azimuth_deg": a.azimuth_deg, "span_deg": a.span_deg,
                                "field_mv_m": a.field_mv_m} for a in augmentations]
    return out


def array_to_table(array) -> dict:
    """Inverse of :func:`array_from_table` (electrical heights), for writing studies."""
    towers = []
    for e in array.elements:
        t = {"height_deg": e.tower.height_deg, "field_ratio": e.field_ratio,
             "phase_deg": e.phase_deg, "spacing_deg": e.spacing_deg,
             "orientation_deg": e.orientation_deg}
        if e.tower.top_loading_deg:
            t["top_loading_deg"] = e.tower.top_loading_deg
        if e.tower.efficiency is not None:
            t["efficiency"] = e.tower.efficiency
        else:
            t["loss_ohm"] = e.tower.loss_ohm
        towers.append(t)
    return {"rotation_deg": array.rotation_deg, "tower": towers}


# --- neighbours ------------------------------------------------------------------------------

NEIGHBOUR_KEYS = ("name", "lat", "lon", "freq_khz", "power_day_kw", "power_night_kw",
                  "height_deg", "height_m", "loss_ohm", "array", "array_night",
                  "protected_day_mv_m", "protected_night_mv_m", "class")
NEIGHBOUR_REQUIRED = ("name", "lat", "lon", "freq_khz", "power_day_kw")
_NEIGHBOUR_NUMBERS = ("lat", "lon", "freq_khz", "power_day_kw", "power_night_kw", "height_deg",
                      "height_m", "loss_ohm", "protected_day_mv_m", "protected_night_mv_m")
#: The class a neighbour is taken to be when none is given: the common full-time class B.
DEFAULT_CLASS = "B"


def neighbour_from_table(t: dict, where: str, base: pathlib.Path, inputs: list | None = None,
                         classes: dict | None = None):
    """A :class:`~.interference.Neighbour` from a ``[[neighbour]]`` table (or a converted CSV
    row). ``inputs`` collects the files read (array files)."""
    from .antenna import Array, Element, Tower
    from .geodesy import check_site
    from .interference import Neighbour

    check_keys(t, NEIGHBOUR_KEYS, where, required=NEIGHBOUR_REQUIRED)
    name = text_value("name", t["name"], where)
    if not name.strip():
        raise ValueError(f"name must not be empty in {where}")
    lat, lon = check_site(t["lat"], t["lon"], where=where)
    freq = check_finite("freq_khz", t["freq_khz"], 150.0, 30_000.0, where=where)
    p_day = check_finite("power_day_kw", t["power_day_kw"], 0.0, 1e4, where=where, low_open=True)
    p_night = check_finite("power_night_kw", t.get("power_night_kw", p_day), 0.0, 1e4,
                           where=where)
    given = [k for k in ("height_deg", "height_m", "array") if k in t]
    if len(given) != 1:
        raise ValueError(f"give exactly one of height_deg, height_m or array in {where}")
    desc = {k: t[k] for k in ("height_deg", "height_m", "loss_ohm", "array", "array_night")
            if k in t}
    kind, augs, night = "", (), None
    if "array_night" in t:  # the night facility: its own array file
        npath = file_key(t, "array_night", where, base, "array file")
        if inputs is not None:
            inputs.append(npath)
        night = facility_from_table(read_toml(npath, "array file"), freq, str(npath))
        _check_facility(night, p_night, str(npath))
    if given[0] == "array":
        apath = file_key(t, "array", where, base, "array file")
        if inputs is not None:
            inputs.append(apath)
        if "loss_ohm" in t:
            raise ValueError(f"give loss_ohm inside the array file, not beside array, in {where}")
        fac = facility_from_table(read_toml(apath, "array file"), freq, str(apath))
        _check_facility(fac, p_day, str(apath))
        antenna, kind, augs = fac.array, fac.kind, fac.augmentations
    else:
        loss = check_finite("loss_ohm", t.get("loss_ohm", 0.0), 0.0, 1e4, where=where)
        h = check_finite(given[0], t[given[0]], where=where)
        try:
            tower = (Tower(h, loss_ohm=loss) if given[0] == "height_deg"
                     else Tower.from_height_m(h, freq, loss_ohm=loss))
        except ValueError as exc:
            raise ValueError(f"{exc} in {where}") from None
        antenna = Array((Element(tower),))
    from .classes import STATION_CLASSES

    klass = t.get("class", DEFAULT_CLASS)
    choice("class", klass, tuple(classes or STATION_CLASSES), where)
    levels = {k: check_finite(k, t[k], 0.01, 100.0, where=where)
              for k in ("protected_day_mv_m", "protected_night_mv_m") if k in t}
    return Neighbour(
        name=name, lat=lat, lon=lon, freq_khz=freq, power_day_kw=p_day,
        power_night_kw=p_night, antenna=antenna, pattern=kind, augmentations=augs, night=night,
        protected_day_mv_m=levels.get("protected_day_mv_m"),
        protected_night_mv_m=levels.get("protected_night_mv_m"),
        antenna_desc=desc, station_class=str(klass).upper(),
    )


def read_neighbours_csv(path, inputs: list | None = None, classes: dict | None = None) -> list:
    """Neighbours from a CSV file with a header row of :data:`NEIGHBOUR_KEYS` columns
    (``name``, ``lat``, ``lon``, ``freq_khz``, ``power_day_kw`` required; an empty cell takes the
    default). Errors name the file, the line and the column."""
    path = pathlib.Path(path)
    out = []
    rows = read_csv(path, NEIGHBOUR_KEYS, NEIGHBOUR_REQUIRED)
    check_count("neighbour", len(rows), str(path))
    for where, row in rows:
        out.append(neighbour_from_table(_csv_numbers(row, _NEIGHBOUR_NUMBERS, where), where,
                                        path.parent, inputs, classes))
    return out


# --- field-strength measurements -----------------------------------------------------------

MEASUREMENT_COLUMNS = ("lat", "lon", "field_mv_m", "field_dbu", "bearing_deg", "dist_km",
                       "radial", "note")


def read_measurements(path, spec) -> dict:
    """Readings from a CSV file, grouped by radial: {radial name: [Reading, …]}.

    Columns: ``lat``, ``lon`` and one of ``field_mv_m`` or ``field_dbu``; optional
    ``bearing_deg`` and ``dist_km`` (else computed from the study's site), ``radial`` (a name
    grouping readings; else the bearing rounded to the degree), ``note``.
    """
    from .fit import Reading
    from .geodesy import check_site, inverse
    from .groundwave import mv_m_to_dbu

    path = pathlib.Path(path)
    st = spec.station
    groups: dict = {}
    rows = read_csv(path, MEASUREMENT_COLUMNS, ("lat", "lon"))
    check_count("readings", len(rows), str(path))
    for where, row in rows:
        num = _csv_numbers(row, ("lat", "lon", "field_mv_m", "field_dbu", "bearing_deg",
                                 "dist_km"), where)
        lat, lon = check_site(num["lat"], num["lon"], where=where)
        if ("field_mv_m" in num) == ("field_dbu" in num):
            raise ValueError(f"give one of field_mv_m or field_dbu in {where}")
        if "field_mv_m" in num:
            f = float(mv_m_to_dbu(check_finite("field_mv_m", num["field_mv_m"], 0.0, 1e6,
                                               where=where, low_open=True)))
        else:
            f = check_finite("field_dbu", num["field_dbu"], -60.0, 240.0, where=where)
        dist, az, _ = inverse(st.lat, st.lon, lat, lon)
        d = (check_finite("dist_km", num["dist_km"], 0.0, 20_000.0, where=where, low_open=True)
             if "dist_km" in num else float(dist))
        b = (check_finite("bearing_deg", num["bearing_deg"], 0.0, 360.0, where=where)
             if "bearing_deg" in num else float(az))
        if d <= 0:
            raise ValueError(f"the reading is at the site itself in {where}")
        name = (text_value("radial", row["radial"], where) if row.get("radial")
                else f"{round(b) % 360:03d}°")
        note = text_value("note", row.get("note") or "", where)
        line = int(where.split()[1])
        groups.setdefault(name, []).append(Reading(d, f, lat, lon, b, note, line))
    if not groups:
        raise ValueError(f"{path}: no readings")
    return groups


# --- night and protection --------------------------------------------------------------------

def protection_from_table(table: dict, where: str):
    """``[protection]``: ``raster_khz`` and ``day_co_channel_db``, ``night_adjacent_1_db`` …"""
    from .classes import PROTECTION_PLANS
    from .interference import ORDINALS, ProtectionTable

    keys = (["plan", "raster_khz", "spacing_curve"]
            + [f"{p}_{o}_db" for p in ("day", "night") for o in ORDINALS])
    check_keys(table, keys, where)
    plan = choice("plan", table.get("plan", "us"), tuple(PROTECTION_PLANS), where)
    base = PROTECTION_PLANS[plan]
    raster = choice("raster_khz", table.get("raster_khz", int(base["raster_khz"])), (10, 9),
                    where)
    ratios = dict(base["ratios"])
    for p in ("day", "night"):
        for i, o in enumerate(ORDINALS):
            k = f"{p}_{o}_db"
            if k in table:
                v = check_finite(k, table[k], -60.0, 60.0, where=where)
                default = base["ratios"].get((p, i))
                same = default is not None and default[0] == v
                ratios[(p, i)] = (v, default[1] if same else f"set in the study file ({k})")
    extra = {}
    if "spacing_curve" in table:
        extra = {"curve": spacing_curve(table["spacing_curve"], where),
                 "curve_source": "relative RF protection-ratio curve set in the study file "
                                 "(spacing_curve)"}
    return ProtectionTable(float(raster), ratios, plan, **extra)


def spacing_curve(rows, where: str) -> tuple:
    """``spacing_curve = [[0, 0], [1, -1.5], …]``: relative RF protection ratio [dB] against
    carrier spacing [kHz], from 0 kHz (0 dB) in increasing spacing, at most 100 kHz."""
    what = ("spacing_curve must be a list of [spacing_khz, relative_db] pairs starting at "
            "[0, 0] with increasing spacing")
    if not isinstance(rows, list) or len(rows) < 2 or not all(
            isinstance(r, list) and len(r) == 2 for r in rows):
        raise ValueError(f"{what} in {where}")
    out = tuple((check_finite("spacing_curve spacing_khz", r[0], 0.0, 100.0, where=where),
                 check_finite("spacing_curve relative_db", r[1], -100.0, 20.0, where=where))
                for r in rows)
    if out[0] != (0.0, 0.0) or any(b[0] <= a[0] for a, b in zip(out, out[1:])):
        raise ValueError(f"{what} in {where}")
    return out


def night_from_table(t: dict, where: str):
    """``[night]``: sky-wave method and the night-limit settings."""
    from .interference import NightSettings

    check_keys(t, NightSettings.KEYS, where)
    return NightSettings(
        method=choice("method", t.get("method", "cfr"), ("cfr", "itu"), where),
        percent=choice("percent", t.get("percent", 10), (10, 50), where),
        exclusion_percent=choice("exclusion_percent", t.get("exclusion_percent", 50),
                                 (0, 25, 50), where),
        layer_height_km=check_finite("layer_height_km", t.get("layer_height_km", 100.0),
                                     50.0, 500.0, where=where),
        itu_region=choice("itu_region", t.get("itu_region", 2), (1, 2, 3), where),
        solar=choice("solar", t.get("solar", "elsewhere"),
                     ("north-america", "europe-australia", "elsewhere"), where),
        sunspot=check_finite("sunspot", t.get("sunspot", 0.0), 0.0, 400.0, where=where),
        floor_mv_m=check_finite("floor_mv_m", t.get("floor_mv_m", 0.5), 0.01, 100.0,
                                where=where),
        bearing_step_deg=check_finite("bearing_step_deg", t.get("bearing_step_deg", 5.0),
                                      1.0, 45.0, where=where),
    )


# --- the study file --------------------------------------------------------------------------

SECTIONS = ("study", "station", "antenna", "antenna_night", "antenna_critical", "ground",
            "contour", "community", "population", "output", "night", "interference",
            "protection", "neighbour", "station_class", "uncertainty", "exposure")
UNCERTAINTY_KEYS = ("draws", "seed")
EXPOSURE_KEYS = ("standard", "height_m")
POPULATION_KEYS = ("file", "property")
CLASS_KEYS = ("name", "day_mv_m", "night", "night_mv_m", "source")
STUDY_KEYS = ("title", "mixed_path", "earth_k", "bearing_step_deg", "bearings", "max_km",
              "step_km")
STATION_KEYS = ("name", "lat", "lon", "freq_khz", "power_day_kw", "power_night_kw",
                "power_critical_kw", "class")
GROUND_KEYS = ("class", "sigma_ms_m", "eps_r", "zones", "sigma_range_ms_m")
CONTOUR_KEYS = ("field_mv_m", "label", "community_goal")
COMMUNITY_KEYS = ("name", "boundary")
OUTPUT_KEYS = ("distance_units", "paper", "orientation", "table_step_deg", "utc_offset_h",
               "sun_year")
INTERFERENCE_KEYS = ("protected_day_mv_m", "contour_step_deg", "neighbours")


def _parse_station(doc: dict, fname: str, notes: list, freq_khz: float | None = None):
    """``[station]`` and the ``[antenna…]`` tables as a :class:`~.station.Station`; with
    ``freq_khz`` the station moved to that frequency (tower heights given in metres become
    their electrical heights there)."""
    from .groundwave import FREQ_RANGE_KHZ
    from .geodesy import check_site
    from .station import Station

    sta = _table(doc, "station", fname)
    w = where_join("[station]", fname)
    check_keys(sta, STATION_KEYS, w, required=("lat", "lon", "freq_khz", "power_day_kw"))
    lat, lon = check_site(sta["lat"], sta["lon"], where=w)
    freq = check_finite("freq_khz", sta["freq_khz"] if freq_khz is None else freq_khz,
                        *FREQ_RANGE_KHZ, where=w)
    p_day = check_finite("power_day_kw", sta["power_day_kw"], 0.0, 1e4, where=w, low_open=True)
    p_night = check_finite("power_night_kw", sta.get("power_night_kw", p_day), 0.0, 1e4, where=w)
    name = text_value("name", sta.get("name", "unnamed station"), w)
    p_crit = None
    if "power_critical_kw" in sta:
        p_crit = check_finite("power_critical_kw", sta["power_critical_kw"], 0.0, 1e4, where=w,
                              low_open=True)
    day = facility_from_table(_table(doc, "antenna", fname), freq, where_join("[antenna]", fname))
    own = {p: facility_from_table(_table(doc, f"antenna_{p}", fname), freq,
                                  where_join(f"[antenna_{p}]", fname))
           for p in ("night", "critical") if f"antenna_{p}" in doc}
    if "night" not in own and p_night > 0:
        notes.append("no [antenna_night]: night checks use the day antenna at the night power")
    if "critical" in own and p_crit is None:
        notes.append("[antenna_critical] without power_critical_kw: the critical hours use the "
                     "day power")
    klass = sta.get("class", "B")
    if not isinstance(klass, str):
        raise ValueError(f"class must be text in quotes (got {_show(klass)}) in {w}")
    from .classes import station_class

    klass = station_class(klass.upper(), _classes(doc, fname), w).name
    for period, fac, power in (("", day, p_day), ("_night", own.get("night"), p_night),
                               ("_critical", own.get("critical"), p_crit or p_day)):
        if fac is not None:
            _check_facility(fac, power, where_join(f"[antenna{period}]", fname))
    try:
        station = Station(name, lat, lon, freq, p_day, p_night, day.array, klass, day.kind,
                          day.augmentations, own.get("night"), own.get("critical"), p_crit)
    except ValueError as exc:
        raise ValueError(f"{exc} in {fname}") from None
    return station


def retune(spec, doc: dict, freq_khz: float):
    """The study ``spec`` (read from ``doc``) with its station moved to ``freq_khz``: the same
    site, powers and antennas, rebuilt at the new frequency; refused off the plan's raster."""
    import dataclasses

    station = _parse_station(doc, spec.path, [], freq_khz)
    if spec.interference is not None:
        check_on_raster(station.freq_khz, spec.interference.protection,
                        where_join("[station]", spec.path))
    return dataclasses.replace(spec, station=station)


def check_on_raster(freq_khz: float, protection, where: str) -> None:
    """Refuse a proposal off its protection plan's raster (channels at whole multiples of the
    raster), naming the two nearest channels."""
    raster = protection.raster_khz
    k = freq_khz / raster
    if abs(k - round(k)) * raster < 1e-6:
        return
    lo, hi = math.floor(k) * raster, math.ceil(k) * raster
    raise ValueError(f"freq_khz {freq_khz:g} is off the {raster:g} kHz raster of the "
                     f"{protection.plan!r} protection plan: the nearest channels are {lo:g} and "
                     f"{hi:g} kHz in {where}")


def parse_study(doc: dict, path="<study>"):
    """Validate a parsed TOML study and build a :class:`~.spec.StudySpec`.

    Relative file names are resolved against the study file's folder. Every error names the
    key, the section and the file.
    """
    from .contours import MAX_RADIAL_KM
    from .geodesy import check_site
    from .ground import Ground, GroundMap, ground_class
    from .groundwave import EARTH_K_RANGE, FREQ_RANGE_KHZ
    from .mixedpath import METHODS
    from .station import Station
    from .spec import Community, Level, StudySpec

    path = pathlib.Path(path)
    fname = str(path)
    base = path.parent
    notes: list[str] = []
    inputs: list[pathlib.Path] = [path]
    if not isinstance(doc, dict):
        raise ValueError(f"{fname}: a study must be a TOML document of tables")
    check_keys(doc, SECTIONS, fname, required=("station", "antenna", "contour"))

    st = _table(doc, "study", fname)
    w = where_join("[study]", fname)
    check_keys(st, STUDY_KEYS, w)
    if "mixed_path" in st:
        mixed = choice("mixed_path", st["mixed_path"], tuple(METHODS), w)
    else:  # the protection plan's method: its rules say how mixed paths are computed
        mixed, why = _plan_mixed_path(doc, fname)
        notes.append(f"mixed paths by {why}, the method of the protection plan; set [study] "
                     "mixed_path to choose another")
    earth_k = check_finite("earth_k", st.get("earth_k", 4.0 / 3.0), *EARTH_K_RANGE, where=w)
    step = check_finite("bearing_step_deg", st.get("bearing_step_deg", 1.0), 0.1, 90.0, where=w)
    extra = st.get("bearings", [])
    if not isinstance(extra, list):
        raise ValueError(f"bearings must be a list of degrees in {w}")
    check_count("bearings", len(extra), w)
    extra = tuple(check_finite("bearings", b, 0.0, 360.0, where=w) for b in extra)
    max_km = check_finite("max_km", st.get("max_km", 0.0), 0.0, MAX_RADIAL_KM, where=w)
    step_km = check_finite("step_km", st.get("step_km", 0.25), 0.01, 5.0, where=w)

    station = _parse_station(doc, fname, notes)

    gr = _table(doc, "ground", fname)
    w = where_join("[ground]", fname)
    check_keys(gr, GROUND_KEYS, w)
    cls_name = ""
    if "class" in gr:
        if "sigma_ms_m" in gr or "eps_r" in gr:
            raise ValueError(f"give either class or sigma_ms_m/eps_r, not both, in {w}")
        cls_name = text_value("class", gr["class"], w)
        default = ground_class(cls_name, where=w)
    else:
        if "sigma_ms_m" not in gr or "eps_r" not in gr:
            raise ValueError(f"give class, or both sigma_ms_m and eps_r, in {w}")
        default = Ground(check_finite("sigma_ms_m", gr["sigma_ms_m"], 1e-4, 1e7, where=w),
                         check_finite("eps_r", gr["eps_r"], 1.0, 100.0, where=w),
                         name="default ground")
    zones_rel = ""
    if "zones" in gr:
        zpath = file_key(gr, "zones", w, base, "zones file")
        zones_rel = gr["zones"]
        inputs.append(zpath)
        ground = load_zones(zpath, default, notes)
    else:
        ground = GroundMap(default)
    if "sigma_range_ms_m" in gr:
        ground.default_range = sigma_range("sigma_range_ms_m", gr["sigma_range_ms_m"],
                                           default.sigma_ms_m, w)
    uncertainty = None
    if ground.uncertain and "uncertainty" not in doc:
        notes.append("grounds have conductivity ranges: add an [uncertainty] table (draws, "
                     "seed) to draw each contour's 5–95 % band over them")
    if "uncertainty" in doc:
        from .uncertainty import UncertaintySettings

        ut = _table(doc, "uncertainty", fname)
        w = where_join("[uncertainty]", fname)
        check_keys(ut, UNCERTAINTY_KEYS, w)
        draws = check_finite("draws", ut.get("draws", 200), 10, 100_000, where=w)
        seed = check_finite("seed", ut.get("seed", 1), 0, 2 ** 32 - 1, where=w)
        for k, v in (("draws", draws), ("seed", seed)):
            if v != int(v):
                raise ValueError(f"{k} must be a whole number (got {ut.get(k)!r}) in {w}")
        uncertainty = UncertaintySettings(int(draws), int(seed))
        if not ground.uncertain:
            notes.append("[uncertainty] is given but no ground has a conductivity range "
                         "([ground] sigma_range_ms_m, zone conductivity_range_ms_m): the "
                         "contours are exact and no bands are drawn")

    contours = _list_of_tables(doc, "contour", fname, "[[contour]]")
    if not contours:
        raise ValueError(f"give at least one [[contour]] table in {fname}")
    levels = []
    for i, c in enumerate(contours, 1):
        w = where_join(f"[[contour]] {i}", fname)
        check_keys(c, CONTOUR_KEYS, w, required=("field_mv_m",))
        goal = (check_finite("community_goal", c["community_goal"], 0.0, 1.0, where=w)
                if "community_goal" in c else None)
        levels.append(Level(check_finite("field_mv_m", c["field_mv_m"], 1e-4, 1e4, where=w),
                            text_value("label", c.get("label", ""), w), goal))
    levels.sort(key=lambda lv: -lv.field_mv_m)
    seen = [lv.field_mv_m for lv in levels]
    if len(set(seen)) != len(seen):
        raise ValueError(f"each [[contour]] level must be given once in {fname}")

    community = None
    if "community" in doc:
        cm = _table(doc, "community", fname)
        w = where_join("[community]", fname)
        check_keys(cm, COMMUNITY_KEYS, w, required=("boundary",))
        bpath = file_key(cm, "boundary", w, base, "boundary file")
        inputs.append(bpath)
        community = Community(text_value("name", cm.get("name", "community"), w),
                              read_boundary(bpath, notes), cm["boundary"])

    population, population_table = None, None
    if "population" in doc:
        pt = _table(doc, "population", fname)
        w = where_join("[population]", fname)
        check_keys(pt, POPULATION_KEYS, w, required=("file",))
        ppath = file_key(pt, "file", w, base, "population file")
        inputs.append(ppath)
        prop = text_value("property", pt.get("property", "population"), w)
        if not prop.strip():
            raise ValueError(f"property must not be empty in {w}")
        population = read_population(ppath, prop, notes)
        population_table = dict(pt)

    out = _table(doc, "output", fname)
    w = where_join("[output]", fname)
    check_keys(out, OUTPUT_KEYS, w)
    output = dict(out)
    if "distance_units" in out:
        choice("distance_units", out["distance_units"], ("km", "mi"), w)
    if "paper" in out:
        choice("paper", out["paper"], ("A4", "Letter"), w)
    if "orientation" in out:
        choice("orientation", out["orientation"], ("portrait", "landscape"), w)
    if "utc_offset_h" in out:  # the site's standard time, for sunrise and sunset
        output["utc_offset_h"] = check_finite("utc_offset_h", out["utc_offset_h"], -12.0, 14.0,
                                              where=w)
    if "sun_year" in out:
        year = check_finite("sun_year", out["sun_year"], 1900, 2100, where=w)
        if year != int(year):
            raise ValueError(f"sun_year must be a whole year (got {out['sun_year']!r}) in {w}")
        output["sun_year"] = int(year)
    if "table_step_deg" in out:
        output["table_step_deg"] = check_finite("table_step_deg", out["table_step_deg"], 1.0,
                                                90.0, where=w)

    exposure = None
    if "exposure" in doc:
        from .exposure import expand_standards

        et = _table(doc, "exposure", fname)
        w = where_join("[exposure]", fname)
        check_keys(et, EXPOSURE_KEYS, w)
        std = et.get("standard", "fcc")
        std = [std] if isinstance(std, str) else std
        if not isinstance(std, list) or not std or not all(isinstance(x, str) for x in std):
            raise ValueError(f"standard must be a name or a list of names in quotes (got "
                             f"{_show(et.get('standard'))}) in {w}")
        try:
            expand_standards(std)
        except ValueError as exc:
            raise ValueError(f"{exc} in {w}") from None
        exposure = {"standard": std}
        if "height_m" in et:
            exposure["height_m"] = check_finite("height_m", et["height_m"], 0.0, 100.0,
                                                where=w, low_open=True)

    interference, neighbour_tables = _parse_interference(doc, base, fname, inputs, notes)
    if interference is not None:
        check_on_raster(station.freq_khz, interference.protection, where_join("[station]", fname))

    st_title = st.get("title", station.name)
    return StudySpec(
        title=text_value("title", st_title, where_join("[study]", fname)),
        station=station,
        ground=ground,
        levels=tuple(levels),
        mixed_path=mixed,
        earth_k=earth_k,
        bearing_step_deg=step,
        extra_bearings=extra,
        max_km=max_km,
        step_km=step_km,
        community=community,
        population=population,
        population_table=population_table,
        output=output,
        path=fname,
        zones_path=str(zones_rel),
        ground_class=cls_name,
        interference=interference,
        neighbour_tables=neighbour_tables,
        uncertainty=uncertainty,
        exposure=exposure,
        input_notes=tuple(notes),
        input_files=tuple(str(p.resolve()) for p in dict.fromkeys(inputs)),
    )


def _parse_interference(doc: dict, base: pathlib.Path, fname: str, inputs: list,
                        notes: list):
    """``[night]``, ``[interference]``, ``[protection]`` and ``[[neighbour]]``."""
    from .interference import InterferencePlan

    if not any(k in doc for k in ("night", "interference", "protection", "neighbour")):
        return None, ()
    classes = _classes(doc, fname)
    night = night_from_table(_table(doc, "night", fname), where_join("[night]", fname))
    prot = protection_from_table(_table(doc, "protection", fname),
                                 where_join("[protection]", fname))
    it = _table(doc, "interference", fname)
    w = where_join("[interference]", fname)
    check_keys(it, INTERFERENCE_KEYS, w)
    tables = _list_of_tables(doc, "neighbour", fname, "[[neighbour]]")
    neighbours = [neighbour_from_table(t, where_join(f"[[neighbour]] {i}", fname), base, inputs,
                                       classes)
                  for i, t in enumerate(tables, 1)]
    nfile = ""
    if "neighbours" in it:
        npath = file_key(it, "neighbours", w, base, "neighbours file")
        nfile = it["neighbours"]
        inputs.append(npath)
        listed = read_neighbours_csv(npath, inputs, classes)
        check_count("neighbour", len(tables) + len(listed), f"{npath} and {fname}")
        if not listed:
            notes.append(f"{npath}: the neighbours file lists no station (header only); "
                         "no neighbour from it is checked")
        neighbours += listed
    names = [n.name for n in neighbours]
    dup = {x for x in names if names.count(x) > 1}
    if dup:
        raise ValueError(f"neighbour names must be unique (repeated: {', '.join(sorted(dup))}) "
                         f"in {fname}")
    plan = InterferencePlan(
        neighbours=tuple(neighbours), protection=prot, night=night,
        protected_day_mv_m=check_finite("protected_day_mv_m", it.get("protected_day_mv_m", 0.5),
                                        0.01, 100.0, where=w),
        contour_step_deg=check_finite("contour_step_deg", it.get("contour_step_deg", 10.0),
                                      1.0, 45.0, where=w),
        neighbours_file=nfile,
        classes=classes,
    )
    return plan, tuple(dict(t) for t in tables)


def _plan_mixed_path(doc: dict, fname: str) -> tuple[str, str]:
    """(method, source) of mixed paths under the study's protection plan ("us" by default)."""
    from .classes import PROTECTION_PLANS

    prot = doc.get("protection", {})
    plan = prot.get("plan", "us") if isinstance(prot, dict) else "us"
    plan = choice("plan", plan, tuple(PROTECTION_PLANS), where_join("[protection]", fname))
    return PROTECTION_PLANS[plan]["mixed_path"]


def _classes(doc: dict, fname: str) -> dict:
    """The station classes: the built-in table, with rows added or replaced by
    ``[[station_class]]`` tables of the study."""
    from .classes import STATION_CLASSES, StationClass

    classes = dict(STATION_CLASSES)
    for i, t in enumerate(_list_of_tables(doc, "station_class", fname, "[[station_class]]"), 1):
        w = where_join(f"[[station_class]] {i}", fname)
        check_keys(t, CLASS_KEYS, w, required=("name", "day_mv_m", "night"))
        name = text_value("name", t["name"], w).upper()
        night = choice("night", t["night"], ("none", "skywave50", "nif"), w)
        level = None
        if night != "none":
            if "night_mv_m" not in t:
                raise ValueError(f"missing key 'night_mv_m' in {w} (needed for night = {night!r})")
            level = check_finite("night_mv_m", t["night_mv_m"], 0.01, 100.0, where=w)
        classes[name] = StationClass(
            name, check_finite("day_mv_m", t["day_mv_m"], 0.01, 100.0, where=w), night, level,
            text_value("source", t.get("source", f"set in {fname}"), w))
    return classes


def load_study_doc(path):
    """(TOML document, validated StudySpec) of a study file."""
    path = pathlib.Path(path)
    doc = read_toml(path, "study file")
    return doc, parse_study(doc, path)


def load_study(path):
    """Read and validate a study file. TOML syntax errors keep tomllib's line and column."""
    return load_study_doc(path)[1]


# --- writing studies -------------------------------------------------------------------------

_ESCAPES = {"\\": "\\\\", '"': '\\"', "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f",
            "\r": "\\r"}


def _toml_string(s: str) -> str:
    out = []
    for ch in s:
        if ch in _ESCAPES:
            out.append(_ESCAPES[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_key(k: str) -> str:
    k = str(k)
    if k and all(c.isascii() and (c.isalnum() or c in "-_") for c in k):
        return k
    return _toml_string(k)


def _toml_value(v) -> str:
    if isinstance(v, (bool, np.bool_)):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        f = float(v)
        if math.isnan(f):
            return "nan"
        if math.isinf(f):
            return "inf" if f > 0 else "-inf"
        return repr(f)
    if isinstance(v, str):
        return _toml_string(v)
    if isinstance(v, (_dt.datetime, _dt.date, _dt.time)):
        return v.isoformat()
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def dump_toml(doc: dict) -> str:
    """A study document (a dict as tomllib returns it) as TOML text.

    Tables, arrays of tables and nested arrays of tables (``[[antenna.tower]]``) are written as
    headers; text is escaped so that any character (newlines, control characters) reads back.
    """
    lines = ["# mwreach study file", ""]

    def table(name: str, t: dict, array: bool = False):
        lines.append(f"[[{name}]]" if array else f"[{name}]")
        nested = []
        for k, v in t.items():
            if isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                nested.append((k, v, True))
            elif isinstance(v, dict):
                nested.append((k, v, False))
            else:
                lines.append(f"{_toml_key(k)} = {_toml_value(v)}")
        lines.append("")
        for k, items, is_array in nested:
            sub = f"{name}.{_toml_key(k)}"
            if is_array:
                for item in items:
                    table(sub, item, array=True)
            else:
                table(sub, items)

    for key, value in doc.items():
        if isinstance(value, dict):
            table(_toml_key(key), value)
        elif isinstance(value, list) and value and all(isinstance(x, dict) for x in value):
            for item in value:
                table(_toml_key(key), item, array=True)
        elif isinstance(value, list) and not value:
            continue
        else:
            raise ValueError(f"top-level key {key!r} must be a table")
    return "\n".join(lines)


def _plain(v):
    """Normalise a document for comparison (tuples → lists, numpy scalars → Python)."""
    if isinstance(v, dict):
        return {str(k): _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    if isinstance(v, np.generic):
        return v.item()
    return v


def dump_toml_keeping(doc: dict, original_text: str | None) -> str:
    """``doc`` as TOML text that keeps what the user wrote in ``original_text`` (the file the
    study was read from): comments, order, spacing and the spelling of unchanged values. Only
    the values that differ from the original are rewritten (tomlkit edits the parsed text in
    place). Without an original, or if the edited text would not read back as ``doc``, the
    plain :func:`dump_toml` is used."""
    if not original_text:
        return dump_toml(doc)
    import tomlkit

    try:
        kept = tomlkit.parse(original_text)
        _merge_into(kept, doc)
        text = tomlkit.dumps(kept)
        if _plain(tomllib.loads(text)) == {k: v for k, v in _plain(doc).items() if v != []}:
            return text
    except Exception:  # noqa: BLE001 - any failure of the careful path falls back to the plain one
        return dump_toml(doc)
    return dump_toml(doc)


def _merge_into(target, new: dict) -> None:
    """Make the tomlkit container ``target`` hold ``new``, touching only what differs."""
    for key in [k for k in target if k not in new]:
        del target[key]
    for key, value in new.items():
        if key not in target:
            target[key] = value
            continue
        old = target[key]
        if isinstance(value, dict) and isinstance(old, dict):
            _merge_into(old, value)
        elif (isinstance(value, list) and value and all(isinstance(v, dict) for v in value)
              and isinstance(old, list) and len(old) == len(value)
              and all(isinstance(v, dict) for v in old)):
            for o, v in zip(old, value):
                _merge_into(o, v)
        elif _plain(old) != _plain(value):
            target[key] = value


def check_round_trip(doc: dict, text: str, path) -> dict:
    """Read ``text`` back with the study parser; it must give ``doc`` again and a valid study.

    Returns the parsed document; raises ValueError (naming ``path``) when the text would not
    open again as the same study.
    """
    try:
        again = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: not saved; the written text does not read back ({exc})") from None
    want = {k: v for k, v in _plain(doc).items() if v != []}
    if _plain(again) != want:
        raise ValueError(f"{path}: not saved; the written text reads back differently")
    parse_study(again, path)
    return again


def spec_to_doc(spec) -> dict:
    """The study as a TOML document (the structure :func:`parse_study` reads)."""
    from .interference import ORDINALS, ProtectionTable

    s = spec.station
    doc: dict = {}
    study = {"title": spec.title, "mixed_path": spec.mixed_path, "earth_k": spec.earth_k,
             "bearing_step_deg": spec.bearing_step_deg, "step_km": spec.step_km}
    if spec.extra_bearings:
        study["bearings"] = list(spec.extra_bearings)
    if spec.max_km:
        study["max_km"] = spec.max_km
    doc["study"] = study
    doc["station"] = {"name": s.name, "lat": s.lat, "lon": s.lon, "freq_khz": s.freq_khz,
                      "power_day_kw": s.power_day_kw, "power_night_kw": s.power_night_kw,
                      "class": s.station_class}
    if s.power_critical_kw is not None:
        doc["station"]["power_critical_kw"] = s.power_critical_kw
    doc["antenna"] = facility_to_table(s.antenna, s.pattern, s.augmentations)
    for period in ("night", "critical"):
        fac = getattr(s, period)
        if fac is not None:
            doc[f"antenna_{period}"] = facility_to_table(fac.array, fac.kind, fac.augmentations)
    g = spec.ground.default
    ground = {"class": spec.ground_class} if spec.ground_class else {
        "sigma_ms_m": g.sigma_ms_m, "eps_r": g.eps_r}
    if spec.zones_path:
        ground["zones"] = spec.zones_path
    if spec.ground.default_range is not None:
        ground["sigma_range_ms_m"] = list(spec.ground.default_range)
    doc["ground"] = ground
    doc["contour"] = [{"field_mv_m": lv.field_mv_m, **({"label": lv.label} if lv.label else {}),
                       **({"community_goal": lv.community_goal}
                          if lv.community_goal is not None else {})}
                      for lv in spec.levels]
    if spec.uncertainty is not None:
        doc["uncertainty"] = {"draws": spec.uncertainty.draws, "seed": spec.uncertainty.seed}
    if spec.exposure is not None:
        doc["exposure"] = {"standard": list(spec.exposure["standard"]),
                           **({"height_m": spec.exposure["height_m"]}
                              if "height_m" in spec.exposure else {})}
    if spec.community is not None:
        doc["community"] = {"name": spec.community.name, "boundary": spec.community.path}
    if spec.population_table:
        doc["population"] = dict(spec.population_table)
    if spec.output:
        doc["output"] = dict(spec.output)
    plan = spec.interference
    if plan is not None:
        doc["night"] = plan.night.to_table()
        inter = {"protected_day_mv_m": plan.protected_day_mv_m,
                 "contour_step_deg": plan.contour_step_deg}
        if plan.neighbours_file:
            inter["neighbours"] = plan.neighbours_file
        doc["interference"] = inter
        prot = {"plan": plan.protection.plan, "raster_khz": int(plan.protection.raster_khz)}
        for (period, off), (ratio, _src) in sorted(plan.protection.ratios.items()):
            prot[f"{period}_{ORDINALS[off]}_db"] = ratio
        if plan.protection.curve != ProtectionTable().curve:
            prot["spacing_curve"] = [list(r) for r in plan.protection.curve]
        doc["protection"] = prot
        if spec.neighbour_tables:
            doc["neighbour"] = [dict(t) for t in spec.neighbour_tables]
    return doc


def spec_to_toml(spec) -> str:
    """A study written back as TOML (the format :func:`load_study` reads)."""
    return dump_toml(spec_to_doc(spec))
