"""Ground conductivity (and the unattenuated field at 1 km) from field-strength measurements.

Along each radial the readings are fitted, in dB, by the smooth-earth ground-wave curve of an
unknown conductivity σ and an unknown unattenuated field at 1 km E0 (permittivity fixed).
Where the radial crosses zones of known ground, only the ground that is unknown — the zones
marked ``"fit": true``, or the default ground when none is marked — takes the fitted σ, and
Millington's method (docs/methods.md §2) joins the sections.

The fit never evaluates fresh residue series: a :class:`CurveFamily` holds the attenuation
tables of one frequency, permittivity and earth radius for conductivities on a logarithmic grid
(12 per decade, 0.01 mS/m to 10 S/m) and interpolates between them with cubic Lagrange weights
in log σ.

Uncertainty: E0 enters linearly (in dB), so for every σ its best value is known in closed
form; the misfit profile over σ then gives a 95 % interval for σ where it rises by less than
F(0.95; 1, n − 2)·s² (s² the residual variance at the optimum), and for E0 the range of its
best values over that interval together with its own standard error. Readings nearer than
one wavelength, 5 × the height of a single tower, or 10 × the spacing of an array's elements
are near field and left out (47 CFR 73.186(a)(1), read); readings that a soft-L1 fit
down-weights below one half are listed and left out of the interval. A radial is flagged as not
constraining σ when its interval spans more than a decade or reaches the grid's edge, when it
has fewer than four readings, or when its farthest reading lies at a numerical distance below 1
on the best ground the interval allows (there the field still follows the inverse-distance law
whatever σ is: common practice, no published source). The interval's ends are where the misfit
profile crosses the threshold, found by root finding between grid points.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

import numpy as np

from .ground import Ground, Section
from .groundwave import C0, model, mv_m_to_dbu
from .mixedpath import millington_terms

__all__ = ["CurveFamily", "curve_family", "Reading", "RadialFit", "fit_radial", "fit_all",
           "SIGMA_GRID_MS_M", "near_field_km", "radial_paths", "unknown_grounds",
           "CombinedFit", "fit_combined"]

#: Conductivities of the family's tables [mS/m]: 12 per decade from 0.01 mS/m to 10 S/m.
SIGMA_GRID_MS_M = 10.0 ** np.arange(-2.0, 4.0 + 1e-9, 1.0 / 12.0)


class CurveFamily:
    """Ground-wave attenuation tables for many conductivities (one frequency, εr and K)."""

    def __init__(self, freq_khz: float, eps_r: float, earth_k: float = 4 / 3):
        self.freq_khz, self.eps_r, self.earth_k = float(freq_khz), float(eps_r), float(earth_k)
        self.log_sigma = np.log10(SIGMA_GRID_MS_M)
        rows = [model(freq_khz, Ground(float(s), eps_r), earth_k).table for s in SIGMA_GRID_MS_M]
        self.log_d = rows[0][0]
        self.att_db = np.vstack([r[1] for r in rows])  # (n_sigma, n_d)

    def _weights(self, log_sigma: float):
        """Indices and cubic Lagrange weights of the four rows around ``log_sigma``."""
        x = float(np.clip(log_sigma, self.log_sigma[0], self.log_sigma[-1]))
        h = self.log_sigma[1] - self.log_sigma[0]
        i = int(np.clip(np.floor((x - self.log_sigma[0]) / h) - 1, 0, self.log_sigma.size - 4))
        xs = self.log_sigma[i:i + 4]
        w = np.array([np.prod([(x - xs[m]) / (xs[k] - xs[m]) for m in range(4) if m != k])
                      for k in range(4)])
        return i, w

    def gain_db(self, sigma_ms_m: float, dist_km):
        """Attenuation 20·log10|W| [dB] at ``dist_km`` for conductivity ``sigma_ms_m``."""
        d = np.asarray(dist_km, dtype=float)
        i, w = self._weights(math.log10(sigma_ms_m))
        with np.errstate(divide="ignore"):
            ld = np.log10(np.maximum(d, 1e-12))
        rows = [np.interp(ld, self.log_d, self.att_db[i + k]) for k in range(4)]
        return np.where(d <= 0, 0.0, np.tensordot(w, np.array(rows), axes=1))

    def gain_grid(self, dist_km):
        """Attenuation [dB] at ``dist_km`` for every grid conductivity: (n_sigma, n_d)."""
        ld = np.log10(np.asarray(dist_km, dtype=float))
        return np.array([np.interp(ld, self.log_d, row) for row in self.att_db])


@functools.lru_cache(maxsize=16)
def curve_family(freq_khz: float, eps_r: float, earth_k: float = 4 / 3) -> CurveFamily:
    """A cached :class:`CurveFamily`."""
    return CurveFamily(freq_khz, eps_r, earth_k)


@dataclass(frozen=True)
class Reading:
    """One measured field on a radial."""

    dist_km: float
    field_dbu: float
    lat: float
    lon: float
    bearing_deg: float
    note: str = ""
    line: int = 0  # where it stands in the measurements file


#: a radial whose farthest reading lies below this numerical distance on the best ground the
#: readings allow does not constrain σ (see :func:`fit_radial`)
NEAR_LAW_P = 1.0


def near_field_km(freq_khz: float, antenna) -> float:
    """Distance [km] inside which readings are near field (47 CFR 73.186(a)(1), read):
    measurements begin no nearer than one wavelength, nor than 5 × the vertical height of a
    single tower, nor than 10 × the spacing between the elements of a directional array."""
    lam_m = C0 / (freq_khz * 1e3)
    if len(antenna.elements) == 1:
        return max(lam_m, 5 * antenna.elements[0].tower.height_deg / 360.0 * lam_m) / 1e3
    pos = np.asarray(antenna.array.positions_rad)  # element positions [rad of phase]: east + j·north
    spacing_m = float(np.max(np.abs(pos[:, None] - pos[None, :]))) / (2 * np.pi) * lam_m
    return max(lam_m, 10 * spacing_m) / 1e3


@dataclass
class RadialFit:
    """The result of one radial's fit."""

    radial: str
    bearing_deg: float
    sigma_ms_m: float
    sigma_low_ms_m: float
    sigma_high_ms_m: float
    eps_r: float
    e0_mv_m: float  # unattenuated field at 1 km
    e0_low_mv_m: float
    e0_high_mv_m: float
    rms_db: float
    used: list = field(default_factory=list)  # Readings in the fit
    near_field: list = field(default_factory=list)  # Readings left out (near field)
    outliers: list = field(default_factory=list)  # Readings the robust fit down-weights
    residual_db: dict = field(default_factory=dict)  # line → residual [dB] for every reading
    constrained: bool = True
    warnings: list = field(default_factory=list)
    profile: tuple = ()  # (sigma grid [mS/m], misfit [dB²]) for plots

    def curve_dbu(self, dist_km, sigma_ms_m: float | None = None, family=None, paths=None):
        """The fitted curve [dBµV/m] (or the curve at another σ with the same E0)."""
        s = self.sigma_ms_m if sigma_ms_m is None else sigma_ms_m
        return float(mv_m_to_dbu(self.e0_mv_m)) + _path_db(family, paths, s, dist_km)


def _path_db(family: CurveFamily, paths, sigma_ms_m, dist_km):
    """Field [dB re E0 at 1 km] at each distance along its path, with the unknown ground at
    ``sigma_ms_m`` (one σ, or one per unknown ground when a sequence). ``paths`` is None
    (homogeneous unknown ground) or one list of (Section, unknown number or None) per
    distance; mixed paths follow Millington through :func:`~.mixedpath.millington_terms`."""
    d = np.atleast_1d(np.asarray(dist_km, dtype=float))
    if paths is None:
        return -20 * np.log10(d) + family.gain_db(sigma_ms_m, d)
    path, sec, x, w = millington_terms([[s for s, _ in p] for p in paths], d)
    # one group per unknown ground (its σ from the family) and per known ground (its table)
    groups: dict = {}  # label -> (number, section, unknown number or None)
    number = np.array([groups.setdefault(("?", v) if v is not None else ("=", s.ground.key),
                                         (len(groups), s, v))[0]
                       for p in paths for s, v in p])[sec]
    out = -20 * np.log10(d)
    for num, s, v in groups.values():
        sel = number == num
        if v is not None:
            g = family.gain_db(sigma_ms_m if np.ndim(sigma_ms_m) == 0 else sigma_ms_m[v], x[sel])
        else:
            g = model(family.freq_khz, s.ground, family.earth_k).gain_db(x[sel])
        out += np.bincount(path[sel], weights=w[sel] * g, minlength=out.size)
    return out


def fit_radial(name: str, readings: list, family: CurveFamily, paths=None,
               near_km: float = 0.0, robust_scale_db: float = 2.0) -> RadialFit:
    """Fit σ and E0 to one radial's readings (see the module's notes)."""
    from scipy import optimize, stats

    near = [r for r in readings if r.dist_km < near_km]
    far_idx = [i for i, r in enumerate(readings) if r.dist_km >= near_km]
    far = [readings[i] for i in far_idx]
    far_paths = None if paths is None else [paths[i] for i in far_idx]
    warnings = []
    if len(far) < 2:
        raise ValueError(f"radial {name!r}: {len(far)} reading(s) beyond the near field "
                         f"({near_km:.2f} km); at least 2 are needed")
    d = np.array([r.dist_km for r in far])
    y = np.array([r.field_dbu for r in far])
    # the field of every grid conductivity at every reading [dB re E0]
    if far_paths is None:
        grid = -20 * np.log10(d)[None, :] + family.gain_grid(d)
    else:
        grid = np.array([_path_db(family, far_paths, s, d) for s in SIGMA_GRID_MS_M])

    def profile(keep):
        res = y[keep][None, :] - grid[:, keep]
        e0 = res.mean(axis=1)  # best E0 [dB] for each σ, in closed form
        return ((res - e0[:, None]) ** 2).sum(axis=1), e0

    def curve(log_s, dd, pp):
        return _path_db(family, pp, 10 ** log_s, dd)

    # robust fit (soft L1) from the best grid point
    chi, e0s = profile(np.ones(d.size, dtype=bool))
    k0 = int(np.argmin(chi))
    x0 = np.array([e0s[k0], family.log_sigma[k0]])
    lo_s, hi_s = family.log_sigma[0], family.log_sigma[-1]
    fit = optimize.least_squares(lambda p: y - p[0] - curve(p[1], d, far_paths), x0,
                                 bounds=([-np.inf, lo_s], [np.inf, hi_s]), loss="soft_l1",
                                 f_scale=robust_scale_db)
    r = y - fit.x[0] - curve(fit.x[1], d, far_paths)
    weight = 1.0 / np.sqrt(1.0 + (r / robust_scale_db) ** 2)
    keep = weight >= 0.5
    outliers = [far[i] for i in np.flatnonzero(~keep)]
    n = int(keep.sum())
    if n < 2:
        keep[:] = True
        n = keep.size
        outliers = []
    # plain least squares on the kept readings: optimum, then the profile for the interval
    chi, e0s = profile(keep)
    k0 = int(np.argmin(chi))
    ls = optimize.least_squares(
        lambda p: y[keep] - p[0] - curve(p[1], d[keep], None if far_paths is None
                                         else [far_paths[i] for i in np.flatnonzero(keep)]),
        np.array([e0s[k0], family.log_sigma[k0]]), bounds=([-np.inf, lo_s], [np.inf, hi_s]))
    e0_db, log_s = ls.x
    kept_paths = None if far_paths is None else [far_paths[i] for i in np.flatnonzero(keep)]
    res_best = y[keep] - e0_db - curve(log_s, d[keep], kept_paths)
    ss_min = float((res_best ** 2).sum())
    dof = max(n - 2, 1)
    s2 = ss_min / dof
    thresh = stats.f.ppf(0.95, 1, dof) * s2 if n > 2 else np.inf
    # the misfit on a fine σ grid (cubic interpolation of the family) for the interval
    fine = np.linspace(lo_s, hi_s, 721 if far_paths is None else 145)

    def misfit(ls_k):  # (sum of squares, best E0 [dB]) at one log σ
        res = y[keep] - curve(ls_k, d[keep], kept_paths)
        return float(((res - res.mean()) ** 2).sum()), float(res.mean())

    ss, e0_fine = np.array([misfit(v) for v in fine]).T
    inside = ss - ss_min <= thresh
    idx = np.flatnonzero(inside)
    lo_i, hi_i = (int(idx[0]), int(idx[-1])) if idx.size else (0, fine.size - 1)
    # each end where the profile crosses the threshold, found by root finding between the last
    # grid point inside and the first outside (a grid point alone would make the interval up
    # to one step too narrow)
    ends, e0_ends = [fine[lo_i], fine[hi_i]], []
    if np.isfinite(thresh) and idx.size:
        for j, (a, b) in enumerate(((lo_i - 1, lo_i), (hi_i, hi_i + 1))):
            if 0 <= a and b < fine.size:
                ends[j] = optimize.brentq(lambda v: misfit(v)[0] - ss_min - thresh,
                                          fine[a], fine[b], xtol=1e-6)
                e0_ends.append(misfit(ends[j])[1])
    sig_lo, sig_hi = 10 ** ends[0], 10 ** ends[1]
    # E0: the spread of its best values over the σ interval, widened by its own 95 % error
    t = stats.t.ppf(0.975, dof) if n > 2 else np.inf
    se = math.sqrt(s2 / n) if n > 0 else np.inf
    e0_band = np.concatenate([e0_fine[lo_i:hi_i + 1], e0_ends])
    e0_lo = float(min(e0_band.min(), e0_db) - t * se)
    e0_hi = float(max(e0_band.max(), e0_db) + t * se)
    constrained = True
    from .groundwave import numerical_distance

    # numerical distance of the farthest reading on the best ground the readings allow (the
    # interval's upper σ: the smallest p); below p = 1 the flat-earth attenuation is under
    # 3.7 dB there (Sommerfeld–Norton F(p), b = 0), a few readings' scatter, and E0 absorbs
    # the rest, so the readings cannot tell σ: common practice, no published source
    p_far = float(abs(numerical_distance(family.freq_khz, Ground(float(sig_hi), family.eps_r),
                                         d[keep].max())))
    if p_far < NEAR_LAW_P:
        constrained = False
        warnings.append(f"the farthest reading ({d[keep].max():.2f} km) has a numerical distance "
                        f"of only {p_far:.2f} on the best ground the readings allow: the field "
                        "has barely left the inverse-distance law there, so σ is not "
                        "constrained (take readings farther out)")
    if n < 4:
        constrained = False
        warnings.append(f"only {n} readings beyond the near field: σ is not constrained")
    if lo_i == 0 or hi_i == fine.size - 1:
        constrained = False
        warnings.append("the 95 % interval of σ reaches the end of the searched range "
                        f"({SIGMA_GRID_MS_M[0]:g}–{SIGMA_GRID_MS_M[-1]:g} mS/m): the readings do "
                        "not constrain σ")
    elif sig_hi / sig_lo > 10.0:
        constrained = False
        warnings.append(f"the 95 % interval of σ spans {sig_lo:.3g}–{sig_hi:.3g} mS/m, more "
                        "than a decade: the readings hardly constrain σ (readings farther out "
                        "would)")
    all_res = {}
    for rd, rr in zip(far, y - e0_db - curve(log_s, d, far_paths)):
        all_res[rd.line] = float(rr)
    used = [far[i] for i in np.flatnonzero(keep)]
    bearing = float(np.median([rd.bearing_deg for rd in readings]))
    to_mv = lambda db: float(10 ** (db / 20) / 1e3)  # noqa: E731
    return RadialFit(name, bearing, float(10 ** log_s), float(sig_lo), float(sig_hi),
                     family.eps_r, to_mv(e0_db), to_mv(e0_lo), to_mv(e0_hi),
                     float(math.sqrt(ss_min / n)), used, near, outliers, all_res, constrained,
                     warnings, (10 ** fine, ss))


def radial_paths(spec, readings, unknown: dict):
    """Per reading: its ground sections from the site, each with the index of its unknown σ
    (``unknown`` maps a ground's key to an index) or None when known. None when every section
    of every reading is the one unknown ground (a homogeneous radial)."""
    st = spec.station
    b = np.array([r.bearing_deg for r in readings])
    dmax = max(r.dist_km for r in readings) + 1.0
    secs = spec.ground.radial_sections(st.lat, st.lon, b, dmax)
    marked = [[(s, unknown.get(s.ground.key)) for s in sec] for sec in secs]
    if all(v is not None for m in marked for _, v in m) and len(set(unknown.values())) == 1:
        return None
    return marked


def unknown_grounds(spec) -> dict:
    """The grounds to fit: zones marked ``"fit": true`` (each its own σ), or the default ground
    when none is marked. Maps a ground's key to (index, name)."""
    marked = [z for z in spec.ground.zones if getattr(z, "fit", False)]
    if not marked:
        return {spec.ground.default.key: (0, "default ground")}
    out = {}
    for z in marked:
        if z.ground.key not in out:
            out[z.ground.key] = (len(out), z.name)
    return out


def fit_all(spec, groups: dict, eps_r: float, near_km: float) -> list[RadialFit]:
    """Fit every radial on its own: ``groups`` maps a radial's name to its readings. On each
    radial the unknown grounds share one σ."""
    family = curve_family(spec.station.freq_khz, eps_r, spec.earth_k)
    unknown = {k: 0 for k in unknown_grounds(spec)}
    return [fit_radial(name, readings, family, radial_paths(spec, readings, unknown), near_km)
            for name, readings in groups.items()]


@dataclass
class CombinedFit:
    """One σ per unknown ground across all radials, and one scale of the antenna's pattern."""

    sigma_ms_m: dict  # name → σ
    sigma_low_ms_m: dict
    sigma_high_ms_m: dict
    e1km_rms_mv_m: float  # the station's RMS field at 1 km implied by the common scale
    rms_db: float
    readings: int


def fit_combined(spec, groups: dict, eps_r: float, near_km: float) -> CombinedFit:
    """Every radial together: the unknown grounds' σ (one each) and one scale of the antenna's
    horizontal pattern (the readings' E0 follow the pattern's shape), by least squares in dB;
    95 % intervals from the Jacobian (t-distribution)."""
    from scipy import optimize, stats

    st = spec.station
    family = curve_family(st.freq_khz, eps_r, spec.earth_k)
    unknown = unknown_grounds(spec)
    index = {k: v[0] for k, v in unknown.items()}
    names = [v[1] for v in sorted(unknown.values())]
    reads = [r for rs in groups.values() for r in rs if r.dist_km >= near_km]
    if len(reads) < len(names) + 2:
        raise ValueError(f"{len(reads)} readings beyond the near field: too few for "
                         f"{len(names) + 1} unknowns")
    paths = radial_paths(spec, reads, index)
    if paths is None:
        paths = [[(Section(0.0, r.dist_km + 1.0, spec.ground.default), 0)] for r in reads]
    d = np.array([r.dist_km for r in reads])
    y = np.array([r.field_dbu for r in reads])
    pattern = mv_m_to_dbu(st.antenna.field_mv_m(np.array([r.bearing_deg for r in reads]), 0.0,
                                                st.power_day_kw))

    def model_db(p):
        sig = 10 ** np.asarray(p[1:])
        return p[0] + pattern + _path_db(family, paths, sig, d)

    lo, hi = family.log_sigma[0], family.log_sigma[-1]
    x0 = np.concatenate([[0.0], np.full(len(names), 0.5)])
    fit = optimize.least_squares(lambda p: y - model_db(p), x0, loss="soft_l1", f_scale=2.0,
                                 bounds=([-60.0] + [lo] * len(names), [60.0] + [hi] * len(names)))
    res = fit.fun
    dof = max(y.size - x0.size, 1)
    s2 = float(res @ res) / dof
    try:
        cov = np.linalg.inv(fit.jac.T @ fit.jac) * s2
        se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    except np.linalg.LinAlgError:
        se = np.full(x0.size, np.inf)
    t = stats.t.ppf(0.975, dof)
    rms0 = st.antenna.horizontal_summary(st.power_day_kw)["rms_mv_m"]
    return CombinedFit(
        {n: float(10 ** fit.x[1 + i]) for i, n in enumerate(names)},
        {n: float(10 ** (fit.x[1 + i] - t * se[1 + i])) for i, n in enumerate(names)},
        {n: float(10 ** (fit.x[1 + i] + t * se[1 + i])) for i, n in enumerate(names)},
        float(rms0 * 10 ** (fit.x[0] / 20)), float(math.sqrt(np.mean(res ** 2))), int(y.size))


# --- outputs ----------------------------------------------------------------------------------

def fit_json(fits, combined: CombinedFit | None, spec, eps_r: float, near_km: float) -> dict:
    def reading(r):
        return {"line": r.line, "dist_km": round(r.dist_km, 4), "field_dbu": round(r.field_dbu, 2),
                "note": r.note}

    ends = [v for f in fits for v in (f.sigma_low_ms_m, f.sigma_high_ms_m, f.e0_low_mv_m,
                                       f.e0_high_mv_m)]
    if combined is not None:
        ends += list(combined.sigma_low_ms_m.values()) + list(combined.sigma_high_ms_m.values())
    unbounded = not all(math.isfinite(v) for v in ends)
    return {
        "study_file": spec.path, "station": spec.station.name,
        "freq_khz": spec.station.freq_khz, "eps_r": eps_r, "near_field_km": round(near_km, 3),
        "notes": (["an interval end written as null is one the readings do not bound (too few "
                   "readings, or a flat misfit): that side of the interval is open"]
                  if unbounded else []),
        "method": "least squares in dB over the smooth-earth ground-wave curve (Millington "
                  "where the radial crosses known zones); soft-L1 to find outliers; 95 % "
                  "intervals from the misfit profile (F test), docs/methods.md §7.2",
        "radials": [{
            "radial": f.radial, "bearing_deg": round(f.bearing_deg, 2),
            "sigma_ms_m": f.sigma_ms_m, "sigma_95_ms_m": [f.sigma_low_ms_m, f.sigma_high_ms_m],
            "eps_r": f.eps_r, "e0_mv_m": f.e0_mv_m, "e0_95_mv_m": [f.e0_low_mv_m, f.e0_high_mv_m],
            "rms_residual_db": f.rms_db, "points_used": len(f.used),
            "near_field": [reading(r) for r in f.near_field],
            "outliers": [reading(r) for r in f.outliers],
            "constrained": f.constrained, "warnings": list(f.warnings)} for f in fits],
        "combined": None if combined is None else {
            "sigma_ms_m": combined.sigma_ms_m,
            "sigma_95_ms_m": {k: [combined.sigma_low_ms_m[k], combined.sigma_high_ms_m[k]]
                              for k in combined.sigma_ms_m},
            "e1km_rms_mv_m": combined.e1km_rms_mv_m, "rms_residual_db": combined.rms_db,
            "readings": combined.readings},
        "caution": "Planning estimate only; measurements for a filing follow the regulator's "
                   "procedures (e.g. 47 CFR 73.186) and a licensed engineer's review.",
    }


def fit_csv(fits) -> str:
    import io

    from .safefiles import csv_writer

    buf = io.StringIO()
    w = csv_writer(buf)
    w.writerow(["radial", "line", "dist_km", "measured_dbu", "fitted_dbu", "residual_db",
                "status", "note"])
    for f in fits:
        status = {id(r): "near field" for r in f.near_field}
        status.update({id(r): "outlier" for r in f.outliers})
        for r in sorted(f.used + f.outliers + f.near_field, key=lambda r: r.dist_km):
            res = f.residual_db.get(r.line)
            w.writerow([f.radial, r.line, f"{r.dist_km:.4f}", f"{r.field_dbu:.2f}",
                        "" if res is None else f"{r.field_dbu - res:.2f}",
                        "" if res is None else f"{res:.2f}", status.get(id(r), "used"), r.note])
    return buf.getvalue()
