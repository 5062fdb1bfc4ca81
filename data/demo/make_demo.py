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


def feature(name, sigma, eps, pts, note, sigma_range=None):
    props = {"name": name, "conductivity_ms_m": sigma, "permittivity": eps, "note": note}
    if sigma_range is not None:  # the 5 %–95 % range of a log-normal σ (uncertainty bands)
        props["conductivity_range_ms_m"] = sigma_range
    return {
        "type": "Feature",
        "properties": props,
        "geometry": {"type": "Polygon", "coordinates": [ring(pts)]},
    }


zones = {
    "type": "FeatureCollection",
    "features": [
        feature("Hollin uplands", 0.5, 10, [(-25, 45), (-22, -60), (-300, -260), (-420, 0), (-300, 180)],
                "dry uplands, invented; conductivity known to a factor of two", [0.25, 1.0]),
        feature("Sarnel valley", 15, 30, [(4, 1), (5, 5), (-60, 36), (-160, 70), (-165, 60), (-62, 28)],
                "river valley, high conductivity, invented; drawn after the uplands so it wins where they overlap",
                [8, 30]),
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

# --- a band-wide neighbour list: invented stations on every part of 530–1700 kHz within 3000 km,
# for the channel search (quellmoor_band.toml). Classes as a band would hold them: a few class A
# stations on their own channels, mostly class B, class C on a handful of local channels, class
# D day-timers; a few directional (the Varnholt two-tower array); a few carriers of a 9 kHz
# raster across an invented regional boundary (off the 10 kHz raster).
import csv  # noqa: E402

from mwreach.coverage.geodesy import fwd_points  # noqa: E402

rng = np.random.default_rng(1390)
SYL_A = ["Ar", "Bel", "Cor", "Dra", "El", "Fen", "Gal", "Hob", "Ist", "Jor", "Kel", "Lun",
         "Mar", "Nor", "Orv", "Pel", "Quin", "Ros", "Sul", "Tam", "Ulv", "Ves", "Wen", "Yar"]
SYL_B = ["brin", "dale", "fast", "gorm", "hale", "kirk", "lowe", "mere", "nock", "quay",
         "rith", "stow", "thwe", "vane", "wick", "zell"]
CLEAR = [640, 750, 880, 1020, 1110, 1200]  # invented clear channels of the class A stations
LOCAL = [1230, 1240, 1340, 1400, 1450, 1490]  # invented local channels of the class C stations
names, rows = set(), []


def invented_name():
    while True:
        n = f"{rng.choice(SYL_A)}{rng.choice(SYL_B)} {rng.choice(['Radio', 'AM', 'Sound', 'Voice'])}"
        if n not in names:
            names.add(n)
            return n


def place(min_km, max_km):
    az = rng.uniform(0.0, 360.0)
    d = np.sqrt(rng.uniform(min_km ** 2, max_km ** 2))  # uniform over the annulus's area
    lat, lon = fwd_points(SITE[0], SITE[1], az, d)
    return round(float(lat), 4), round(float(lon), 4)


def station(freq, klass):
    lat, lon = place(60.0 if klass in "CD" else 150.0, 3000.0 if klass == "A" else 1800.0)
    if klass == "A":
        day = night = 50.0
        height = 190.0
    elif klass == "B":
        day = float(rng.choice([0.5, 1.0, 2.5, 5.0, 10.0, 25.0, 50.0]))
        night = float(min(day, rng.choice([0.25, 0.5, 1.0, 5.0, 10.0])))
        height = float(rng.choice([70.0, 90.0, 120.0]))
    elif klass == "C":
        day, night, height = 1.0, 1.0, 90.0
    else:
        day, night, height = float(rng.choice([0.25, 0.5, 1.0, 5.0])), 0.0, 90.0
    return {"name": invented_name(), "lat": lat, "lon": lon, "freq_khz": freq,
            "power_day_kw": day, "power_night_kw": night, "height_deg": height,
            "height_m": "", "loss_ohm": 1, "array": "", "class": klass,
            "protected_day_mv_m": "", "protected_night_mv_m": ""}


for f in range(530, 1701, 10):
    if f in CLEAR:
        rows.append(station(f, "A"))
    k = 5 if f in LOCAL else 4
    for _ in range(k):
        klass = "C" if f in LOCAL else str(rng.choice(["B", "B", "B", "D"]))
        rows.append(station(f, klass))
for r in rows:  # class B in 1605–1705 kHz: at most 10 kW (47 CFR 73.21(a)(2), read)
    if r["class"] == "B" and r["freq_khz"] >= 1610:
        r["power_day_kw"] = min(r["power_day_kw"], 10.0)
        r["power_night_kw"] = min(r["power_night_kw"], 10.0)
directional = rng.choice([i for i, r in enumerate(rows) if r["class"] == "B"], 10, replace=False)
for i in directional:
    rows[int(i)].update(height_deg="", loss_ohm="", array="varnholt_array.toml")
for f in (603, 747, 999, 1206, 1341, 1494):  # 9 kHz raster carriers, far to the east
    r = station(f, "B")
    lat, lon = fwd_points(SITE[0], SITE[1], rng.uniform(60.0, 120.0), rng.uniform(900.0, 1500.0))
    r.update(lat=round(float(lat), 4), lon=round(float(lon), 4))
    rows.append(r)
rows.sort(key=lambda r: (r["freq_khz"], r["name"]))
with open(HERE / "band_neighbours.csv", "w", newline="", encoding="utf-8") as fh:
    w = csv.DictWriter(fh, fieldnames=list(rows[0]), lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
band = (HERE / "quellmoor.toml").read_text(encoding="utf-8")
band = band.replace("# mwreach demo study —", "# mwreach band demo study (made by make_demo.py from "
                    "quellmoor.toml) —", 1)
band = band.replace('neighbours = "neighbours.csv"', 'neighbours = "band_neighbours.csv"')
band = band.replace('title = "Radio Quellmoor — proposed', 'title = "Radio Quellmoor, band-wide '
                    'neighbours — proposed', 1)
(HERE / "quellmoor_band.toml").write_text(band, encoding="utf-8")
print(f"wrote band_neighbours.csv ({len(rows)} invented stations) and quellmoor_band.toml")

# --- the demo with its contours' uncertainty bands: quellmoor.toml with an [uncertainty] table
# (its default ground and two zones carry conductivity ranges)
unc = (HERE / "quellmoor.toml").read_text(encoding="utf-8")
unc = unc.replace("# mwreach demo study —", "# mwreach demo study with uncertainty bands (made by "
                  "make_demo.py from quellmoor.toml) —", 1)
unc = unc.replace('title = "Radio Quellmoor — proposed', 'title = "Radio Quellmoor, ground '
                  'uncertainty — proposed', 1)
unc = unc.replace("\n[[contour]]", "\n[uncertainty]               # Monte Carlo over the "
                  "conductivity ranges\ndraws = 200\nseed = 1\n\n[[contour]]", 1)
unc = unc.replace('label = "5 mV/m community"\n', 'label = "5 mV/m community"\ncommunity_goal = '
                  '0.9          # the demo\'s own aim: 90 % of the community inside\n', 1)
(HERE / "quellmoor_uncertain.toml").write_text(unc, encoding="utf-8")
print("wrote quellmoor_uncertain.toml")
