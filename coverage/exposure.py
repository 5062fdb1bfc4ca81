"""RF exposure screening near the towers: electric and magnetic field strengths in the near field.

Each tower carries the current the antenna model assumes (docs/methods.md §3): sinusoidal,
I(u) = I_loop·sin(A + B − u) for u = k·z from 0 to A (A the height, B the top loading, in
radians), mirrored in perfectly conducting ground. Its loop current follows from the array's
field at 1 km: E_1km = (η0/2π)·I_loop·(cos B − cos(A + B)), so the near field and the far field
come from one current. The field at a point is the sum over the current of the fields of
Hertzian elements, all terms kept (Jordan & Balmain, Electromagnetic Waves and Radiating Systems,
§10 and §14 [from memory]), integrated by composite Gauss–Legendre; for a tower without top
loading Schelkunoff's closed form gives the same (tests/test_exposure.py). The towers' fields
add as phasors with their currents' phases. Values are RMS (the currents are RMS).

Reference levels: 47 CFR 1.1310 Table 1, ICNIRP 2020 (with ICNIRP 2010 below 10 MHz) and
ICNIRP 1998, each row with its source (:data:`REFERENCE_LEVELS`); a study picks a standard
(``[exposure] standard``) and both its populations are screened. A screening estimate only: contact and induced
currents, guy wires, fences and other metal are not assessed; local codes and a qualified person
decide.
"""

from __future__ import annotations

import math

import numpy as np

from .antenna import ETA0, FIELD_OHM, Array

__all__ = ["REFERENCE_LEVELS", "STANDARDS", "expand_standards", "screening", "reference_levels", "tower_currents", "tower_xy_m", "near_field",
           "schelkunoff_field", "fields_along_bearings", "screening_distances", "CAUTION"]

C0 = 299_792_458.0  # m/s
MU0 = 1.25663706212e-6  # vacuum permeability [H/m], CODATA 2018

CAUTION = ("Screening estimate only: fields are computed for the assumed tower currents over "
           "perfect ground; contact and induced currents, guy wires, fences and nearby metal "
           "are not assessed. Local codes and a qualified person decide where people may go; "
           "measure before relying on it.")

#: Reference levels [E V/m, H A/m] as functions of f [MHz], with their source and frequency
#: range [MHz], by standard and population. RMS values of the unperturbed field.
REFERENCE_LEVELS = {
    # 47 CFR 1.1310 Table 1: (A) occupational/controlled 0.3–3.0 MHz 614 V/m, 1.63 A/m;
    # 3.0–30 MHz 1842/f, 4.89/f (read in the stored rule).
    "fcc-occupational": (
        lambda f: (614.0, 1.63) if f < 3.0 else (1842.0 / f, 4.89 / f),
        "47 CFR 1.1310 Table 1 (A), occupational/controlled (read)", (0.3, 30.0)),
    # (B) general population/uncontrolled 0.3–1.34 MHz 614 V/m, 1.63 A/m; 1.34–30 MHz 824/f,
    # 2.19/f: the E values read as quoted from OET Bulletin 65 (614 V/m to 1.34 MHz, just
    # under 482 V/m at 1.71 MHz = 824/1.71); H from memory (the stored copies of the rule cut
    # the table before part B).
    "fcc-general": (
        lambda f: (614.0, 1.63) if f < 1.34 else (824.0 / f, 2.19 / f),
        "47 CFR 1.1310 Table 1 (B), general population/uncontrolled (E read as quoted from "
        "OET Bulletin 65; H from memory)", (0.3, 30.0)),
    # ICNIRP 2020 (Health Physics 118:483–524) for 0.1–30 MHz, combined with ICNIRP 2010
    # (Health Physics 99:818–836), whose nerve-stimulation levels also apply up to 10 MHz:
    # the lower of the two for each of E and H. 2020 whole-body (30-min) levels: public
    # 300/f^0.7 V/m, 2.2/f A/m; occupational 660/f^0.7, 4.9/f (from memory). 2010, 3 kHz–
    # 10 MHz: public 83 V/m, 27 µT; occupational 170 V/m, 100 µT (read, as reproduced in a
    # bioelectromagnetism handbook, Table 7.3); H = B/μ0.
    "icnirp2020-public": (
        lambda f: (min(300.0 / f ** 0.7, 83.0 if f <= 10.0 else math.inf),
                   min(2.2 / f, 0.27e-4 / MU0 if f <= 10.0 else math.inf)),
        "ICNIRP 2020 whole-body reference levels, general public (from memory), with the "
        "ICNIRP 2010 nerve-stimulation levels below 10 MHz (read): the lower of each",
        (0.1, 30.0)),
    "icnirp2020-occupational": (
        lambda f: (min(660.0 / f ** 0.7, 170.0 if f <= 10.0 else math.inf),
                   min(4.9 / f, 1e-4 / MU0 if f <= 10.0 else math.inf)),
        "ICNIRP 2020 whole-body reference levels, occupational (from memory), with the ICNIRP "
        "2010 nerve-stimulation levels below 10 MHz (read): the lower of each", (0.1, 30.0)),
    # ICNIRP 2020 local exposure (6-min) levels, 0.1–30 MHz: public 671/f^0.7 V/m, 4.9/f A/m;
    # occupational 1504/f^0.7, 10.8/f (read, as reproduced in the same handbook, Table 7.8).
    "icnirp2020-public-local": (
        lambda f: (671.0 / f ** 0.7, 4.9 / f),
        "ICNIRP 2020 local-exposure reference levels, general public (read)", (0.1, 30.0)),
    "icnirp2020-occupational-local": (
        lambda f: (1504.0 / f ** 0.7, 10.8 / f),
        "ICNIRP 2020 local-exposure reference levels, occupational (read)", (0.1, 30.0)),
    # ICNIRP 1998 (Health Physics 74:494–522), Tables 6 and 7 (from memory): public
    # 0.15–1 MHz 87 V/m, 0.73/f A/m; 1–10 MHz 87/f^0.5, 0.73/f; occupational 0.065–1 MHz
    # 610 V/m, 1.6/f A/m; 1–10 MHz 610/f, 1.6/f.
    "icnirp1998-public": (
        lambda f: (87.0 if f < 1.0 else 87.0 / f ** 0.5, 0.73 / f),
        "ICNIRP 1998 reference levels, general public (from memory)", (0.15, 10.0)),
    "icnirp1998-occupational": (
        lambda f: (610.0 if f < 1.0 else 610.0 / f, 1.6 / f),
        "ICNIRP 1998 reference levels, occupational (from memory)", (0.065, 10.0)),
    # ICNIRP 2010 alone (nerve stimulation, 3 kHz–10 MHz; read as above). Above 100 kHz the RF
    # (heating) levels apply as well: use icnirp2020-… for both.
    "icnirp2010-public": (lambda f: (83.0, 0.27e-4 / MU0), "ICNIRP 2010, general public, "
                          "3 kHz–10 MHz (nerve stimulation; RF heating levels not included)",
                          (0.003, 10.0)),
    "icnirp2010-occupational": (lambda f: (170.0, 1e-4 / MU0), "ICNIRP 2010, occupational, "
                                "3 kHz–10 MHz (nerve stimulation; RF heating levels not "
                                "included)", (0.003, 10.0)),
}

#: A study's ``[exposure] standard`` names one of these: both populations of one standard.
STANDARDS = {
    "fcc": ("fcc-general", "fcc-occupational"),
    "icnirp2020": ("icnirp2020-public", "icnirp2020-occupational"),
    "icnirp2020-local": ("icnirp2020-public-local", "icnirp2020-occupational-local"),
    "icnirp1998": ("icnirp1998-public", "icnirp1998-occupational"),
    "icnirp2010": ("icnirp2010-public", "icnirp2010-occupational"),
}


def expand_standards(names) -> list[str]:
    """Table rows for standard names: a standard of :data:`STANDARDS` gives both its
    populations, a row of :data:`REFERENCE_LEVELS` itself; ValueError naming both lists."""
    out = []
    for n in names:
        rows = STANDARDS.get(n, (n,) if n in REFERENCE_LEVELS else None)
        if rows is None:
            raise ValueError(f"standard must be one of {', '.join(STANDARDS)} (or a single "
                             f"row: {', '.join(REFERENCE_LEVELS)}) (got {n!r})")
        out += [r for r in rows if r not in out]
    return out


def reference_levels(standard: str, freq_khz: float) -> tuple[float, float, str]:
    """(E [V/m], H [A/m], source) of ``standard`` at ``freq_khz``; ValueError naming the
    standards when it is not in the table or the frequency is outside its range."""
    if standard not in REFERENCE_LEVELS:
        raise ValueError(f"standard must be one of {', '.join(REFERENCE_LEVELS)} "
                         f"(got {standard!r})")
    fn, source, (lo, hi) = REFERENCE_LEVELS[standard]
    f = freq_khz / 1e3
    if not lo <= f <= hi:
        raise ValueError(f"{standard} covers {lo:g}–{hi:g} MHz (got {f:g} MHz)")
    e, h = fn(f)
    return float(e), float(h), source


def tower_xy_m(array: Array, freq_khz: float) -> list[tuple[float, float]]:
    """Tower positions (east, north) [m] from the array's reference point."""
    lam = C0 / (freq_khz * 1e3)
    return [(p.real / (2 * np.pi) * lam, p.imag / (2 * np.pi) * lam) for p in array.positions_rad]


def tower_currents(array: Array, power_kw: float) -> np.ndarray:
    """Complex RMS loop currents [A] of the towers for ``power_kw`` into the array."""
    k = array.k_mv_m(power_kw)  # mV/m at 1 km per unit field ratio = V/m at 1 m
    out = []
    for e, feed in zip(array.elements, array._feeds):
        out.append(k * feed / (FIELD_OHM * e.tower.horizon_factor))
    return np.array(out)


def _element_fields(k, zs, weights, cur, rho, z):
    """Fields at (ρ, z) [m] of z-directed current elements at heights ``zs`` with currents
    ``cur``·``weights`` (Hertzian elements, all terms). Returns E_ρ, E_z, H_φ (complex)."""
    dz = z[..., None] - zs
    rho_ = rho[..., None]
    r = np.sqrt(rho_ ** 2 + dz ** 2)
    cos_t, sin_t = dz / r, rho_ / r
    kr = k * r
    ph = np.exp(-1j * kr)
    idz = cur * weights
    er = ETA0 * idz / (2 * np.pi * r ** 2) * cos_t * (1 + 1 / (1j * kr)) * ph
    et = 1j * ETA0 * k * idz / (4 * np.pi * r) * sin_t * (1 + 1 / (1j * kr) - 1 / kr ** 2) * ph
    hp = 1j * k * idz / (4 * np.pi * r) * sin_t * (1 + 1 / (1j * kr)) * ph
    e_rho = (er * sin_t + et * cos_t).sum(-1)
    e_z = (er * cos_t - et * sin_t).sum(-1)
    return e_rho, e_z, hp.sum(-1)


#: composite Gauss–Legendre along each tower and its image: panels × nodes (each panel is
#: a few metres long for medium-wave towers; 1 m from the tower the kernel is still resolved)
PANELS, NODES = 96, 12


def _tower_nodes(tower, freq_khz):
    k = 2 * math.pi * freq_khz * 1e3 / C0
    a, b = np.radians(tower.height_deg), np.radians(tower.top_loading_deg)
    h = a / k
    x, w = np.polynomial.legendre.leggauss(NODES)
    edges = np.linspace(-h, h, PANELS + 1)
    mid, half = (edges[1:] + edges[:-1]) / 2, (edges[1:] - edges[:-1]) / 2
    zs = (mid[:, None] + half[:, None] * x).ravel()
    ws = (half[:, None] * w).ravel()
    shape = np.sin(a + b - k * np.abs(zs))  # current relative to the loop current
    return k, zs, ws * shape


def near_field(array: Array, freq_khz: float, power_kw: float, x, y, z):
    """|E| [V/m] and |H| [A/m] (RMS) at points (x east, y north, z up) [m] from the array's
    reference point, for ``power_kw`` into the array. Broadcasts over the points."""
    x, y, z = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (x, y, z)))
    ex = np.zeros(x.shape, complex)
    ey, ez, hx, hy = (np.zeros(x.shape, complex) for _ in range(4))
    for e, (tx, ty), cur in zip(array.elements, tower_xy_m(array, freq_khz),
                                tower_currents(array, power_kw)):
        k, zs, ws = _tower_nodes(e.tower, freq_khz)
        dx, dy = x - tx, y - ty
        rho = np.maximum(np.hypot(dx, dy), 1e-6)
        e_rho, e_z, h_phi = _element_fields(k, zs, ws, cur, rho, z)
        ux, uy = dx / rho, dy / rho
        ex += e_rho * ux
        ey += e_rho * uy
        ez += e_z
        hx += -h_phi * uy
        hy += h_phi * ux
    e_abs = np.sqrt(np.abs(ex) ** 2 + np.abs(ey) ** 2 + np.abs(ez) ** 2)
    h_abs = np.sqrt(np.abs(hx) ** 2 + np.abs(hy) ** 2)
    return e_abs, h_abs


def schelkunoff_field(height_deg: float, freq_khz: float, i_loop: complex, rho, z):
    """Closed form for a tower without top loading (current I_m·sin k(h − |z|) with its
    image): |E_ρ|, |E_z|, |H_φ| at (ρ, z) [m] (Schelkunoff; Jordan & Balmain §14 [from
    memory]). With η0/4π in place of the rounded 30 Ω."""
    k = 2 * math.pi * freq_khz * 1e3 / C0
    h = math.radians(height_deg) / k
    rho, z = np.broadcast_arrays(np.asarray(rho, float), np.asarray(z, float))
    r1 = np.sqrt(rho ** 2 + (z - h) ** 2)
    r2 = np.sqrt(rho ** 2 + (z + h) ** 2)
    r0 = np.sqrt(rho ** 2 + z ** 2)
    e1, e2, e0 = (np.exp(-1j * k * r) for r in (r1, r2, r0))
    c = math.cos(k * h)
    g = ETA0 / (4 * math.pi)
    e_z = -1j * g * i_loop * (e1 / r1 + e2 / r2 - 2 * c * e0 / r0)
    e_rho = 1j * g * i_loop / rho * ((z - h) * e1 / r1 + (z + h) * e2 / r2 - 2 * z * c * e0 / r0)
    h_phi = 1j * i_loop / (4 * math.pi * rho) * (e1 + e2 - 2 * c * e0)
    return np.abs(e_rho), np.abs(e_z), np.abs(h_phi)


def fields_along_bearings(array: Array, freq_khz: float, power_kw: float, height_m: float,
                          bearings=None, max_m: float = 500.0, step_m: float = 1.0,
                          dist_m=None):
    """|E| and |H| on radials from the array's reference point at ``height_m`` above ground:
    (bearings [deg], distances [m], E (bearings × distances), H). ``dist_m`` (increasing)
    replaces the grid of ``step_m`` to ``max_m``."""
    if not height_m > 0:
        raise ValueError(f"height_m must be above 0 (got {height_m!r})")
    bearings = np.arange(0.0, 360.0, 5.0) if bearings is None else np.asarray(bearings, float)
    d = (np.arange(step_m, max_m + 1e-9, step_m) if dist_m is None
         else np.asarray(dist_m, dtype=float))
    bb, dd = np.meshgrid(np.radians(bearings), d, indexing="ij")
    e, h = near_field(array, freq_khz, power_kw, dd * np.sin(bb), dd * np.cos(bb),
                      np.full(dd.shape, float(height_m)))
    return bearings, d, e, h


def screening_distances(d, e, h, e_limit: float, h_limit: float) -> np.ndarray:
    """Per radial of :func:`fields_along_bearings`, the distance [m] beyond which both
    |E| ≤ e_limit and |H| ≤ h_limit: 0 when never above, the radial's end when still above
    there (look farther)."""
    over = (e > e_limit) | (h > h_limit)
    out = np.zeros(e.shape[0])
    for i in range(e.shape[0]):
        idx = np.flatnonzero(over[i])
        if idx.size:
            out[i] = d[-1] if idx[-1] == d.size - 1 else d[idx[-1] + 1]
    return out


#: Points this close to a tower [m] are not screened (the tower, its base and fence).
NOT_SCREENED_M = 1.0


def screening(spec, period: str = "day", height_m: float = 2.0, standards=None,
              max_m: float = 500.0, step_m: float = 1.0, grid: bool = True,
              profile: bool = True, far_step_m: float | None = None) -> dict:
    """The whole screening of a study (what exposure.json holds): for each reference-level row
    the distance per bearing (every 5°) beyond which E and H stay below it, from the array's
    reference point and from the nearest tower; the profile along the bearing of the largest
    field from 1 m to ``max_m``; a grid of |E| and |H| 5 m apart over ±100 m.

    ``standards``: names of :data:`STANDARDS` or rows (default: the study's ``[exposure]
    standard``, else "fcc"). With ``far_step_m`` the radials take ``step_m`` steps to 50 m and
    ``far_step_m`` steps beyond (the sheet and the window's layer). ValueError for a period without power, a height ≤ 0, a standard
    not in the table or a frequency outside its range.
    """
    st = spec.station
    if not (isinstance(height_m, (int, float)) and math.isfinite(height_m) and height_m > 0):
        raise ValueError(f"height_m must be above 0 m (got {height_m!r})")
    conf = getattr(spec, "exposure", None) or {}
    names = expand_standards(standards or conf.get("standard", ["fcc"]))
    levels = {n: reference_levels(n, st.freq_khz) for n in names}
    power = st.power_day_kw if period == "day" else st.power_night_kw
    if not power > 0:
        raise ValueError(f"the station has no {period} power")
    arr = st.facility(period).array  # the period's own towers (night array by night)
    if not arr.elements:
        raise ValueError("the antenna has no towers")
    towers = tower_xy_m(arr, st.freq_khz)
    result = {"caution": CAUTION, "station": st.name, "freq_khz": st.freq_khz,
              "period": period, "power_kw": power, "height_m": height_m,
              "towers_xy_m": [[round(x, 3), round(y, 3)] for x, y in towers],
              "method": "sinusoidal tower currents over perfect ground, fields of every current "
                        "element summed (docs/methods.md §9); points within 1 m of a tower are "
                        "not screened",
              "standards": {}}
    dist_m = None
    if far_step_m is not None:
        dist_m = np.concatenate([np.arange(step_m, 50.0, step_m),
                                 np.arange(50.0, max_m + 1e-9, far_step_m)])
    b, d, e, h = fields_along_bearings(arr, st.freq_khz, power, height_m, max_m=max_m,
                                       step_m=step_m, dist_m=dist_m)
    # points within 1 m of a tower are not screened (the tower and its base fence stand
    # there, and a thin-wire current model does not hold so close): a radial that passes
    # through another tower would otherwise meet the wire's singular near field
    bb, dd = np.meshgrid(np.radians(b), d, indexing="ij")
    px, py = dd * np.sin(bb), dd * np.cos(bb)
    close = np.zeros(e.shape, bool)
    for tx, ty in towers:
        close |= np.hypot(px - tx, py - ty) < NOT_SCREENED_M
    e, h = np.where(close, 0.0, e), np.where(close, 0.0, h)
    worst_b = float(b[int(np.argmax(e.max(axis=1)))])
    for name, (e_lim, h_lim, source) in levels.items():
        dist = screening_distances(d, e, h, e_lim, h_lim)
        rows = []
        for bb, dd in zip(b, dist):
            x, y = dd * np.sin(np.radians(bb)), dd * np.cos(np.radians(bb))
            near_m = min(float(np.hypot(x - tx, y - ty)) for tx, ty in towers)
            rows.append({"bearing_deg": float(bb), "from_reference_m": float(dd),
                         "from_nearest_tower_m": round(near_m, 2) if dd > 0 else 0.0})
        result["standards"][name] = {"e_limit_v_m": e_lim, "h_limit_a_m": h_lim,
                                     "source": source, "bearings": rows,
                                     "largest_distance_m": float(dist.max()),
                                     "beyond_screened_range": bool(dist.max() >= d[-1])}
    if profile:  # along the bearing of the largest field, 1 m to max_m
        dist = np.unique(np.round(np.geomspace(1.0, max_m, 120), 2))
        t = np.radians(worst_b)
        pe, ph = near_field(arr, st.freq_khz, power, dist * np.sin(t), dist * np.cos(t),
                            np.full(dist.size, height_m))
        result["profile"] = {"bearing_deg": worst_b, "points": [
            {"distance_m": float(a), "e_v_m": round(float(x), 4), "h_a_m": round(float(y), 6)}
            for a, x, y in zip(dist, pe, ph)]}
    if grid:  # |E| and |H| at the height, 5 m apart over ±100 m around the reference point
        g = np.arange(-100.0, 100.0 + 1e-9, 5.0)
        gx, gy = np.meshgrid(g, g)
        ge, gh = near_field(arr, st.freq_khz, power, gx, gy, np.full(gx.shape, height_m))
        close = np.zeros(gx.shape, bool)  # within 1 m of a tower: the tower and its base fence
        for tx, ty in towers:
            close |= np.hypot(gx - tx, gy - ty) < NOT_SCREENED_M
        result["grid"] = {"x_m": g.tolist(), "y_m": g.tolist(),
                          "note": "null within 1 m of a tower",
                          "e_v_m": [[None if c else round(float(v), 3) for v, c in zip(rv, rc)]
                                    for rv, rc in zip(ge, close)],
                          "h_a_m": [[None if c else round(float(v), 5) for v, c in zip(rv, rc)]
                                    for rv, rc in zip(gh, close)]}
    return result
