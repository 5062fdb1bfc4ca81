"""Fields of one station at given points: ground wave over the study's ground (47 CFR 73.183, ITU-R
P.368 mixed paths) and 10 % or 50 % sky wave (47 CFR 73.190 Formulas 1–2, ITU-R P.1147);
docs/methods.md §1–§5.
"""

from __future__ import annotations

import functools
from dataclasses import fields

import numpy as np

from ..antenna import Array
from ..contours import level_contour, MAX_RADIAL_KM, radial_fields, radial_length_km
from ..geodesy import fwd_points, inverse, local_projection, midpoint
from ..ground import GroundMap
from ..groundwave import model, mv_m_to_dbu
from ..mixedpath import millington_points_db, path_field_db
from ..skywave import (
    cfr_field_dbu,
    cfr_geometry,
    coupling_loss_db,
    departure_deg,
    geomagnetic_lat_deg,
    in_method_range,
    itu_field_dbu,
    sky_field_dbu,
    sky_path,
    SkyPath,
)
from ..station import Station
from .records import NightSettings


def point_ground_dbu(freq_khz, ground: GroundMap, lat, lon, array: Array, power_kw: float,
                     pts_lat, pts_lon, method: str = "millington", earth_k: float = 4 / 3):
    """Ground-wave field [dBµV/m] from a transmitter at (lat, lon) at arbitrary points.

    Each path is the radial from the transmitter toward the point, with its own ground sections.
    Points closer than one wavelength get NaN.
    """
    pts_lat = np.atleast_1d(np.asarray(pts_lat, float))
    pts_lon = np.atleast_1d(np.asarray(pts_lon, float))
    d, az, _ = inverse(lat, lon, pts_lat, pts_lon)
    return ground_dbu_along(freq_khz, ground, lat, lon, array, power_kw, az, d, method, earth_k)


def ground_dbu_along(freq_khz, ground: GroundMap, lat, lon, array: Array, power_kw: float,
                     bearings_deg, dist_km, method: str = "millington", earth_k: float = 4 / 3):
    """Ground-wave field [dBµV/m] from a transmitter at (lat, lon) at points given by bearing
    [deg] and distance [km] from it, each over its own radial's ground sections (NaN closer
    than one wavelength)."""
    az = np.atleast_1d(np.asarray(bearings_deg, float))
    d = np.atleast_1d(np.asarray(dist_km, float))
    out = np.full(d.shape, np.nan)
    if d.size == 0:
        return out
    e1 = array.field_mv_m(az, 0.0, power_kw)
    lam = model(freq_khz, ground.default, earth_k).wavelength_km
    far = np.flatnonzero(d >= lam)
    if far.size == 0:
        return out
    secs = ground.radial_sections(lat, lon, az[far], float(d[far].max()) + 1.0)
    if method == "millington":  # all paths in one pass
        out[far] = millington_points_db(secs, d[far], freq_khz, earth_k) + mv_m_to_dbu(e1[far])
        return out
    for k, i in enumerate(far):
        out[i] = path_field_db(method, secs[k], [d[i]], freq_khz, earth_k)[0] + mv_m_to_dbu(e1[i])
    return out


def protected_contour_points(freq_khz, ground: GroundMap, lat, lon, array: Array,
                             power_kw: float, level_mv_m: float, bearings,
                             method="millington", earth_k=4 / 3, step_km=0.5,
                             max_km: float | None = None, polygons: dict | None = None,
                             key=None):
    """Points (bearing, km, lat, lon) of a station's ground-wave contour at ``level_mv_m``.

    Bearings where the level is not reached are dropped; where it is still exceeded at the end of
    the radial, the end point is used. With ``polygons``, the contour's lon/lat polygon (from
    the same contouring as the study's own contours) is stored under ``key``.
    """
    bearings = np.asarray(bearings, dtype=float)
    e1 = array.field_mv_m(bearings, 0.0, power_kw)
    if max_km is None:
        max_km = radial_length_km(freq_khz, ground, level_mv_m, float(e1.max()), earth_k)
    rad = radial_fields(freq_khz, ground, lat, lon, bearings, e1, max_km, step_km, method, earth_k)
    c = level_contour(rad, level_mv_m, "", local_projection(float(lat), float(lon)))
    if polygons is not None:
        polygons[key] = c.polygon_lonlat
    dist = np.where(np.isinf(c.first_km), max_km, c.first_km)
    ok = np.isfinite(dist)
    plat, plon = fwd_points(lat, lon, bearings[ok], dist[ok])
    return bearings[ok], dist[ok], plat, plon


def sky_dbu_from(tx_lat, tx_lon, freq_khz, array: Array, power_kw: float, pts_lat, pts_lon,
                 night: NightSettings):
    """10 % (or 50 %) sky wave [dBµV/m] of a transmitter at the points, with its antenna's
    radiation toward each point at the departure angle.

    Points whose path lies outside the method's distance range get NaN (the caller skips them
    and says so); a transmitter with no night power gives −inf (no sky wave).
    """
    pts_lat = np.atleast_1d(np.asarray(pts_lat, float))
    pts_lon = np.atleast_1d(np.asarray(pts_lon, float))
    out = np.full(pts_lat.shape, np.nan)
    if power_kw <= 0:
        return np.full(pts_lat.shape, -np.inf)
    path = sky_path(tx_lat, tx_lon, pts_lat, pts_lon, height_km=night.layer_height_km,
                    geometry="cfr" if night.method == "cfr" else "geodesic")
    ok = in_method_range(path.distance_km, night.method)
    if not ok.any():
        return out
    sub = SkyPath(*(np.asarray(getattr(path, f.name))[ok] for f in fields(SkyPath)))
    e_dep = array.field_mv_m(sub.azimuth_deg, sub.departure_deg, power_kw)
    out[ok] = sky_field_dbu(sub, e_dep, night.method, night.percent, freq_khz=freq_khz,
                            tx=(tx_lat, tx_lon), rx=(pts_lat[ok], pts_lon[ok]),
                            **(night.itu_kwargs if night.method == "itu" else {}))
    return out


_CANONICAL: dict = {}


def _zone_boxes(ground_map):
    """Per zone its lon/lat box (west, south, east, north) [deg], widened by 0.5°, kept on the
    map; None for a zone whose box spans more than 180° of longitude (taken to meet every
    path)."""
    hit = ground_map.__dict__.get("_boxes")
    if hit is None:
        hit = []
        for z in ground_map.zones:
            w, so, e, n = z.geometry.bounds
            hit.append(None if e - w > 180.0 else (w - 0.5, so - 0.5, e + 0.5, n + 0.5))
        ground_map.__dict__["_boxes"] = hit
    return hit


def _regional_best(ground_map, tlat, tlon, plat, plon, d_km, cand):
    """For every (transmitter, point) pair the index in ``ground_map.grounds`` of the best
    ground (largest σ) among the default and the zones whose box meets the path's box. The
    path's box is that of its ends, widened by 0.5° plus a quarter of the path's length in
    degrees (a great circle strays from the box of its ends by less than that: its bulge in
    latitude is at most θ²·tan(φ)/8 for an arc of θ radians at latitude φ, under θ/4 for the
    distances and latitudes of the night checks) and in longitude by that over cos(latitude)."""
    grounds = ground_map.grounds
    best = np.zeros(cand.shape, dtype=np.intp)  # the default ground
    best_sigma = np.full(cand.shape, grounds[0].sigma_ms_m)
    lat_pad = 0.5 + 0.25 * d_km / 111.2
    south = np.minimum(tlat, plat[None, :]) - lat_pad
    north = np.maximum(tlat, plat[None, :]) + lat_pad
    top = np.minimum(np.maximum(np.abs(south), np.abs(north)), 89.0)
    lon_pad = lat_pad / np.cos(np.radians(top))
    # longitudes relative to the transmitter, in (−180, 180]: a path's box does not wrap
    rel = np.mod(plon[None, :] - tlon + 180.0, 360.0) - 180.0
    west = tlon + np.minimum(rel, 0.0) - lon_pad
    east = tlon + np.maximum(rel, 0.0) + lon_pad
    for k, (z, box) in enumerate(zip(ground_map.zones, _zone_boxes(ground_map)), 1):
        if box is None:
            meets = cand
        else:
            w, so, e, n = box
            lat_ok = (north >= so) & (south <= n)
            lon_ok = np.zeros(cand.shape, dtype=bool)
            for shift in (-360.0, 0.0, 360.0):  # the zone's box on either side of ±180°
                lon_ok |= (east >= w + shift) & (west <= e + shift)
            meets = cand & lat_ok & lon_ok
        better = meets & (z.ground.sigma_ms_m > best_sigma)
        best[better] = k
        best_sigma[better] = z.ground.sigma_ms_m
    return best

def _canonical_night_antenna(station):
    """The station's night radiator as one shared object for all equal radiators, found once
    per station (hashing an antenna is dear; comparing objects by identity is not)."""
    hit = station.__dict__.get("_night_canonical")
    if hit is None:
        a = station.night_antenna
        if len(_CANONICAL) > 65_536:
            _CANONICAL.clear()
        hit = station.__dict__["_night_canonical"] = _CANONICAL.setdefault(a, a)
    return hit


def night_fields(txs, pts_lat, pts_lon, spec, night: NightSettings, skipped: set | None = None):
    """Interfering fields at night of several transmitters at several points, in one pass.

    For every (transmitter, point) pair: the larger of its 10 % (or 50 %) sky wave and its
    night ground wave (mixed paths over the study's zones, night power and antenna). The path
    geometry, the sky-wave formula and the antenna patterns are evaluated for all pairs at once
    (transmitters with the same antenna, power and frequency share one call). The ground wave
    is computed only for pairs where an upper bound exceeds the sky wave: first the homogeneous
    curve of the best ground of the whole map, then that of the best ground the path crosses,
    both with the strongest horizontal radiation; so the result is exact while distant stations
    cost no ground-wave work. Ground wave beyond 2000 km (``MAX_RADIAL_KM``) is taken as
    negligible. Pairs a sky-wave method cannot reach get no sky wave, and the transmitter's name
    goes into ``skipped``.

    Returns
    -------
    field_dbu : (n_tx, n_pts) [dBµV/m], −inf where a transmitter has no night power
    ground : (n_tx, n_pts) bool, True where the ground wave is the larger
    """
    pts_lat = np.atleast_1d(np.asarray(pts_lat, float))
    pts_lon = np.atleast_1d(np.asarray(pts_lon, float))
    n_tx, n_pts = len(txs), pts_lat.size
    out = np.full((n_tx, n_pts), -np.inf)
    if n_tx == 0 or n_pts == 0:
        return out, np.zeros(out.shape, dtype=bool)
    tlat = np.array([t.lat for t in txs])[:, None]
    tlon = np.array([t.lon for t in txs])[:, None]
    if night.method == "cfr":
        d, az, back, mlat, mlon = cfr_geometry(tlat, tlon, pts_lat[None, :], pts_lon[None, :])
    else:
        d, az, back = inverse(tlat, tlon, pts_lat[None, :], pts_lon[None, :])
        mlat, mlon = midpoint(tlat, tlon, pts_lat[None, :], pts_lon[None, :])
    phi = geomagnetic_lat_deg(mlat, mlon)
    dep = np.maximum(departure_deg(d, 1, night.layer_height_km), 0.0)
    ok = in_method_range(d, night.method)
    if skipped is not None:
        for i in np.flatnonzero(~ok.all(axis=1)):
            skipped.add(txs[i].name)
    groups: dict = {}  # by antenna (equal antennas share one object), power and frequency
    antennas: dict = {}
    for i, t in enumerate(txs):
        if t.power_night_kw > 0:
            a = _canonical_night_antenna(t)
            antennas[id(a)] = a
            groups.setdefault((id(a), float(t.power_night_kw), float(t.freq_khz)), []).append(i)
    sky = np.full((n_tx, n_pts), -np.inf)
    for (aid, power, freq), rows in groups.items():
        antenna = antennas[aid]
        rows = np.array(rows)
        m = ok[rows]
        if not m.any():
            continue
        e_dep = antenna.field_mv_m(az[rows][m], dep[rows][m], power)
        with np.errstate(divide="ignore"):
            gain = 20 * np.log10(e_dep)
        if night.method == "cfr":
            f = cfr_field_dbu(d[rows][m], phi[rows][m], night.percent) + gain - 40.0  # /100 mV/m
        else:
            ri, pj = np.nonzero(m)
            lp = (coupling_loss_db(tlat[rows][ri, 0], tlon[rows][ri, 0], az[rows][m])
                  + coupling_loss_db(pts_lat[pj], pts_lon[pj], back[rows][m]))
            f = gain - float(mv_m_to_dbu(300.0)) + 60.0 + itu_field_dbu(
                d[rows][m], freq, phi[rows][m], night.percent, lp_db=lp, **night.itu_kwargs)
        block = sky[rows]
        block[m] = f
        sky[rows] = block
    # ground wave where it can matter: first a bound for all pairs at once (best ground of the
    # map, strongest horizontal radiation), per frequency
    best = max(spec.ground.grounds, key=lambda g: g.sigma_ms_m)
    ground = np.full((n_tx, n_pts), -np.inf)
    bound = np.full((n_tx, n_pts), -np.inf)
    e_max = np.array([t.max_horizontal_mv_m("night") for t in txs])
    for freq in {float(t.freq_khz) for t in txs}:
        rows = np.array([i for i, t in enumerate(txs)
                         if float(t.freq_khz) == freq and t.power_night_kw > 0], dtype=int)
        if rows.size == 0:
            continue
        mod = model(freq, best, spec.earth_k)
        dd = d[rows]
        near = (dd >= mod.wavelength_km) & (dd <= MAX_RADIAL_KM)
        blk = np.full(dd.shape, -np.inf)
        blk[near] = mod.curve_db(dd[near]) + mv_m_to_dbu(np.broadcast_to(e_max[rows][:, None],
                                                                         dd.shape)[near])
        bound[rows] = blk
    # a second bound, still for all pairs at once: the best ground among the default and the
    # zones whose (widened) box the path's (widened) box meets; a path can only cross grounds
    # of those zones, so this bounds the field as the best ground on the path does
    cand = bound > sky
    if cand.any() and spec.ground.zones:
        regional = _regional_best(spec.ground, tlat, tlon, pts_lat, pts_lon, d, cand)
        for gi in np.unique(regional[cand]):
            g = spec.ground.grounds[gi]
            for freq in {float(t.freq_khz) for t in txs}:
                rows = np.array([i for i, t in enumerate(txs) if float(t.freq_khz) == freq
                                 and t.power_night_kw > 0], dtype=int)
                if rows.size == 0:
                    continue
                sel = cand[rows] & (regional[rows] == gi)
                if not sel.any():
                    continue
                mod = model(freq, g, spec.earth_k)
                dd = d[rows][sel]
                val = np.where(dd >= mod.wavelength_km, mod.curve_db(np.maximum(
                    dd, mod.wavelength_km)), np.inf)  # inside a wavelength: no bound, keep it
                blk = bound[rows]
                blk[sel] = np.minimum(blk[sel], val + mv_m_to_dbu(
                    np.broadcast_to(e_max[rows][:, None], sel.shape)[sel]))
                bound[rows] = blk
    for i in np.flatnonzero((bound > sky).any(axis=1)):
        t = txs[i]
        need = np.flatnonzero(bound[i] > sky[i])
        secs = spec.ground.radial_sections(t.lat, t.lon, az[i][need], float(d[i][need].max()) + 1.0)
        # the best ground on each path (the first of equal conductivity, as max() picks)
        sig = np.array([g.sigma_ms_m for g in secs.grounds])[secs.ground]
        owner = np.repeat(np.arange(len(secs)), np.diff(secs.ptr))
        top = np.full(len(secs), -np.inf)
        np.maximum.at(top, owner, sig)
        pick = np.flatnonzero(sig == top[owner])
        best_on_path = secs.ground[pick[np.searchsorted(owner[pick], np.arange(len(secs)))]]
        tight = np.empty(need.size)
        for gi in np.unique(best_on_path):
            sel = best_on_path == gi
            tight[sel] = model(t.freq_khz, secs.grounds[gi], spec.earth_k).curve_db(d[i][need[sel]])
        need = need[tight + mv_m_to_dbu(e_max[i]) > sky[i][need]]
        if need.size:
            ground[i, need] = point_ground_dbu(t.freq_khz, spec.ground, t.lat, t.lon, t.night_antenna,
                                               t.power_night_kw, pts_lat[need], pts_lon[need],
                                               spec.mixed_path, spec.earth_k)
    ground = np.where(np.isnan(ground), -np.inf, ground)
    return np.maximum(sky, ground), ground > sky


def night_contribution(tx: Station, pts_lat, pts_lon, spec, night: NightSettings,
                       skipped: set | None = None):
    """One transmitter's interfering field at night [dBµV/m] at the points and what carries it
    (``"sky"`` or ``"ground"``); see :func:`night_fields`."""
    f, g = night_fields([tx], pts_lat, pts_lon, spec, night, skipped)
    return f[0], np.where(g[0], "ground", "sky").astype(object)
