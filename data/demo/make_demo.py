"""Regenerate the invented demo scenario's GeoJSON files (run by hand): zones, the community
boundary and the population layer (people.geojson: a rural grid and six towns).

The scenario is fiction: the coast of Vennick Bay, the Sarnel river valley, the Hollin uplands,
Merrow Water and the towns of Quellmoor, Dunmere, Orrin Ford, Sarnel Bridge, Tollaby and
Cawdell do not exist. The site is placed in open ocean so that no
real place is implied. Shapes are drawn in km east/north of the site and converted to lon/lat.
"""

import json
import pathlib

import numpy as np

from mwreach.coverage.geodesy import LocalProjection

SITE = (38.40, -46.20)  # lat, lon of the demo transmitter
HERE = pathlib.Path(__file__).parent
proj = LocalProjection(*SITE)


def ring(points_km):
    xy = np.array(points_km + [points_km[0]], dtype=float)
    lon, lat = proj.to_lonlat(xy[:, 0], xy[:, 1])
    return [[round(float(a), 6), round(float(b), 6)] for a, b in zip(lon, lat)]


def circle(cx, cy, r, n=24):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return [(cx + r * np.cos(a), cy + r * np.sin(a)) for a in t]


def feature(name, sigma, eps, pts, note):
    return {
        "type": "Feature",
        "properties": {"name": name, "conductivity_ms_m": sigma, "permittivity": eps, "note": note},
        "geometry": {"type": "Polygon", "coordinates": [ring(pts)]},
    }


zones = {
    "type": "FeatureCollection",
    "features": [
        feature("Hollin uplands", 0.5, 10, [(-25, 45), (-22, -60), (-300, -260), (-420, 0), (-300, 180)],
                "dry uplands, invented"),
        feature("Sarnel valley", 15, 30, [(4, 1), (5, 5), (-60, 36), (-160, 70), (-165, 60), (-62, 28)],
                "river valley, high conductivity, invented; drawn after the uplands so it wins where they overlap"),
        feature("Merrow Water", 3, 80, circle(-14, -24, 5), "fresh-water lake, invented"),
        feature("Calder flats", 30, 40, [(-12, 35), (10, 35), (8, 90), (-20, 95)],
                "coastal marsh, invented"),
        feature("Vennick Bay and the outer sea", 5000, 70,
                [(12, 500), (12, 10), (6, 8), (3, 2), (5, -6), (12, -10), (12, -500), (700, -500),
                 (700, 500)], "sea water (ITU-R P.368 average salinity)"),
    ],
}
(HERE / "zones.geojson").write_text(json.dumps(zones, indent=1) + "\n")

community = {
    "type": "FeatureCollection",
    "features": [{
        "type": "Feature",
        "properties": {"name": "Quellmoor"},
        "geometry": {"type": "Polygon", "coordinates": [ring([(-9, 2), (-3, 1), (-2, 6), (-5, 9), (-10, 7)])]},
    }],
}
(HERE / "community.geojson").write_text(json.dumps(community, indent=1) + "\n")
print("wrote zones.geojson and community.geojson")

# --- population: an invented rural grid (5 km cells, people per cell) and invented towns as
# points; nobody at sea. Run by hand; writes people.geojson.
import shapely  # noqa: E402
from shapely.geometry import Polygon  # noqa: E402

SEA = Polygon([(12, 500), (12, 10), (6, 8), (3, 2), (5, -6), (12, -10), (12, -500), (700, -500),
               (700, 500)])
RURAL_PER_KM2 = 14.0  # invented
TOWNS = [  # (name, x km, y km, people): all invented
    ("Quellmoor", -6.0, 5.0, 18_000),
    ("Dunmere", -40.0, 20.0, 9_000),
    ("Orrin Ford", -25.0, -45.0, 6_000),
    ("Sarnel Bridge", -90.0, 50.0, 12_000),
    ("Tollaby", -110.0, -80.0, 4_000),
    ("Cawdell", -10.0, 60.0, 5_000),
]
cells = []
for x in np.arange(-125.0, 10.0, 5.0):
    for y in np.arange(-125.0, 125.0, 5.0):
        sq = Polygon([(x, y), (x + 5, y), (x + 5, y + 5), (x, y + 5)])
        land = sq.difference(SEA)
        if land.area < 0.5:
            continue
        cells.append({"type": "Feature",
                      "properties": {"population": round(RURAL_PER_KM2 * land.area)},
                      "geometry": {"type": "Polygon", "coordinates": [ring(
                          [(x, y), (x + 5, y), (x + 5, y + 5), (x, y + 5)])]}})
towns = []
for name, x, y, n in TOWNS:
    lon, lat = proj.to_lonlat(np.array([x]), np.array([y]))
    towns.append({"type": "Feature", "properties": {"name": name, "population": n},
                  "geometry": {"type": "Point",
                               "coordinates": [round(float(lon[0]), 6), round(float(lat[0]), 6)]}})
people = {"type": "FeatureCollection", "features": towns + cells}
(HERE / "people.geojson").write_text(json.dumps(people, separators=(",", ":")) + "\n")
print(f"wrote people.geojson ({len(cells)} cells, {len(towns)} towns)")
