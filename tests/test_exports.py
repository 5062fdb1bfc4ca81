"""Every export parsed back and checked against the run: coordinates, orientation, units."""

import json
import pathlib
import xml.etree.ElementTree as ET

import pytest
import shapely
from pyproj import Geod

from mwreach.coverage.geodesy import inverse
from mwreach.coverage.inputs import load_study

DEMO = pathlib.Path(__file__).parents[1] / "data" / "demo" / "quellmoor.toml"

KML = "{http://www.opengis.net/kml/2.2}"
WGS84 = Geod(ellps="WGS84")


def _kml_placemarks(path):
    root = ET.parse(path).getroot()
    out = []
    for pm in root.iter(f"{KML}Placemark"):
        name = pm.find(f"{KML}name").text
        point = pm.find(f".//{KML}Point/{KML}coordinates")
        if point is not None:
            lon, lat, _ = map(float, point.text.split(","))
            out.append((name, shapely.Point(lon, lat)))
            continue
        polys = []
        for poly in pm.iter(f"{KML}Polygon"):
            ring = poly.find(f"{KML}outerBoundaryIs/{KML}LinearRing/{KML}coordinates").text
            xy = [tuple(map(float, c.split(",")[:2])) for c in ring.split()]
            holes = [[tuple(map(float, c.split(",")[:2])) for c in h.text.split()]
                     for h in poly.findall(f"{KML}innerBoundaryIs/{KML}LinearRing/{KML}coordinates")]
            polys.append(shapely.Polygon(xy, holes))
        out.append((name, shapely.MultiPolygon(polys)))
    return out


def _geodesic_area_km2(geom):
    return sum(abs(WGS84.geometry_area_perimeter(p)[0]) for p in shapely.get_parts(geom)) / 1e6


def test_kml_and_geojson_put_everything_where_the_run_says(demo_run):
    out, _ = demo_run
    spec = load_study(DEMO)
    st = spec.station
    summary = json.loads((out / "summary.json").read_text())
    gj = json.loads((out / "contours.geojson").read_text())
    marks = dict(_kml_placemarks(out / "contours.kml"))
    # the site: longitude first in both (RFC 7946 §3.1.1; KML 2.2 coordinates are lon,lat,alt)
    site = gj["features"][0]
    assert site["properties"]["kind"] == "site"
    assert site["geometry"]["coordinates"] == pytest.approx([st.lon, st.lat], abs=1e-6)
    assert (marks[st.name].x, marks[st.name].y) == pytest.approx((st.lon, st.lat), abs=1e-6)
    levels = {lv["level_mv_m"]: lv for lv in summary["levels"]}
    for f in gj["features"]:
        p = f["properties"]
        if p["kind"] != "day ground wave":
            continue
        poly = shapely.geometry.shape(f["geometry"])
        kml = marks[p["label"]]
        # the same ground in both files: areas agree with the run's geodesic area (pyproj
        # Geod on WGS84); 0.1 %: coordinates on a 1e-6° grid
        for g in (poly, kml):
            assert _geodesic_area_km2(g) == pytest.approx(levels[p["level_mv_m"]]["area_km2"],
                                                          rel=1e-3)
        # exteriors counter-clockwise (RFC 7946 §3.1.6)
        for part in shapely.get_parts(poly):
            assert part.exterior.is_ccw
        # every contour around the site holds it (a swapped lat/lon would not)
        assert kml.contains(shapely.Point(st.lon, st.lat))
    # the neighbours' protected contours: each around its own station
    by_name = {n.name: n for n in spec.interference.neighbours}
    seen = 0
    for f in gj["features"]:
        p = f["properties"]
        if p["kind"] == "neighbour protected contour":
            n = by_name[p["station"]]
            assert p["freq_khz"] == n.freq_khz
            assert shapely.geometry.shape(f["geometry"]).contains(shapely.Point(n.lon, n.lat))
            assert marks[p["label"]].contains(shapely.Point(n.lon, n.lat))
            seen += 1
    assert seen >= 4
    # the failing overlap's point lies between the two stations, inside both 25 mV/m reaches
    ov = [f for f in gj["features"] if f["properties"]["kind"] == "contour overlap"]
    assert ov and ov[0]["properties"]["station"] == "Kestrel Point Radio"
    lon, lat = ov[0]["geometry"]["coordinates"]
    k = by_name["Kestrel Point Radio"]
    d_site = float(inverse(st.lat, st.lon, lat, lon)[0])
    d_nb = float(inverse(k.lat, k.lon, lat, lon)[0])
    d_sites = float(inverse(st.lat, st.lon, k.lat, k.lon)[0])
    assert d_site < d_sites + 1.0 and d_nb < d_sites + 1.0  # km
    name = ov[0]["properties"]["label"]
    assert (marks[name].x, marks[name].y) == pytest.approx((lon, lat), abs=1e-6)
