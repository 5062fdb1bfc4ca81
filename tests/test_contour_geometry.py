"""Contour polygons as geometry: isolines of the polar field, valid GeoJSON anywhere on earth.

The independent references here are geometric: a circle's area π r² (planar geometry of the
site's azimuthal-equidistant plane, exact to (r/R)² ≈ 3e-4 for r = 100 km), the tabulated
crossing distances of each radial, and pyproj's geodesic polygon area (GeographicLib,
Karney 2013) of what the GeoJSON file holds.
"""

import json
import math
import pathlib

import numpy as np
import pytest
import shapely
from shapely.geometry import Point, shape

from mwreach.coverage import cli
from mwreach.coverage.geodesy import GEOD, local_projection
from mwreach.coverage.inputs import load_study
from mwreach.coverage.study import Study

from helpers import homogeneous_study  # noqa: E402


def _study(step, lat, lon):
    return homogeneous_study(lat, lon, step_deg=step, step_km=0.25)



def _run(tmp_path, text, name="s.toml"):
    f = tmp_path / name
    f.write_text(text)
    out = tmp_path / (name + ".out")
    assert cli.main(["run", str(f), "--out", str(out)]) == 0
    return Study.from_file(f).run(), json.loads((out / "contours.geojson").read_text())


def _rings_ccw(geom: dict):
    polys = [geom["coordinates"]] if geom["type"] == "Polygon" else geom["coordinates"]
    for rings in polys:
        for k, ring in enumerate(rings):
            signed = shapely.LinearRing(ring).is_ccw
            assert signed == (k == 0), "exterior CCW, holes CW (RFC 7946 §3.1.6)"


def test_demo_geojson_polygons_valid_and_ccw(demo_run):
    out, _ = demo_run
    gj = json.loads((out / "contours.geojson").read_text())
    polys = [f for f in gj["features"] if f["geometry"]["type"] != "Point"]
    # four day levels, the night service contour and five neighbours' protected contours
    assert len(polys) == 10
    for f in polys:
        assert shape(f["geometry"]).is_valid
        _rings_ccw(f["geometry"])
        coords = np.array(shapely.get_coordinates(shape(f["geometry"])))
        # 1e-6° rounding: every coordinate is an integer number of micro-degrees
        assert np.allclose(coords * 1e6, np.round(coords * 1e6), atol=1e-6)


def test_homogeneous_ground_gives_a_circle(tmp_path):
    res, _ = _run(tmp_path, _study(step=1.0, lat=38.4, lon=-46.2))
    c = res.contours[0]
    r = c.first_km
    assert np.ptp(r) < 1e-6  # one ground, one tower: the same crossing on every bearing
    # planar area of the circle in the azimuthal-equidistant plane; the polygon is inscribed
    # with 360 vertices (area short by (2π/360)²/6 = 5e-5) and the plane is exact to (r/R)²
    assert c.polygon_xy.area == pytest.approx(math.pi * r[0] ** 2, rel=1e-3)
    assert c.area_km2 == pytest.approx(math.pi * r[0] ** 2, rel=1e-3)
    # the boundary passes within one distance step (0.25 km) of the tabulated radius everywhere
    b = np.radians(res.radials.bearings_deg)
    pts = shapely.points(r * np.sin(b), r * np.cos(b))
    assert shapely.distance(c.polygon_xy.boundary, pts).max() < 0.25


def test_demo_boundary_agrees_with_the_radial_table():
    spec = load_study(pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml")
    res = Study(spec).run(interference=False)
    b = np.radians(res.radials.bearings_deg)
    for c in res.contours:
        ok = np.isfinite(c.first_km)
        d = c.first_km[ok]
        pts = shapely.points(d * np.sin(b[ok]), d * np.cos(b[ok]))
        assert shapely.distance(c.polygon_xy.boundary, pts).max() < spec.step_km
        for i in np.flatnonzero([bool(f) for f in c.further]):
            for a, e in c.further[i]:  # each recovery stretch lies inside the polygon
                m = 0.5 * (a + e)
                assert c.polygon_xy.buffer(1e-6).contains(Point(m * math.sin(b[i]),
                                                                m * math.cos(b[i])))


def test_land_then_sea_gives_a_recovery_island(tmp_path):
    # dry land, then sea beyond 40 km to the east: over the sea the field rises again
    # (Millington's recovery effect, ITU-R P.368 Annex 2)
    proj = local_projection(10.0, 20.0)
    lon, lat = proj.to_lonlat(np.array([40.0, 400.0, 400.0, 40.0, 40.0]),
                              np.array([-400.0, -400.0, 400.0, 400.0, -400.0]))
    zones = {"type": "FeatureCollection", "features": [{
        "type": "Feature", "properties": {"name": "sea", "conductivity_ms_m": 5000,
                                          "permittivity": 70},
        "geometry": {"type": "Polygon",
                     "coordinates": [[[float(x), float(y)] for x, y in zip(lon, lat)]]}}]}
    (tmp_path / "sea.geojson").write_text(json.dumps(zones))
    text = _study(step=2.0, lat=10.0, lon=20.0).replace(
        "[study]", '[study]\nmixed_path = "millington"').replace(
        'class = "land"', 'class = "very-dry"\nzones = "sea.geojson"').replace(
        "field_mv_m = 0.5", "field_mv_m = 0.5\n[[contour]]\nfield_mv_m = 0.1")
    res, gj = _run(tmp_path, text)
    # 0.1 mV/m (40 dBµV/m) is left over the dry land near 25 km; over the sea the field
    # climbs back to about 45.6 dBµV/m at 50 km and falls below 40 again near 150 km
    c = res.contours[1]
    i90 = int(np.flatnonzero(res.radials.bearings_deg == 90.0)[0])
    assert c.further[i90], "the radial table lists the recovery at 90°"
    a, e = c.further[i90][0]
    assert a > 40.0
    parts = list(shapely.get_parts(c.polygon_xy))
    island = [p for p in parts if not p.contains(Point(0, 0))]
    assert island, "the recovery area is a separate shape"
    assert any(p.contains(Point(0.5 * (a + e), 0.0)) for p in island)
    feat = next(f for f in gj["features"] if f["properties"].get("level_mv_m") == 0.1)
    assert feat["geometry"]["type"] == "MultiPolygon" and shape(feat["geometry"]).is_valid


@pytest.mark.parametrize("lat, lon", [(38.4, 179.99), (38.4, -179.99), (89.9, 10.0),
                                      (-89.9, -60.0)])
def test_geojson_valid_at_antimeridian_and_poles(tmp_path, lat, lon):
    res, gj = _run(tmp_path, _study(step=2.0, lat=lat, lon=lon))
    c = res.contours[0]
    feat = next(f for f in gj["features"] if f["properties"]["kind"] == "day ground wave")
    g = shape(feat["geometry"])
    assert g.is_valid
    _rings_ccw(feat["geometry"])
    coords = shapely.get_coordinates(g)
    assert coords[:, 0].min() >= -180 and coords[:, 0].max() <= 180
    # what the file holds has the geodesic area of the contour (GeographicLib polygon area) …
    area = abs(GEOD.geometry_area_perimeter(g)[0]) / 1e6
    # (measured: 2e-7 relative, the 1e-6° coordinate grid; 2e-6 allowed)
    assert area == pytest.approx(c.area_km2, rel=2e-6)
    # … and that is the area of the regular polygon of n radials inscribed in the circle of
    # radius r in the site's plane, (n/2)·r²·sin(2π/n) (independent of lon/lat; measured 4e-6
    # from the plane's scale, 4e-5 allowed — a plain π r² would be 2e-4 off at n = 180)
    n = res.radials.bearings_deg.size
    polygon = n / 2 * c.first_km[0] ** 2 * math.sin(2 * math.pi / n)
    assert area == pytest.approx(polygon, rel=4e-5)
    if abs(lon) > 179:
        assert feat["geometry"]["type"] == "MultiPolygon"  # split at the antimeridian
        assert g.area < 10.0  # deg²: not a band round the globe
    if abs(lat) > 89:
        pole = 90.0 if lat > 0 else -90.0
        assert np.isclose(np.abs(coords[:, 1]).max(), 90.0)  # closed along the pole
        assert g.buffer(1e-9).contains(Point(0.0, pole - math.copysign(0.01, pole)))


def test_polar_area_without_the_region():
    # polar_area_km2 (the site search's area) against the area of the region itself: on the
    # demo's own fields with 1° radials they agree to 0.01 % (both are the same contour; they
    # differ by the chords between radials); with 5° radials the line integral follows the
    # bearing between radials and comes out nearer the 1° figure than the 5° region does
    from mwreach.coverage.contours import polar_area_km2, polar_region, radial_fields
    from mwreach.coverage.groundwave import mv_m_to_dbu

    spec = load_study(pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml")
    st = spec.station
    proj = local_projection(st.lat, st.lon)
    level = float(mv_m_to_dbu(0.5))
    got = {}
    for step in (1.0, 5.0):
        b = np.arange(0.0, 360.0, step)
        rad = radial_fields(st.freq_khz, spec.ground, st.lat, st.lon, b,
                            st.antenna.field_mv_m(b, 0.0, st.power_day_kw), 400.0, 0.5)
        region = proj.plane_area_km2(polar_region(b, rad.dist_km, rad.field_dbu, level))
        got[step] = (region, polar_area_km2(b, rad.dist_km, rad.field_dbu, level, proj))
    assert got[1.0][1] == pytest.approx(got[1.0][0], rel=1e-4)
    assert abs(got[5.0][1] - got[1.0][0]) < abs(got[5.0][0] - got[1.0][0])
    # and a circle: 2π F(r) = π r² (1 − (r/R)²/12 + …) on the sphere of the site's Gaussian
    # radius (a geodesic disc's area, R² (1 − cos(r/R)) 2π); 1e-8 for the series' next term
    b = np.arange(0.0, 360.0, 5.0)
    d = np.linspace(0.3, 300.0, 600)
    field = np.tile(-d, (b.size, 1))  # falls with distance: the level −120 is crossed at 120 km
    r, big_r = 120.0, proj.gaussian_radius_km
    want = math.pi * r**2 * (1 - (r / big_r) ** 2 / 12)
    assert polar_area_km2(b, d, field, -r, proj) == pytest.approx(want, rel=1e-8)


def test_window_shares_equal_the_whole_turn():
    # the community shares of a window of radials (the site search's) against the regions of
    # the whole turn cut by the community: marching squares is local to each cell, so the
    # two agree to rounding, also when the window's grid starts just before the community
    from mwreach.coverage.contours import (distance_grid, polar_regions, polar_shares,
                                           share_window, window_shares)

    b = np.arange(0.0, 360.0, 1.0)
    d = distance_grid(1000.0, 80.0, 0.25)
    # a field falling with distance, stronger toward the north-east and with a ridge across
    # the community, so that its contours cut it
    field = (110.0 - 20 * np.log10(d)[None, :] - 0.2 * d[None, :]
             + 4 * np.cos(np.radians(b - 45.0))[:, None]
             + 3 * np.sin(d / 3.0)[None, :])
    community = shapely.box(20.0, 15.0, 32.0, 24.0)  # x east, y north [km]
    levels = [70.0, 74.0, 78.0, 0.0, 200.0]
    whole = [r.intersection(community).area / community.area
             for r in polar_regions(b, d, field, levels)]
    assert 0.05 < whole[1] < 0.95 and 0.05 < whole[2] < 0.95  # contours cut the community
    assert polar_shares(b, d, field, levels, community) == pytest.approx(whole, abs=1e-9)
    rows, unwrapped = share_window(b, community, float(d[0]))
    first = int(np.searchsorted(d, community.distance(Point(0.0, 0.0)))) - 2
    tail = window_shares(unwrapped, d[first:], field[rows][:, first:], levels, community, 1.0,
                         from_site=False)
    assert tail == pytest.approx(whole, abs=1e-9)
    assert tail[3] == 1.0 and tail[4] == 0.0  # every value above / below the level
