"""Night-time sky wave: path geometry, 47 CFR 73.190 and ITU-R P.1147.

Both methods give the field for a reference radiation (CFR: 100 mV/m at 1 km; ITU: 300 V
c.m.f.) and scale with the transmitting antenna's radiation toward the receiver at the
departure angle.

References
----------
47 CFR 73.190, Formulas 1 and 2 (skywave field, 50 % and 10 % of the time).
ITU-R P.1147-5, "Prediction of sky-wave field strength at frequencies between about 150 and
1 700 kHz", §2–§4. docs/methods.md §4.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .geodesy import inverse, midpoint
from .validate import check_finite

__all__ = [
    "POLE_LAT_DEG",
    "POLE_LON_DEG",
    "EARTH_RADIUS_SKY_KM",
    "ITU_CONSTANTS",
    "CFR_CONSTANTS",
    "CFR_RANGE_KM",
    "ITU_RANGE_KM",
    "geomagnetic_lat_deg",
    "slant_km",
    "departure_deg",
    "auto_hops",
    "ten_percent_excess_db",
    "cfr_field_dbu",
    "itu_field_dbu",
    "SkyPath",
    "sky_path",
    "sky_field_dbu",
    "coupling_loss_db",
    "cfr_geometry",
    "CFR_KM_PER_DEG",
    "in_method_range",
    "METHOD_FREQ_KHZ",
    "METHOD_DISTANCE_KM",
]

POLE_LAT_DEG = 78.5  # geomagnetic dipole pole used by 47 CFR 73.190 and ITU-R P.1147
POLE_LON_DEG = -69.0
EARTH_RADIUS_SKY_KM = 6370.0  # radius of the departure-angle geometry (docs/methods.md §4)
#: Distance ranges outside which the methods are refused.
CFR_RANGE_KM = (0.0, 4000.0)  # 47 CFR 73.190 curves to about 4000 km (from memory)
ITU_RANGE_KM = (50.0, 12_000.0)  # ITU-R P.1147 scope [pub]
ITU_FREQ_RANGE_KHZ = (150.0, 1700.0)
#: 47 CFR 73.190 is the US rule for the AM broadcast band, 535–1705 kHz (47 CFR 73.14 defines
#: the band's channels, 540–1700 kHz); outside it the formula is not used.
CFR_FREQ_RANGE_KHZ = (535.0, 1705.0)
METHOD_FREQ_KHZ = {"cfr": CFR_FREQ_RANGE_KHZ, "itu": ITU_FREQ_RANGE_KHZ}
METHOD_DISTANCE_KM = {"cfr": CFR_RANGE_KM, "itu": ITU_RANGE_KM}

#: 47 CFR 73.190 Formula 1 and 2 constants (read in the published text, docs/methods.md §4.1).
CFR_CONSTANTS = {
    "f0_db": 97.5,  # Fc(50) = f0 − 20·log10 D − (2π + c·tan²Φ_M)·sqrt(D/1000)
    "tan2_coeff": 4.95,  # c above
    "phi_cap_deg": 60.0,  # |Φ_M| > 60° is evaluated at 60° (Note 1)
    "slant_km2": 40_000.0,  # D = sqrt(40 000 + d²)
    "delta_low_db": 6.0,  # Δ = Fc(10) − Fc(50) for |Φ_M| < 40°
    "delta_slope_db_per_deg": 0.2,  # Δ = 0.2·|Φ_M| − 2 for 40° ≤ |Φ_M| ≤ 60°
    "delta_offset_db": -2.0,
    "delta_high_db": 10.0,  # Δ for |Φ_M| > 60°
}

#: ITU-R P.1147 constants recalled from memory (docs/methods.md §4 tags them [mem]); kept here in
#: one place so that they can be corrected against the published text.
ITU_CONSTANTS = {
    "k0": (3.2, "basic loss factor k = k0 + k1·f^0.4·tan²(Φ + 3°) (from memory)"),
    "k1": (0.19, "see k0 (from memory)"),
    "phi_offset_deg": (3.0, "see k0 (from memory)"),
    "phi_cap_deg": (60.0, "|Φ| above 60° is evaluated at 60° in k, as in 47 CFR 73.190 (from memory)"),
    "A_region_1_3": (107.0, "constant A, Regions 1 and 3 (from memory)"),
    "A_region_2": (110.0, "constant A, Region 2 (from memory)"),
    "b_north_america": (4.0, "solar-activity factor b (from memory)"),
    "b_europe_australia": (1.0, "solar-activity factor b (from memory)"),
    "b_elsewhere": (0.0, "solar-activity factor b (from memory)"),
    "lp_numerator_db": (180.0, "L_p = 180·(36 + θ² + I²)^-1/2 − 2 per terminal, |I| ≤ 45° (from memory)"),
    "lp_constant": (36.0, "see lp_numerator_db (from memory)"),
    "lp_offset_db": (2.0, "see lp_numerator_db (from memory)"),
}
SOLAR_B = {"north-america": "b_north_america", "europe-australia": "b_europe_australia",
           "elsewhere": "b_elsewhere"}


def _c(name: str) -> float:
    return ITU_CONSTANTS[name][0]


def geomagnetic_lat_deg(lat_deg, lon_deg):
    """Geomagnetic latitude [deg] for a dipole pole at 78.5° N, 69° W.

    Φ_M = asin[sin a·sin 78.5° + cos a·cos 78.5°·cos(69° + b)], b east-positive longitude.

    References
    ----------
    47 CFR 73.190, Formula 1 notes; docs/methods.md §4.
    """
    a = np.radians(np.asarray(lat_deg, dtype=float))
    b = np.radians(np.asarray(lon_deg, dtype=float))
    p = np.radians(POLE_LAT_DEG)
    s = np.sin(a) * np.sin(p) + np.cos(a) * np.cos(p) * np.cos(b - np.radians(POLE_LON_DEG))
    return np.degrees(np.arcsin(np.clip(s, -1.0, 1.0)))


def slant_km(dist_km):
    """Slant distance D = sqrt(40 000 + d²) [km] (47 CFR 73.190; p of ITU-R P.1147)."""
    return np.sqrt(CFR_CONSTANTS["slant_km2"] + np.asarray(dist_km, dtype=float) ** 2)


def auto_hops(dist_km, height_km: float = 100.0):
    """Fewest hops whose departure angle is not negative for a layer at ``height_km``."""
    a = EARTH_RADIUS_SKY_KM
    d_max = 2 * a * np.arccos(a / (a + height_km))  # one hop grazing both ends
    return np.maximum(1, np.ceil(np.asarray(dist_km, dtype=float) / d_max)).astype(int)


def departure_deg(dist_km, hops=1, height_km: float = 100.0):
    """Departure (elevation) angle [deg] for ``hops`` equal hops off a layer at ``height_km``.

    tan θ = (cos ψ − a/(a + h)) / sin ψ, ψ = d / (2 a n), a = 6370 km (docs/methods.md §4).
    At d = 0 the angle is 90°.
    """
    a = EARTH_RADIUS_SKY_KM
    d = np.asarray(dist_km, dtype=float)
    psi = d / (2 * a * np.asarray(hops, dtype=float))
    return np.degrees(np.arctan2(np.cos(psi) - a / (a + height_km), np.sin(psi)))


def ten_percent_excess_db(phi_deg):
    """Δ = F(10) − F(50) [dB]: 6 for |Φ| < 40°, 0.2|Φ| − 2 for 40–60°, 10 above 60°.

    References
    ----------
    47 CFR 73.190, Formula 2; docs/methods.md §4.
    """
    c = CFR_CONSTANTS
    p = np.abs(np.asarray(phi_deg, dtype=float))
    mid = c["delta_slope_db_per_deg"] * p + c["delta_offset_db"]
    return np.where(p < 40.0, c["delta_low_db"], np.where(p <= 60.0, mid, c["delta_high_db"]))


def _check_range(d, rng, method):
    d = np.asarray(d, dtype=float)
    if d.size and (np.any(~np.isfinite(d)) or d.min() < rng[0] or d.max() > rng[1]):
        bad = d[(~np.isfinite(d)) | (d < rng[0]) | (d > rng[1])][0]
        raise ValueError(f"distance {bad:g} km is outside the {method} sky-wave range "
                         f"{rng[0]:g}–{rng[1]:g} km")


def in_method_range(dist_km, method: str):
    """True where a path length [km] lies within the method's distance range."""
    lo, hi = METHOD_DISTANCE_KM[method]
    d = np.asarray(dist_km, dtype=float)
    return np.isfinite(d) & (d >= lo) & (d <= hi)


def cfr_field_dbu(dist_km, phi_deg, percent: int = 50):
    """47 CFR 73.190 sky-wave field [dBµV/m] for 100 mV/m at 1 km toward the receiver.

    Fc(50) = 97.5 − 20·log10 D − (2π + 4.95·tan²Φ_M)·sqrt(D/1000), D = sqrt(40 000 + d²),
    Φ_M the geomagnetic latitude of the path midpoint, taken as 60° when |Φ_M| > 60°;
    Fc(10) = Fc(50) + Δ(Φ_M).

    References
    ----------
    47 CFR 73.190, Formulas 1 and 2; docs/methods.md §4.
    """
    _check_range(dist_km, CFR_RANGE_KM, "47 CFR 73.190")
    if percent not in (10, 50):
        raise ValueError(f"percent must be 10 or 50 (got {percent!r})")
    c = CFR_CONSTANTS
    D = slant_km(dist_km)
    phi = np.minimum(np.abs(np.asarray(phi_deg, dtype=float)), c["phi_cap_deg"])
    f50 = (c["f0_db"] - 20 * np.log10(D)
           - (2 * np.pi + c["tan2_coeff"] * np.tan(np.radians(phi)) ** 2) * np.sqrt(D / 1000))  # Eq. (1)
    return f50 + (ten_percent_excess_db(phi_deg) if percent == 10 else 0.0)  # Formula 2


def itu_field_dbu(
    dist_km,
    freq_khz,
    phi_deg,
    percent: int = 50,
    region: int = 2,
    solar: str = "elsewhere",
    sunspot: float = 0.0,
    lp_db=0.0,
    sea_gain_db=0.0,
):
    """ITU-R P.1147 annual-median (or 10 %) field [dBµV/m] at six hours after sunset, for a
    c.m.f. of 300 V (V = 0 dB).

    E = V + G_S − L_p + A − 20·log10 p − k_R·p/1000 − L_t, p = sqrt(d² + 40 000),
    k = 3.2 + 0.19·f^0.4·tan²(Φ + 3°) with |Φ| ≤ 60°, k_R = k + b·R/100, L_t = 0 at six hours
    after sunset.

    Parameters
    ----------
    dist_km : ground distance [km], 50–12 000
    freq_khz : [kHz], 150–1700
    phi_deg : geomagnetic latitude of the path midpoint [deg]
    region : ITU Region (1, 2 or 3) for the constant A
    solar : ``"north-america"``, ``"europe-australia"`` or ``"elsewhere"`` (factor b)
    sunspot : sunspot number R
    lp_db : polarisation coupling loss of both terminals [dB] (see :func:`coupling_loss_db`)
    sea_gain_db : sea gain G_S [dB]; 0 for land terminals

    References
    ----------
    ITU-R P.1147-5 §2 (constants recalled from memory: :data:`ITU_CONSTANTS`); docs/methods.md §4.
    """
    _check_range(dist_km, ITU_RANGE_KM, "ITU-R P.1147")
    check_finite("freq_khz", freq_khz, *ITU_FREQ_RANGE_KHZ)
    if percent not in (10, 50):
        raise ValueError(f"percent must be 10 or 50 (got {percent!r})")
    if region not in (1, 2, 3):
        raise ValueError(f"itu_region must be 1, 2 or 3 (got {region!r})")
    if solar not in SOLAR_B:
        raise ValueError(f"solar must be one of {', '.join(SOLAR_B)} (got {solar!r})")
    check_finite("sunspot", sunspot, 0.0, 400.0)
    p = slant_km(dist_km)
    phi_raw = np.asarray(phi_deg, dtype=float)
    phi = np.clip(phi_raw, -_c("phi_cap_deg"), _c("phi_cap_deg"))
    k = _c("k0") + _c("k1") * float(freq_khz) ** 0.4 * np.tan(np.radians(phi + _c("phi_offset_deg"))) ** 2
    k_r = k + _c(SOLAR_B[solar]) * sunspot / 100.0
    a_const = _c("A_region_2") if region == 2 else _c("A_region_1_3")
    e = sea_gain_db - lp_db + a_const - 20 * np.log10(p) - k_r * p / 1000.0  # Eq. (1), V = 0
    return e + (ten_percent_excess_db(phi_raw) if percent == 10 else 0.0)


def _dip_deg(lat_deg, lon_deg):
    """Magnetic dip [deg] of the centred dipole: tan I = 2 tan Φ."""
    return np.degrees(np.arctan(2 * np.tan(np.radians(geomagnetic_lat_deg(lat_deg, lon_deg)))))


def coupling_loss_db(lat_deg, lon_deg, azimuth_deg):
    """ITU-R P.1147 polarisation coupling loss L_p [dB] at one terminal.

    L_p = 180·(36 + θ² + I²)^(−1/2) − 2 for |I| ≤ 45°, else 0; θ the path azimuth from the
    magnetic east–west direction [deg], I the magnetic dip of a centred dipole [deg].
    """
    dip = _dip_deg(lat_deg, lon_deg)
    _, az_pole, _ = inverse(lat_deg, lon_deg, POLE_LAT_DEG, POLE_LON_DEG)  # magnetic north
    rel = np.mod(np.asarray(azimuth_deg, dtype=float) - az_pole, 180.0)
    theta = np.abs(90.0 - rel)  # 0 for propagation along magnetic east–west
    lp = _c("lp_numerator_db") / np.sqrt(_c("lp_constant") + theta**2 + dip**2) - _c("lp_offset_db")
    return np.where(np.abs(dip) <= 45.0, np.maximum(lp, 0.0), 0.0)


@dataclass(frozen=True)
class SkyPath:
    """Geometry of sky-wave paths (arrays broadcast over the receive points)."""

    distance_km: np.ndarray
    azimuth_deg: np.ndarray  # from transmitter toward receiver [deg true]
    back_azimuth_deg: np.ndarray
    mid_lat: np.ndarray
    mid_lon: np.ndarray
    geomagnetic_lat_deg: np.ndarray
    slant_km: np.ndarray
    hops: np.ndarray
    departure_deg: np.ndarray


#: 47 CFR 73.190(b) Eq. 4: kilometres per degree of great-circle arc (docs/methods.md §4.1).
CFR_KM_PER_DEG = 111.18


def cfr_geometry(tx_lat, tx_lon, rx_lat, rx_lon):
    """Path distance, azimuths and midpoint on the sphere of 47 CFR 73.190(b).

    d° = arccos[sin a_T sin a_R + cos a_T cos a_R cos(b_R − b_T)] (Eq. 5), d = 111.18·d° km
    (Eq. 4), and the midpoint of the short great-circle arc (what Eqs. 6–7 give), so that a
    hand computation from the published text reproduces the tool. Azimuths are the great-circle
    initial bearings [deg true]. Broadcasts over the points.
    """
    at, bt, ar, br = (np.radians(np.asarray(v, dtype=float)) for v in (tx_lat, tx_lon, rx_lat, rx_lon))
    shape = np.broadcast_shapes(at.shape, bt.shape, ar.shape, br.shape)
    # sines and cosines of each end's latitude once per end point (the pair arrays are the
    # broadcast of a column of transmitters and a row of points); the longitude difference is
    # the only term computed per pair
    sat, cat, sar, car = np.sin(at), np.cos(at), np.sin(ar), np.cos(ar)
    db = np.broadcast_to(br - bt, shape)
    cdb, sdb = np.cos(db), np.sin(db)
    cos_d = sat * sar + cat * car * cdb
    d_deg = np.degrees(np.arccos(np.clip(cos_d, -1.0, 1.0)))  # Eq. (5)
    dist = CFR_KM_PER_DEG * d_deg  # Eq. (4)
    # midpoint: the normalised sum of the two unit vectors (the arc's middle)
    vm = np.stack(np.broadcast_arrays(cat * np.cos(bt) + car * np.cos(br),
                                      cat * np.sin(bt) + car * np.sin(br), sat + sar))
    norm = np.linalg.norm(vm, axis=0)
    vm = vm / np.where(norm > 0, norm, 1.0)
    mlat = np.degrees(np.arcsin(np.clip(vm[2], -1.0, 1.0)))
    mlon = np.degrees(np.arctan2(vm[1], vm[0]))
    # initial bearings at either end: sin(bt − br) = −sin(br − bt), cos is even
    fwd = np.mod(np.degrees(np.arctan2(sdb * car, cat * sar - sat * car * cdb)), 360.0)
    back = np.mod(np.degrees(np.arctan2(-sdb * cat, car * sat - sar * cat * cdb)), 360.0)
    return dist, np.broadcast_to(fwd, shape), np.broadcast_to(back, shape), mlat, mlon


def cfr_midpoint_literal(tx_lat, tx_lon, rx_lat, rx_lon):
    """The path midpoint by 47 CFR 73.190(b) Eqs. 6–7 taken literally (for comparison only).

    a_M = 90° − arccos[sin a_T cos(d°/2) + cos a_T sin(d°/2) cos α_T] and
    b_M = b_T − k·arccos[(cos(d°/2) − sin a_T sin a_M)/(cos a_T cos a_M)], α_T the path azimuth
    at the transmitter, k = −1 when b_R > b_T and 1 otherwise (Note 3, read). The form of Eqs. 6–7
    is from memory (they are images in every stored copy). Note 3 decides the side by comparing
    longitudes, so on a path across the antimeridian (b_R < b_T while the path runs east) the
    literal b_M lands on the wrong side of the transmitter; elsewhere it equals the arc's middle
    that :func:`cfr_geometry` uses. The tool uses the arc's middle everywhere, because the rule
    defines a_M and b_M as the midpoint of the great-circle path (73.190(b), read) and says that
    computed values control (73.190(e)); docs/methods.md §4.1.
    """
    at, bt, ar, br = (np.radians(np.asarray(v, dtype=float)) for v in (tx_lat, tx_lon, rx_lat, rx_lon))
    at, bt, ar, br = np.broadcast_arrays(at, bt, ar, br)
    cos_d = np.sin(at) * np.sin(ar) + np.cos(at) * np.cos(ar) * np.cos(br - bt)
    half = 0.5 * np.arccos(np.clip(cos_d, -1.0, 1.0))
    alpha = np.radians(cfr_geometry(tx_lat, tx_lon, rx_lat, rx_lon)[1])
    am = 0.5 * np.pi - np.arccos(np.clip(np.sin(at) * np.cos(half)
                                         + np.cos(at) * np.sin(half) * np.cos(alpha), -1.0, 1.0))
    k = np.where(br > bt, -1.0, 1.0)  # Note 3
    den = np.cos(at) * np.cos(am)
    ratio = (np.cos(half) - np.sin(at) * np.sin(am)) / np.where(den != 0, den, 1.0)
    bm = bt - k * np.arccos(np.clip(ratio, -1.0, 1.0))
    lon = np.mod(np.degrees(bm) + 180.0, 360.0) - 180.0
    return np.degrees(am), lon


def sky_path(tx_lat, tx_lon, rx_lat, rx_lon, hops=None, height_km: float = 100.0,
             geometry: str = "geodesic") -> SkyPath:
    """Path geometry: distance, azimuths, midpoint, Φ_M, slant distance and departure angle.

    ``geometry="cfr"`` uses the sphere of 47 CFR 73.190(b) (:func:`cfr_geometry`);
    ``"geodesic"`` uses WGS84 geodesics (pyproj). Without ``hops`` the path is one hop and the
    departure angle is the one-hop angle, 0° beyond the distance where the ray grazes the
    ground (docs/methods.md §4.3): it never jumps to a multi-hop angle.
    """
    check_finite("height_km", height_km, 50.0, 500.0)
    if geometry == "cfr":
        d, az12, az21, mlat, mlon = cfr_geometry(tx_lat, tx_lon, rx_lat, rx_lon)
    elif geometry == "geodesic":
        d, az12, az21 = inverse(tx_lat, tx_lon, rx_lat, rx_lon)
        mlat, mlon = midpoint(tx_lat, tx_lon, rx_lat, rx_lon)
    else:
        raise ValueError(f"geometry must be 'cfr' or 'geodesic' (got {geometry!r})")
    if hops is None:
        n = np.ones(np.shape(d), dtype=int)
        dep = np.maximum(departure_deg(d, 1, height_km), 0.0)
    else:
        n = np.broadcast_to(np.asarray(hops, int), np.shape(d))
        if np.any(n < 1):
            raise ValueError(f"hops must be >= 1 (got {hops!r})")
        dep = departure_deg(d, n, height_km)
    return SkyPath(d, az12, az21, mlat, mlon, geomagnetic_lat_deg(mlat, mlon), slant_km(d),
                   np.asarray(n), dep)


def sky_field_dbu(
    path: SkyPath,
    e_dep_mv_m,
    method: str = "cfr",
    percent: int = 10,
    freq_khz: float | None = None,
    tx=None,
    rx=None,
    **itu,
):
    """Sky-wave field [dBµV/m] for a radiation ``e_dep_mv_m`` (mV/m at 1 km toward the receiver
    at the departure angle).

    ``method="cfr"``: 47 CFR 73.190 scaled by E/100 mV/m. ``method="itu"``: ITU-R P.1147 with
    V = 20·log10(E/300 mV/m); the coupling loss L_p is computed at both terminals when ``tx``
    and ``rx`` (lat, lon) are given.
    """
    e = np.asarray(e_dep_mv_m, dtype=float)
    if method == "cfr":
        with np.errstate(divide="ignore"):
            return cfr_field_dbu(path.distance_km, path.geomagnetic_lat_deg, percent) + 20 * np.log10(e / 100.0)
    if method == "itu":
        if freq_khz is None:
            raise ValueError("the ITU-R P.1147 method needs freq_khz")
        lp = 0.0
        if tx is not None and rx is not None:
            lp = coupling_loss_db(tx[0], tx[1], path.azimuth_deg) + coupling_loss_db(
                rx[0], rx[1], path.back_azimuth_deg)
        with np.errstate(divide="ignore"):
            v = 20 * np.log10(e / 300.0)
        return v + itu_field_dbu(path.distance_km, freq_khz, path.geomagnetic_lat_deg, percent,
                                 lp_db=lp, **itu)
    raise ValueError(f"sky-wave method must be 'cfr' or 'itu' (got {method!r})")
