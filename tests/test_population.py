"""People inside contours (coverage/population.py) and what a change gains and loses
(coverage/compare.py), against closed forms and a slow point-by-point count."""

import json
import pathlib

import numpy as np
import pytest
import shapely
from shapely.geometry import Point, box

from mwreach.coverage.compare import compare_geojson, compare_results
from mwreach.coverage.geodesy import geodesic_area_km2
from mwreach.coverage.inputs import parse_study, read_population
from mwreach.coverage.population import Population
from mwreach.coverage.study import Study

from helpers import homogeneous_study, lens_km2
from test_inputs import one_line_error, run_cli

LAT, LON = 40.0, 10.0
DENSITY = 50.0  # people per km², uniform (an invented layer)


def grid_layer(path: pathlib.Path, half_deg=0.6, cell_deg=0.02):
    """A GeoJSON grid of square cells around the site, each holding DENSITY × its geodesic
    area."""
    feats = []
    for x in np.arange(LON - half_deg, LON + half_deg, cell_deg):
        for y in np.arange(LAT - half_deg, LAT + half_deg, cell_deg):
            cell = box(x, y, x + cell_deg, y + cell_deg)
            feats.append({"type": "Feature",
                          "properties": {"population": DENSITY * geodesic_area_km2(cell)},
                          "geometry": shapely.geometry.mapping(cell)})
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats}))
    return path


def study_with_layer(tmp_path, layer_name, lat=LAT, lon=LON, extra=""):
    text = homogeneous_study(lat, lon, step_deg=5.0, step_km=0.25, level_mv_m=5.0)
    text += f'\n[population]\nfile = "{layer_name}"\n' + extra
    f = tmp_path / f"s_{lat}_{lon}.toml"
    f.write_text(text)
    return f


@pytest.fixture(scope="module")
def layer_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("people")
    grid_layer(d / "grid.geojson")
    return d


def test_uniform_density_gives_density_times_area(layer_dir):
    res = Study.from_file(study_with_layer(layer_dir, "grid.geojson")).run()
    c = res.contours[0]
    assert 500 < c.area_km2 < 3000  # the 5 mV/m contour is well inside the layer
    # uniform density: people = density × geodesic contour area; 0.5 % is the bound
    # (the cut cells' shares on the lon/lat plane err by < 1e-5)
    assert res.population["levels"][0] == pytest.approx(DENSITY * c.area_km2, rel=0.005)
    row = res.level_rows()[0]
    assert row["population"] == res.population["levels"][0]


def test_points_count_whole_as_a_point_by_point_loop_does():
    rng = np.random.default_rng(7)
    lon = rng.uniform(9.0, 11.0, 3000)
    lat = rng.uniform(39.0, 41.0, 3000)
    people = rng.integers(0, 500, 3000).astype(float)
    layer = Population(np.array([], dtype=object), np.array([]), lon, lat, people)
    region = Point(LON, LAT).buffer(0.4, 64)
    slow = sum(n for x, y, n in zip(lon, lat, people) if region.contains(Point(x, y)))
    assert layer.count_in(region) == slow  # whole people: the same count exactly
    assert layer.count_in(None) == 0.0


def test_a_cut_polygon_counts_its_area_share():
    cell = box(0.0, 0.0, 1.0, 1.0)
    layer = Population(np.array([cell], dtype=object), np.array([1000.0]),
                       np.array([]), np.array([]), np.array([]))
    assert layer.count_in(box(0.0, 0.0, 0.25, 1.0)) == pytest.approx(250.0)  # a quarter
    assert layer.count_in(box(-1.0, -1.0, 2.0, 2.0)) == 1000.0  # whole


def test_compare_with_itself_gains_and_loses_nothing(layer_dir):
    res = Study.from_file(study_with_layer(layer_dir, "grid.geojson")).run()
    comp = compare_results(res, res)
    for row in comp["levels"]:
        assert row["gain_km2"] == 0.0 and row["loss_km2"] == 0.0
        assert row["gain_population"] == 0.0 and row["loss_population"] == 0.0
    assert compare_geojson(comp)["features"] == []


def test_moving_a_homogeneous_station_gains_and_loses_a_lune(layer_dir):
    # homogeneous ground: the contour is a circle of radius r; moved by d, the gain and the
    # loss are each the circle less the lens of two equal circles (closed form)
    a = Study.from_file(study_with_layer(layer_dir, "grid.geojson")).run()
    d_km = 8.0
    lon2 = LON + np.degrees(d_km / (6371.0 * np.cos(np.radians(LAT))))
    b = Study.from_file(study_with_layer(layer_dir, "grid.geojson", LAT, lon2)).run()
    comp = compare_results(a, b)
    row = comp["levels"][0]
    from mwreach.coverage.geodesy import inverse

    d = float(inverse(LAT, LON, LAT, lon2)[0])
    r = float(np.sqrt(a.contours[0].area_km2 / np.pi))
    lune = np.pi * r**2 - lens_km2(r, r, d)
    # 1 %: the bound (the contours are 72-gons on a 0.25 km grid)
    assert row["gain_km2"] == pytest.approx(lune, rel=0.01)
    assert row["loss_km2"] == pytest.approx(lune, rel=0.01)
    # the people follow the area at uniform density
    assert row["gain_population"] == pytest.approx(DENSITY * row["gain_km2"], rel=0.005)


def test_compare_cli_writes_the_set(tmp_path, layer_dir):
    a = study_with_layer(layer_dir, "grid.geojson")
    lon2 = LON + 0.05
    b = study_with_layer(layer_dir, "grid.geojson", LAT, lon2)
    rc, out, err = run_cli("compare", a, b, "-o", tmp_path / "cmp")
    assert rc == 0, err
    data = json.loads((tmp_path / "cmp" / "compare.json").read_text())
    assert set(data["levels"][0]) >= {"level_mv_m", "gain_km2", "loss_km2", "gain_population",
                                      "loss_population"}
    gj = json.loads((tmp_path / "cmp" / "compare.geojson").read_text())
    assert {f["properties"]["change"] for f in gj["features"]} == {"gain", "loss"}
    assert (tmp_path / "cmp" / "compare.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def _point(props: str) -> str:
    return ('{"type":"FeatureCollection","features":[{"type":"Feature","properties":' + props
            + ',"geometry":{"type":"Point","coordinates":[10,40]}}]}')


@pytest.mark.parametrize("name, content, words", [
    ("p.geojson", _point('{"population":-3}'), "population must be >= 0"),
    ("p.geojson", _point('{"population":"many"}'), "population must be a number"),
    ("p.geojson", _point('{"people":3}'), "missing property 'population'"),
    ("p.geojson", _point('{"population":true}'), "population must be a number"),
    ("p.csv", "lat,lon\n40,10\n", "missing column 'population'"),
    ("p.csv", "lat,lon,population\n40,10,-1\n", "population must be >= 0"),
    ("p.csv", "lat,lon,population\n40,10,nan\n", "population must be a finite number"),
    ("p.csv", "lat,lon,population\n40,10,lots\n", "population must be a number"),
])
def test_bad_population_layer_is_one_line_exit_2(tmp_path, name, content, words):
    (tmp_path / name).write_text(content)
    f = study_with_layer(tmp_path, name)
    rc, out, err = run_cli("run", f, "--out", tmp_path / "o")
    assert rc == 2
    one_line_error(err, words, name)
    assert not (tmp_path / "o").exists()  # nothing written
    assert (tmp_path / name).read_text() == content  # the file read is untouched


def test_property_chooses_the_count_and_csv_points_work(tmp_path):
    (tmp_path / "p.csv").write_text("lat,lon,residents,name\n40.0,10.0,120,Centre\n"
                                    "41.5,10.0,999,Far away\n")
    f = study_with_layer(tmp_path, "p.csv", extra='property = "residents"\n')
    res = Study.from_file(f).run()
    assert res.population["levels"][0] == 120.0 and res.population["total"] == 1119.0
    layer = read_population(tmp_path / "p.csv", "residents")
    assert layer.key == "residents"


def test_demo_population_in_outputs(demo_run):
    out, printed = demo_run
    summary = json.loads((out / "summary.json").read_text())
    levels = summary["levels"]
    people = [lv["population"] for lv in levels]
    assert all(p > 0 for p in people) and people == sorted(people)  # nested contours
    assert summary["population"]["community"] > 18_000  # the invented town's 18,000 and more
    assert summary["population"]["night_service"] is not None
    assert "people" in printed and "community 18," in printed


def test_compare_without_a_common_level_is_one_line_and_makes_no_folder(tmp_path, layer_dir):
    a = study_with_layer(layer_dir, "grid.geojson")
    b = tmp_path / "other.toml"
    b.write_text(a.read_text().replace("field_mv_m = 5.0", "field_mv_m = 4.0")
                 .replace('file = "grid.geojson"', f'file = "{layer_dir / "grid.geojson"}"'))
    rc, out, err = run_cli("compare", a, b, "-o", tmp_path / "cmp")
    assert rc == 2
    one_line_error(err, "no contour level in common")
    assert not (tmp_path / "cmp").exists()
