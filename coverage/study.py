"""The study file (TOML) and the :class:`Study` that runs a whole job from it.

The CLI, the desktop application and the PDF sheet all go through :func:`load_study` and
:meth:`Study.run`; nothing else computes coverage.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import pathlib
import time
import tomllib
from dataclasses import dataclass, field

import numpy as np

from .antenna import array_from_table, array_to_table
from .contours import (
    MAX_RADIAL_KM,
    LevelContour,
    RadialFields,
    level_contour,
    radial_fields,
    radial_length_km,
)
from .geodesy import check_site, local_projection
from .interference import (
    InterferencePlan,
    InterferenceResult,
    NightSettings,
    ProtectionTable,
    neighbour_from_table,
    read_neighbours_csv,
    run_interference,
)
from .ground import Ground, GroundMap, ground_class, load_zones
from .groundwave import EARTH_K_RANGE, FREQ_RANGE_KHZ
from .mixedpath import METHODS
from .station import Station
from .validate import check_finite, check_keys, read_json, where_join

__all__ = [
    "Level",
    "Station",
    "Community",
    "StudySpec",
    "StudyResult",
    "Study",
    "load_study",
    "parse_study",
    "spec_to_toml",
    "spec_to_doc",
    "dump_toml",
    "read_boundary",
]

SECTIONS = ("study", "station", "antenna", "ground", "contour", "community", "output", "night",
            "interference", "protection", "neighbour")
STUDY_KEYS = ("title", "mixed_path", "earth_k", "bearing_step_deg", "bearings", "max_km", "step_km")
STATION_KEYS = ("name", "lat", "lon", "freq_khz", "power_day_kw", "power_night_kw")
GROUND_KEYS = ("class", "sigma_ms_m", "eps_r", "zones")
CONTOUR_KEYS = ("field_mv_m", "label")
COMMUNITY_KEYS = ("name", "boundary")
OUTPUT_KEYS = ("distance_units", "paper", "orientation", "table_step_deg")
MAX_RANGE_KM = MAX_RADIAL_KM


@dataclass(frozen=True)
class Level:
    """A contour level [mV/m] and its label."""

    field_mv_m: float
    label: str = ""

    @property
    def text(self) -> str:
        return self.label or f"{self.field_mv_m:g} mV/m"


@dataclass(frozen=True)
class Community:
    """A community boundary (shapely geometry in lon/lat) with its name and file."""

    name: str
    geometry: object
    path: str = ""


@dataclass(frozen=True)
class StudySpec:
    """A validated study: everything a run needs, nothing computed."""

    title: str
    station: Station
    ground: GroundMap
    levels: tuple[Level, ...]
    mixed_path: str = "millington"
    earth_k: float = 4.0 / 3.0
    bearing_step_deg: float = 1.0
    extra_bearings: tuple[float, ...] = ()
    max_km: float = 0.0  # 0: automatic
    step_km: float = 0.25
    community: Community | None = None
    output: dict = field(default_factory=dict)
    path: str = ""  # study file, for messages and relative paths
    zones_path: str = ""  # as written in the file (relative to it)
    ground_class: str = ""  # default ground class name, if given by name
    interference: InterferencePlan | None = None
    neighbour_tables: tuple = ()  # [[neighbour]] tables as written, for saving

    @property
    def bearings(self) -> np.ndarray:
        """Regular bearings [deg true] plus the extra ones, sorted and unique."""
        regular = np.arange(0.0, 360.0 - 1e-9, self.bearing_step_deg)
        return np.unique(np.round(np.concatenate([regular, self.extra_bearings]), 6) % 360.0)

    def with_site(self, lat: float, lon: float) -> StudySpec:
        """The same study with the transmitter moved."""
        lat, lon = check_site(lat, lon)
        return dataclasses.replace(self, station=dataclasses.replace(self.station, lat=lat, lon=lon))


# --- reading -------------------------------------------------------------------------------

def read_boundary(path: pathlib.Path):
    """Read a community boundary (GeoJSON Polygon/MultiPolygon, Feature or FeatureCollection)."""
    import shapely
    from shapely.geometry import shape

    data = read_json(path)
    if isinstance(data, dict) and data.get("type") == "FeatureCollection":
        feats = data.get("features", [])
        geoms = [f.get("geometry") for f in feats if isinstance(f, dict)] if isinstance(feats, list) else []
    elif isinstance(data, dict) and data.get("type") == "Feature":
        geoms = [data.get("geometry")]
    else:
        geoms = [data]
    parts = []
    for g in geoms:
        if not isinstance(g, dict) or g.get("type") not in ("Polygon", "MultiPolygon"):
            raise ValueError(f"{path}: the community boundary must be a Polygon or MultiPolygon")
        try:
            parts.append(shape(g))
        except Exception as exc:  # shapely raises several types for malformed coordinates
            raise ValueError(f"{path}: malformed coordinates ({exc})") from None
    if not parts:
        raise ValueError(f"{path}: no boundary polygon found")
    geom = shapely.union_all([p if p.is_valid else shapely.make_valid(p) for p in parts])
    return geom


def _table(doc: dict, key: str, where: str) -> dict:
    value = doc.get(key, {})
    if not isinstance(value, dict):
        raise ValueError(f"[{key}] must be a table in {where}")
    return value


def parse_study(doc: dict, path: str | pathlib.Path = "<study>") -> StudySpec:
    """Validate a parsed TOML study and build a :class:`StudySpec`.

    Relative file names are resolved against the study file's folder. Every error names the
    key, the section and the file.
    """
    path = pathlib.Path(path)
    fname = str(path)
    base = path.parent
    check_keys(doc, SECTIONS, fname, required=("station", "antenna", "contour"))

    st = _table(doc, "study", fname)
    w = where_join("[study]", fname)
    check_keys(st, STUDY_KEYS, w)
    mixed = st.get("mixed_path", "millington")
    if mixed not in METHODS:
        raise ValueError(f"mixed_path must be one of {', '.join(METHODS)} (got {mixed!r}) in {w}")
    earth_k = check_finite("earth_k", st.get("earth_k", 4.0 / 3.0), *EARTH_K_RANGE, where=w)
    step = check_finite("bearing_step_deg", st.get("bearing_step_deg", 1.0), 0.1, 90.0, where=w)
    extra = st.get("bearings", [])
    if not isinstance(extra, list):
        raise ValueError(f"bearings must be a list of degrees in {w}")
    extra = tuple(check_finite("bearings", b, 0.0, 360.0, where=w) for b in extra)
    max_km = check_finite("max_km", st.get("max_km", 0.0), 0.0, MAX_RANGE_KM, where=w)
    step_km = check_finite("step_km", st.get("step_km", 0.25), 0.01, 5.0, where=w)

    sta = _table(doc, "station", fname)
    w = where_join("[station]", fname)
    check_keys(sta, STATION_KEYS, w, required=("lat", "lon", "freq_khz", "power_day_kw"))
    lat, lon = check_site(sta["lat"], sta["lon"], where=w)
    freq = check_finite("freq_khz", sta["freq_khz"], *FREQ_RANGE_KHZ, where=w)
    p_day = check_finite("power_day_kw", sta["power_day_kw"], 0.0, 1e4, where=w, low_open=True)
    p_night = check_finite("power_night_kw", sta.get("power_night_kw", p_day), 0.0, 1e4, where=w)
    array = array_from_table(_table(doc, "antenna", fname), freq, where_join("[antenna]", fname))
    station = Station(str(sta.get("name", "unnamed station")), lat, lon, freq, p_day, p_night,
                      array)

    gr = _table(doc, "ground", fname)
    w = where_join("[ground]", fname)
    check_keys(gr, GROUND_KEYS, w)
    cls_name = ""
    if "class" in gr:
        if "sigma_ms_m" in gr or "eps_r" in gr:
            raise ValueError(f"give either class or sigma_ms_m/eps_r, not both, in {w}")
        cls_name = gr["class"]
        default = ground_class(cls_name, where=w)
    else:
        if "sigma_ms_m" not in gr or "eps_r" not in gr:
            raise ValueError(f"give class, or both sigma_ms_m and eps_r, in {w}")
        try:
            default = Ground(gr["sigma_ms_m"], gr["eps_r"], name="default ground")
        except ValueError as exc:
            raise ValueError(f"{exc} in {w}") from None
    zones_rel = gr.get("zones", "")
    if zones_rel:
        zpath = base / zones_rel
        if not zpath.is_file():
            raise ValueError(f"zones file {str(zpath)!r} not found (zones in {w})")
        ground = load_zones(zpath, default)
    else:
        ground = GroundMap(default)

    contours = doc.get("contour", [])
    if not isinstance(contours, list) or not contours:
        raise ValueError(f"give at least one [[contour]] table in {fname}")
    levels = []
    for i, c in enumerate(contours, 1):
        w = where_join(f"[[contour]] {i}", fname)
        if not isinstance(c, dict):
            raise ValueError(f"[[contour]] {i} must be a table in {fname}")
        check_keys(c, CONTOUR_KEYS, w, required=("field_mv_m",))
        levels.append(Level(check_finite("field_mv_m", c["field_mv_m"], 1e-4, 1e4, where=w),
                            str(c.get("label", ""))))
    levels.sort(key=lambda lv: -lv.field_mv_m)

    community = None
    if "community" in doc:
        cm = _table(doc, "community", fname)
        w = where_join("[community]", fname)
        check_keys(cm, COMMUNITY_KEYS, w, required=("boundary",))
        bpath = base / cm["boundary"]
        if not bpath.is_file():
            raise ValueError(f"boundary file {str(bpath)!r} not found (boundary in {w})")
        community = Community(str(cm.get("name", "community")), read_boundary(bpath),
                              str(cm["boundary"]))

    out = _table(doc, "output", fname)
    w = where_join("[output]", fname)
    check_keys(out, OUTPUT_KEYS, w)
    output = dict(out)
    if output.get("distance_units", "km") not in ("km", "mi"):
        raise ValueError(f"distance_units must be 'km' or 'mi' in {w}")
    if output.get("paper", "A4") not in ("A4", "Letter"):
        raise ValueError(f"paper must be 'A4' or 'Letter' in {w}")
    if output.get("orientation", "portrait") not in ("portrait", "landscape"):
        raise ValueError(f"orientation must be 'portrait' or 'landscape' in {w}")
    if "table_step_deg" in output:
        check_finite("table_step_deg", output["table_step_deg"], 1.0, 90.0, where=w)

    interference, neighbour_tables = _parse_interference(doc, base, fname)

    return StudySpec(
        title=str(st.get("title", station.name)),
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
        output=output,
        path=fname,
        zones_path=str(zones_rel),
        ground_class=cls_name,
        interference=interference,
        neighbour_tables=neighbour_tables,
    )


def _parse_interference(doc: dict, base: pathlib.Path, fname: str):
    """``[night]``, ``[interference]``, ``[protection]`` and ``[[neighbour]]``."""
    if not any(k in doc for k in ("night", "interference", "protection", "neighbour")):
        return None, ()
    night = NightSettings.from_table(_table(doc, "night", fname), where_join("[night]", fname))
    prot = ProtectionTable.from_table(_table(doc, "protection", fname),
                                      where_join("[protection]", fname))
    it = _table(doc, "interference", fname)
    w = where_join("[interference]", fname)
    check_keys(it, InterferencePlan.KEYS, w)
    tables = doc.get("neighbour", [])
    if not isinstance(tables, list):
        raise ValueError(f"neighbour must be a list of [[neighbour]] tables in {fname}")
    neighbours = []
    for i, t in enumerate(tables, 1):
        if not isinstance(t, dict):
            raise ValueError(f"[[neighbour]] {i} must be a table in {fname}")
        neighbours.append(neighbour_from_table(t, where_join(f"[[neighbour]] {i}", fname), base))
    nfile = str(it.get("neighbours", ""))
    if nfile:
        npath = base / nfile
        if not npath.is_file():
            raise ValueError(f"neighbours file {str(npath)!r} not found (neighbours in {w})")
        neighbours += read_neighbours_csv(npath)
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
    )
    return plan, tuple(dict(t) for t in tables)


def load_study(path) -> StudySpec:
    """Read and validate a study file. TOML syntax errors keep tomllib's line and column."""
    path = pathlib.Path(path)
    try:
        with open(path, "rb") as fh:
            doc = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: {exc}") from None
    except UnicodeDecodeError as exc:
        raise ValueError(f"{path}: not UTF-8 text (byte {exc.start})") from None
    return parse_study(doc, path)


# --- writing -------------------------------------------------------------------------------

def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float, np.floating)):
        return repr(float(v)) if isinstance(v, (float, np.floating)) else str(v)
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def dump_toml(doc: dict) -> str:
    """Write a study document (dict as tomllib returns it) as TOML text.

    Handles what the study format uses: scalars and lists of scalars, tables, arrays of tables
    and one level of nested arrays of tables (``[[antenna.tower]]``).
    """
    lines = ["# mwreach study file", ""]

    def table(name: str, t: dict, array: bool = False):
        lines.append(f"[[{name}]]" if array else f"[{name}]")
        nested = []
        for k, v in t.items():
            if isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                nested.append((k, v))
            elif isinstance(v, dict):
                nested.append((k, [v]))
            else:
                lines.append(f"{k} = {_toml_value(v)}")
        lines.append("")
        for k, items in nested:
            for item in items:
                table(f"{name}.{k}", item, array=True)

    for key, value in doc.items():
        if isinstance(value, dict):
            table(key, value)
        elif isinstance(value, list) and all(isinstance(x, dict) for x in value):
            for item in value:
                table(key, item, array=True)
        else:
            raise ValueError(f"top-level key {key!r} must be a table")
    return "\n".join(lines)


def spec_to_doc(spec: StudySpec) -> dict:
    """The study as a TOML document (the structure :func:`parse_study` reads)."""
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
                      "power_day_kw": s.power_day_kw, "power_night_kw": s.power_night_kw}
    doc["antenna"] = array_to_table(s.antenna)
    g = spec.ground.default
    ground = {"class": spec.ground_class} if spec.ground_class else {
        "sigma_ms_m": g.sigma_ms_m, "eps_r": g.eps_r}
    if spec.zones_path:
        ground["zones"] = spec.zones_path
    doc["ground"] = ground
    doc["contour"] = [{"field_mv_m": lv.field_mv_m, **({"label": lv.label} if lv.label else {})}
                      for lv in spec.levels]
    if spec.community is not None:
        doc["community"] = {"name": spec.community.name, "boundary": spec.community.path}
    if spec.output:
        doc["output"] = dict(spec.output)
    plan = spec.interference
    if plan is not None:
        from .interference import ORDINALS

        doc["night"] = plan.night.to_table()
        inter = {"protected_day_mv_m": plan.protected_day_mv_m,
                 "contour_step_deg": plan.contour_step_deg}
        if plan.neighbours_file:
            inter["neighbours"] = plan.neighbours_file
        doc["interference"] = inter
        prot = {"raster_khz": plan.protection.raster_khz}
        for (period, off), (ratio, _src) in sorted(plan.protection.ratios.items()):
            prot[f"{period}_{ORDINALS[off]}_db"] = ratio
        doc["protection"] = prot
        if spec.neighbour_tables:
            doc["neighbour"] = [dict(t) for t in spec.neighbour_tables]
    return doc


def spec_to_toml(spec: StudySpec) -> str:
    """Write a study back as TOML (the format :func:`load_study` reads)."""
    return dump_toml(spec_to_doc(spec))


# --- running -------------------------------------------------------------------------------

@dataclass(frozen=True)
class StudyResult:
    """Everything a run produced, for the writers, the GUI and the sheet."""

    spec: StudySpec
    radials: RadialFields
    contours: tuple[LevelContour, ...]
    antenna_summary: dict
    max_km: float
    elapsed_s: float
    created: str
    interference: InterferenceResult | None = None

    def level_rows(self) -> list[dict]:
        """One summary row per level (distance statistics over all computed bearings)."""
        rows = []
        for c in self.contours:
            finite = c.first_km[np.isfinite(c.first_km)]
            rows.append({
                "level_mv_m": c.level_mv_m,
                "label": c.label,
                "min_km": float(finite.min()) if finite.size else None,
                "max_km": float(finite.max()) if finite.size else None,
                "mean_km": float(finite.mean()) if finite.size else None,
                "area_km2": c.area_km2,
                "community_share": c.community_share,
                "radials_beyond_range": int(np.isinf(c.first_km).sum()),
                "radials_not_reached": int(np.isnan(c.first_km).sum()),
                "radials_with_further_crossings": int(c.multiple.sum()),
            })
        return rows


class Study:
    """Runs a whole daytime coverage job from a :class:`StudySpec`.

    Parameters
    ----------
    spec : the validated study
    """

    def __init__(self, spec: StudySpec):
        self.spec = spec

    @classmethod
    def from_file(cls, path) -> Study:
        return cls(load_study(path))

    def auto_max_km(self, e1km_max_mv_m: float) -> float:
        """Radial length: where the lowest level falls on the best ground with the strongest
        radiation, plus 20 %, within 20 .. 2000 km."""
        spec = self.spec
        if spec.max_km:
            return spec.max_km
        lowest = min(lv.field_mv_m for lv in spec.levels)
        return radial_length_km(spec.station.freq_khz, spec.ground, lowest, e1km_max_mv_m,
                                spec.earth_k, min_km=20.0)

    def run(self, bearings=None, power_kw: float | None = None, progress=None,
            interference: bool = True) -> StudyResult:
        """Compute radial fields, contour distances and polygons.

        Parameters
        ----------
        bearings : bearings [deg true] (default: the study's)
        power_kw : antenna input power (default: the day power)
        progress : optional callable(done, total) called per bearing
        interference : also run the night and interference work when the study has neighbours
            or night settings
        """
        t0 = time.perf_counter()
        spec = self.spec
        st = spec.station
        power = st.power_day_kw if power_kw is None else power_kw
        b = spec.bearings if bearings is None else np.asarray(bearings, dtype=float)
        e1 = st.antenna.field_mv_m(b, 0.0, power)
        summary = st.antenna.horizontal_summary(power)
        max_km = self.auto_max_km(summary["max_mv_m"])
        radials = radial_fields(st.freq_khz, spec.ground, st.lat, st.lon, b, e1, max_km,
                                spec.step_km, spec.mixed_path, spec.earth_k, progress)
        proj = local_projection(st.lat, st.lon)
        community = spec.community.geometry if spec.community else None
        contours = tuple(
            level_contour(radials, lv.field_mv_m, lv.text, proj, community) for lv in spec.levels
        )
        inter = None
        if interference and spec.interference is not None:
            inter = run_interference(spec, spec.interference)
        return StudyResult(
            spec=spec,
            radials=radials,
            contours=contours,
            antenna_summary=summary | {"power_kw": power},
            max_km=max_km,
            elapsed_s=time.perf_counter() - t0,
            created=_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
            interference=inter,
        )
