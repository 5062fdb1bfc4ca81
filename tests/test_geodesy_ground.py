"""Geodesics, local projection and ground zones."""

import json
import pathlib

import numpy as np
import pytest
from pyproj import Geod
from shapely.geometry import Polygon, box

from mwreach.coverage import geodesy
from mwreach.coverage.ground import Ground, GroundMap, Zone, ground_class
from mwreach.coverage.inputs import load_zones

LAT, LON = 38.4, -46.2


def test_radial_points_match_geographiclib():
    # pyproj.Geod wraps GeographicLib (Karney 2013): the inverse recovers distance and bearing
    lat, lon = geodesy.radial_points(LAT, LON, [0.0, 90.0, 225.0], [10.0, 500.0])
    g = Geod(ellps="WGS84")
    az, _, dist = g.inv(np.full(6, LON), np.full(6, LAT), lon.ravel(), lat.ravel())
    np.testing.assert_allclose(dist.reshape(3, 2) / 1e3, [[10, 500]] * 3, atol=1e-9)
    np.testing.assert_allclose(np.mod(az, 360).reshape(3, 2), [[0, 0], [90, 90], [225, 225]],
                               atol=1e-7)


def test_meridian_degree_length():
    # WGS84: one degree of latitude at 45° is 111.132 km (geographiclib, common reference)
    d, az12, _ = geodesy.inverse(44.5, 10.0, 45.5, 10.0)
    assert float(d) == pytest.approx(111.132, abs=0.002)
    assert float(az12) == pytest.approx(0.0, abs=1e-9)


def test_midpoint_is_halfway():
    lat, lon = geodesy.midpoint(10.0, 170.0, -20.0, -150.0)  # across the date line and equator
    d1, _, _ = geodesy.inverse(10.0, 170.0, lat, lon)
    d2, _, _ = geodesy.inverse(lat, lon, -20.0, -150.0)
    assert float(d1) == pytest.approx(float(d2), abs=1e-6)


def test_local_projection_radials_are_true():
    # azimuthal equidistant: a point at bearing β, distance d maps to (d sin β, d cos β)
    p = geodesy.LocalProjection(LAT, LON)
    lat, lon = geodesy.fwd_points(LAT, LON, np.array([30.0, 200.0]), np.array([150.0, 420.0]))
    x, y = p.to_xy(lon, lat)
    b = np.radians([30.0, 200.0])
    np.testing.assert_allclose(x, [150 * np.sin(b[0]), 420 * np.sin(b[1])], atol=1e-6)
    np.testing.assert_allclose(y, [150 * np.cos(b[0]), 420 * np.cos(b[1])], atol=1e-6)
    lon2, lat2 = p.to_lonlat(x, y)
    np.testing.assert_allclose([lon2, lat2], [lon, lat], atol=1e-9)


def test_geodesic_area_of_a_one_degree_cell():
    # a 1°×1° cell at the equator is 12 308.8 km² on WGS84 (geographiclib PolygonArea)
    assert geodesy.geodesic_area_km2(box(0, 0, 1, 1)) == pytest.approx(12308.8, rel=1e-4)


def test_dms():
    assert geodesy.dms(38.4, "N", "S") == "38°24′00.0″ N"
    assert geodesy.dms(-46.2125, "E", "W") == "46°12′45.0″ W"


def _zone_map():
    # two boxes east of the site; the second overlaps the first and wins there
    p = geodesy.LocalProjection(LAT, LON)
    def bx(x0, x1, y0, y1):
        lon, lat = p.to_lonlat(np.array([x0, x1, x1, x0]), np.array([y0, y0, y1, y1]))
        return Polygon(zip(lon, lat))
    sea = Zone("sea", ground_class("sea"), bx(20, 60, -30, 30))
    river = Zone("river", Ground(15, 30, "river"), bx(40, 80, -5, 5))
    return GroundMap(ground_class("land"), [sea, river])


def test_radial_sections_and_overlap():
    gm = _zone_map()
    assert gm.overlaps == [("sea", "river")]
    (secs,) = gm.radial_sections(LAT, LON, [90.0], 100.0)
    names = [s.ground.name for s in secs]
    assert names == ["land", "sea", "river", "land"]
    # boundaries at 20, 40 and 80 km east (edges densified, projection exact along radials)
    np.testing.assert_allclose([s.end_km for s in secs[:-1]], [20, 40, 80], atol=0.05)
    assert secs[-1].end_km == pytest.approx(100.0)
    (north,) = gm.radial_sections(LAT, LON, [0.0], 100.0)
    assert len(north) == 1 and north[0].ground.name == "land"


def test_merge_equal_grounds():
    p = geodesy.LocalProjection(LAT, LON)
    lon, lat = p.to_lonlat(np.array([10, 30, 30, 10.0]), np.array([-5, -5, 5, 5.0]))
    twin = Zone("twin", ground_class("land"), Polygon(zip(lon, lat)))
    (secs,) = GroundMap(ground_class("land"), [twin]).radial_sections(LAT, LON, [90.0], 50.0)
    assert len(secs) == 1


def test_ground_at_point():
    gm = _zone_map()
    p = geodesy.LocalProjection(LAT, LON)
    lon, lat = p.to_lonlat(np.array([50.0, 30.0, 0.0]), np.array([0.0, 20.0, 0.0]))
    assert [gm.ground_at(a, b).name for a, b in zip(lon, lat)] == ["river", "sea", "land"]


def _write(tmp_path, obj):
    f = tmp_path / "z.geojson"
    f.write_text(obj if isinstance(obj, str) else json.dumps(obj))
    return f


def test_zone_file_errors(tmp_path):
    land = ground_class("land")
    with pytest.raises(ValueError, match=r"z.geojson: not valid JSON \(line 1"):
        load_zones(_write(tmp_path, "{oops"), land)
    feat = {"type": "Feature", "properties": {"conductivity_ms_m": -1, "permittivity": 10},
            "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]}}
    fc = {"type": "FeatureCollection", "features": [feat]}
    with pytest.raises(ValueError, match=r"conductivity_ms_m must be .*got -1.*feature 1 of .*z.geojson"):
        load_zones(_write(tmp_path, fc), land)
    feat["properties"] = {"conductivity_ms_m": 3, "permittivity": 10, "colour": "red"}
    with pytest.raises(ValueError, match="unknown key 'colour' in properties of feature 1"):
        load_zones(_write(tmp_path, fc), land)
    feat["properties"] = {"conductivity_ms_m": 3}
    with pytest.raises(ValueError, match="missing key 'permittivity'"):
        load_zones(_write(tmp_path, fc), land)
    feat["properties"] = {"conductivity_ms_m": 3, "permittivity": 10}
    feat["geometry"] = {"type": "Point", "coordinates": [0, 0]}
    with pytest.raises(ValueError, match="Polygon or MultiPolygon"):
        load_zones(_write(tmp_path, fc), land)


def test_local_projection_equals_proj_aeqd():
    # PROJ's ellipsoidal azimuthal equidistant projection (pyproj pipeline) as the reference
    from pyproj import Transformer

    t = Transformer.from_pipeline(
        "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad "
        f"+step +proj=aeqd +lat_0={LAT} +lon_0={LON} +ellps=WGS84 +units=km")
    lon = np.array([-50.0, -46.2, -40.0, -46.1, -60.0])
    lat = np.array([40.0, 30.0, 38.4, 38.41, 45.0])
    x, y = geodesy.LocalProjection(LAT, LON).to_xy(lon, lat)
    xr, yr = t.transform(lon, lat)
    np.testing.assert_allclose(x, xr, atol=1e-6)  # km: 1 mm
    np.testing.assert_allclose(y, yr, atol=1e-6)


def test_binary_and_odd_files_are_named(tmp_path):
    from mwreach.coverage.inputs import read_neighbours_csv

    f = tmp_path / "z.geojson"
    f.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(ValueError, match=r"z.geojson: not UTF-8 text"):
        load_zones(f, ground_class("land"))
    f.write_text('{"type": "FeatureCollection", "features": 3}')
    with pytest.raises(ValueError, match=r"'features' must be a list"):
        load_zones(f, ground_class("land"))
    c = tmp_path / "n.csv"
    c.write_bytes(b"name,lat\n\xff\n")
    with pytest.raises(ValueError, match=r"n.csv: not UTF-8 text"):
        read_neighbours_csv(c)


def test_ray_cast_sections_equal_shapely_intersections():
    # reference: GEOS line/polygon intersection (shapely), radial by radial, zone by zone
    import shapely

    from mwreach.coverage.geodesy import local_projection
    from mwreach.coverage.ground import ray_intervals
    from mwreach.coverage.inputs import load_study

    spec = load_study(pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml")
    proj = local_projection(spec.station.lat, spec.station.lon)
    b = np.concatenate([np.arange(0.0, 360.0, 0.5), [137.25, 359.999]])
    length = 700.0
    for zone in spec.ground.zones_xy(proj):
        rb = np.radians(b)
        ends = np.column_stack([length * np.sin(rb), length * np.cos(rb)])
        hits = shapely.intersection(shapely.linestrings(np.stack([np.zeros_like(ends), ends], 1)),
                                    zone)
        ref = {}
        for i in np.flatnonzero(~shapely.is_empty(hits)):
            for part in shapely.get_parts(hits[i]):
                r = np.hypot(*shapely.get_coordinates(part).T)
                if part.geom_type == "LineString" and np.ptp(r) > 1e-9:
                    ref.setdefault(int(i), []).append((r.min(), r.max()))
        got = {}
        for i, a, e in ray_intervals(zone, b, length):
            got.setdefault(i, []).append((a, e))
        assert set(got) == set(ref)
        for i in ref:
            # 1e-6 km: both intersect the same straight edges; the difference is rounding
            assert np.allclose(sorted(got[i]), sorted(ref[i]), atol=1e-6)


def test_one_cast_over_all_zones_equals_one_cast_per_zone():
    # radial_sections casts every zone at once; each zone's even-odd rule must stay its own,
    # also from a site inside a zone (origin inside) and with an empty geometry in the list
    import shapely

    from mwreach.coverage.geodesy import local_projection
    from mwreach.coverage.ground import ray_intervals, ray_intervals_many
    from mwreach.coverage.inputs import load_study

    spec = load_study(pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml")
    b = np.arange(0.0, 360.0, 0.7)
    inside = spec.ground.zones[0].geometry.representative_point()
    for lat, lon in ((spec.station.lat, spec.station.lon), (inside.y, inside.x)):
        zones = list(spec.ground.zones_xy(local_projection(lat, lon))) + [shapely.Polygon()]
        got = sorted(ray_intervals_many(zones, b, 650.0))
        want = sorted((i, z, a, e) for z, g in enumerate(zones)
                      for i, a, e in ray_intervals(g, b, 650.0))
        assert len(got) == len(want) > 0
        assert [g[:2] for g in got] == [w[:2] for w in want]
        np.testing.assert_allclose([g[2:] for g in got], [w[2:] for w in want], atol=1e-12)  # km


def test_plane_area_equals_the_geodesic_area():
    # reference: pyproj Geod.geometry_area_perimeter (GeographicLib, Karney 2013) of the same
    # region taken back to lon/lat; edges densified so that both describe one region
    import shapely

    from mwreach.coverage.geodesy import geodesic_area_km2, local_projection

    for lat in (0.0, 45.0, 70.0, -30.0, 89.0):
        proj = local_projection(lat, 10.0)
        for r in (20.0, 200.0, 1000.0):
            g = (shapely.Point(0.3 * r, -0.2 * r).buffer(0.6 * r, 64)
                 .union(shapely.box(-r, -0.5 * r, 0.2 * r, 0.4 * r))
                 .difference(shapely.Point(0.5 * r, 0.0).buffer(0.1 * r)))
            g = shapely.segmentize(g, r / 200)
            want = geodesic_area_km2(proj.geom_to_lonlat(g))
            # 1e-6 relative: the series for the ellipsoid's area element (docstring); the plane
            # area alone is 1.6e-3 off at 1000 km, so the check can fail
            assert proj.plane_area_km2(g) == pytest.approx(want, rel=1e-6)


def _zone_file(tmp_path, rings):
    feats = [{"type": "Feature", "properties": {"name": f"z{i}", "conductivity_ms_m": 5000.0,
                                                "permittivity": 70.0},
              "geometry": {"type": "Polygon", "coordinates": [ring]}}
             for i, ring in enumerate(rings)]
    path = tmp_path / "z.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats}))
    return path


@pytest.mark.parametrize("ring", [
    [[179, -1], [-179, -1], [-179, 1], [179, 1], [179, -1]],  # across ±180 as written
    [[179, -1], [181, -1], [181, 1], [179, 1], [179, -1]],    # longitudes past 180
    [[-179, 1], [-179, -1], [179, -1], [179, 1], [-179, 1]],  # the other way round
])
def test_a_zone_across_the_antimeridian_covers_what_its_ring_encloses(tmp_path, ring):
    land = ground_class("land")
    gm = load_zones(_zone_file(tmp_path, [ring]), land)
    zone = gm.zones[0].geometry
    # area on the sphere (pyproj.Geod, GeographicLib): a 2° × 2° cell at the equator, not a
    # band round the earth
    ref = abs(Geod(ellps="WGS84").geometry_area_perimeter(
        Polygon([(0, -1), (2, -1), (2, 1), (0, 1)]))[0]) / 1e6
    assert geodesy.geodesic_area_km2(zone) == pytest.approx(ref, rel=2e-4)  # the seam's geodesic edges
    sea = gm.zones[0].ground
    assert gm.ground_at(-46.0, 0.0) == land  # far away: default ground, not the zone
    assert gm.ground_at(179.5, 0.0) == sea and gm.ground_at(-179.5, 0.0) == sea
    assert gm.ground_at(178.5, 0.0) == land and gm.ground_at(-178.5, 0.0) == land
    # radials from a site inside the zone find 1° of longitude (111 km at the equator, WGS84)
    # of zone to the east and to the west, seen the same across the seam
    for lon in (179.5, -179.5):
        sec = gm.radial_sections(0.0, lon, [90.0, 270.0], 400.0)
        ends = [[s.end_km for s in sec[i] if s.ground == sea][0] for i in range(2)]
        # 111.32 km per degree of longitude on the WGS84 equator (a = 6378.137 km)
        near = 111.32 * abs(180.0 - abs(lon))
        far = 111.32 * 2 - near
        expected = (far, near) if lon > 0 else (near, far)
        assert ends == pytest.approx(expected, abs=0.05)  # km: exact ray-edge intersections


def test_zones_on_both_sides_of_the_antimeridian_leave_a_far_site_alone(tmp_path):
    # the case: a zone from 179° E to 179° W once swallowed a site at 46° W
    east = [[175, 30], [179.5, 30], [-179.5, 35], [175, 35], [175, 30]]
    west = [[-176, 30], [-170, 30], [-170, 35], [-176, 35], [-176, 30]]
    gm = load_zones(_zone_file(tmp_path, [east, west]), ground_class("land"))
    assert gm.ground_at(-46.0, 38.4) == ground_class("land")
    bounds = [z.geometry.bounds for z in gm.zones]
    assert all(-180.0 <= b[0] and b[2] <= 180.0 for b in bounds)
    assert geodesy.geodesic_area_km2(gm.zones[0].geometry) < 300_000  # not a band of the globe
    sec = gm.radial_sections(38.4, -46.2, np.arange(0.0, 360.0, 10.0), 2000.0)
    assert all(len(s) == 1 for s in sec)  # only the default ground within 2000 km
