"""Ground wave over a smooth, homogeneous earth (vertical polarisation, terminals on the ground).

Two formulations of the same theory, joined at a crossover in the normalised distance x:

* flat earth, Sommerfeld–Norton attenuation function F(w) through the Faddeeva function,
  for short distances, with a curvature correction scaled from the residue series at the
  crossover;
* spherical earth, the residue series of Van der Pol–Bremmer / Fock / Wait, beyond it.

Everything that depends only on (frequency, ground, earth radius) — the surface impedance, the
roots of the residue series, the crossover correction — is computed once and cached in a
:class:`GroundWaveModel`.

References
----------
ITU-R P.368-9 (2007), "Ground-wave propagation curves for frequencies between 10 kHz and 30 MHz".
J. R. Wait, "Electromagnetic surface waves", Advances in Radio Research 1 (1964).
K. A. Norton, Proc. IRE 24 (1936), 25 (1937).
Methods reference of this project: ``docs/methods.md`` §0–1.
"""

from __future__ import annotations

from functools import lru_cache

import math

import numpy as np
from scipy import optimize, special
from scipy.integrate import solve_ivp

from .ground import Ground
from .validate import check_finite

__all__ = [
    "C0",
    "EARTH_RADIUS_KM",
    "E1KM_REF_MV_M",
    "FREQ_RANGE_KHZ",
    "GroundWaveModel",
    "model",
    "surface_impedance",
    "numerical_distance",
    "flat_earth_attenuation",
    "field_mv_m",
    "field_dbu",
    "distance_to_field_km",
    "mv_m_to_dbu",
    "dbu_to_mv_m",
]

C0 = 299_792_458.0  # speed of light [m/s]
EPS0 = 8.8541878128e-12  # vacuum permittivity [F/m]
EARTH_RADIUS_KM = 6371.0  # mean earth radius
#: the longest ground-wave path [km]: 0.45 of half the earth's circumference, short of the
#: antipode where the series' spherical-spreading factor diverges
MAX_DIST_KM = 0.45 * math.pi * EARTH_RADIUS_KM
E1KM_REF_MV_M = 300.0  # short monopole, 1 kW, perfect ground (ITU-R BS.561 / P.368 reference)
FREQ_RANGE_KHZ = (10.0, 30_000.0)  # ITU-R P.368 range
EARTH_K_RANGE = (0.5, 10.0)

#: Crossover in normalised distance x = m d / a between flat earth and the residue series.
X_CROSSOVER = 0.1
#: Terms are kept while (√3/2)·(|t_s| − |t_1|)·x < SERIES_EXPONENT: each neglected term is
#: below exp(-12) ≈ 6e-6 of the first, and their sum far under 0.001 dB.
SERIES_EXPONENT = 12.0
_ROT = np.exp(-2j * np.pi / 3)


def mv_m_to_dbu(field_mv_m):
    """Field [mV/m] → [dB above 1 µV/m]."""
    return 20.0 * np.log10(np.asarray(field_mv_m, dtype=float) * 1e3)


def dbu_to_mv_m(field_dbu):
    """Field [dB above 1 µV/m] → [mV/m]."""
    return 10.0 ** (np.asarray(field_dbu, dtype=float) / 20.0) * 1e-3


def _check_freq(freq_khz):
    return check_finite("freq_khz", freq_khz, *FREQ_RANGE_KHZ)


def surface_impedance(freq_khz, sigma_ms_m, eps_r):
    """Normalised surface impedance Δ for vertical polarisation.

    Δ = sqrt(εc − 1)/εc, εc = εr − j·σ/(ω ε0) (time convention exp(+jωt)).

    Parameters
    ----------
    freq_khz : frequency [kHz]
    sigma_ms_m : conductivity [mS/m]
    eps_r : relative permittivity [-]

    Returns
    -------
    complex ndarray

    References
    ----------
    ITU-R P.368 / Wait (1964); docs/methods.md §1.
    """
    omega = 2 * np.pi * np.asarray(freq_khz, dtype=float) * 1e3
    eps_c = np.asarray(eps_r, dtype=float) - 1j * np.asarray(sigma_ms_m) * 1e-3 / (omega * EPS0)
    return np.sqrt(eps_c - 1) / eps_c


def numerical_distance(freq_khz, ground: Ground, dist_km):
    """Norton's complex numerical distance w = −j (k d / 2) Δ² (|w| is Norton's p)."""
    k = 2 * np.pi * freq_khz * 1e3 / C0
    delta = surface_impedance(freq_khz, ground.sigma_ms_m, ground.eps_r)
    return -1j * k * np.asarray(dist_km, dtype=float) * 1e3 / 2 * delta**2


def flat_earth_attenuation(w):
    """Sommerfeld–Norton attenuation function over a plane earth.

    F(w) = 1 − j·sqrt(π w)·exp(−w)·erfc(j sqrt(w)) = 1 − j·sqrt(π w)·wofz(−sqrt(w)).

    Parameters
    ----------
    w : complex numerical distance

    Returns
    -------
    complex ndarray, F → 1 as w → 0 and F ≈ −1/(2w) for |w| ≫ 1.

    References
    ----------
    Norton (1936); docs/methods.md §1. scipy.special.wofz is the Faddeeva function.
    """
    w = np.asarray(w, dtype=complex)
    sw = np.sqrt(w)
    return 1 - 1j * np.sqrt(np.pi) * sw * special.wofz(-sw)  # Eq. F(w)


def _initial_roots(n: int):
    """Airy zeros: q → 0 limit (Ai'(−α'_s) = 0) and q → ∞ limit (Ai(−α_s) = 0), as t values."""
    a, ap, _, _ = special.ai_zeros(n)
    rot = np.exp(-1j * np.pi / 3)
    return (-ap) * rot, (-a) * rot


def residue_roots(q: complex, n: int, *, tol: float = 1e-12) -> np.ndarray:
    """Roots t_s, s = 1..n, of w'(t) − q·w(t) = 0, w(t) = Ai(t·exp(−j2π/3)).

    Traced from the exact limits with the Riccati equation, then polished with Newton:

    * |q| ≤ 1: dt/dq = 1/(t − q²) from t = α'_s·exp(−jπ/3) at q = 0;
    * |q| > 1: with u = 1/q, dt/du = 1/(1 − u² t) from t = α_s·exp(−jπ/3) at u = 0.

    Both equations stay regular because t never meets q² for physical grounds (arg q in
    (−90°, −45°], arg t_s ≈ −60°).

    References
    ----------
    Wait (1964); docs/methods.md §1 "Root finding".
    """
    t_small, t_large = _initial_roots(n)
    if abs(q) <= 1.0:
        t0, step = t_small, q

        def rhs(s, t):
            return step / (t - (s * step) ** 2)
    else:
        t0, step = t_large, 1.0 / q

        def rhs(s, t):
            return step / (1.0 - (s * step) ** 2 * t)

    sol = solve_ivp(rhs, (0.0, 1.0), t0.astype(complex), rtol=1e-7, atol=1e-9)
    if not sol.success:  # pragma: no cover - solver failure is not expected for physical q
        raise RuntimeError(f"Riccati tracing of residue roots failed: {sol.message}")
    t = sol.y[:, -1]
    for _ in range(20):
        ai, aip, _, _ = special.airy(t * _ROT)
        w, wp = ai, _ROT * aip
        dt = (wp - q * w) / (t * w - q * wp)  # g / g', g = w' − q w, g' = t w − q w'
        t = t - dt
        if np.max(np.abs(dt) / np.abs(t)) < tol:
            break
    return t


class GroundWaveModel:
    """Smooth-earth ground wave for one (frequency, ground, earth-radius factor).

    Build through :func:`model` (cached). Holds the residue-series roots and the curvature
    correction of the flat-earth branch.

    Parameters
    ----------
    freq_khz : frequency [kHz], 10 .. 30 000
    ground : homogeneous ground
    earth_k : effective earth-radius factor K (a_e = K·6371 km), default 4/3
    """

    def __init__(self, freq_khz: float, ground: Ground, earth_k: float = 4.0 / 3.0):
        self.freq_khz = _check_freq(freq_khz)
        self.earth_k = check_finite("earth_k", earth_k, *EARTH_K_RANGE)
        self.ground = ground
        self.wavelength_km = C0 / (self.freq_khz * 1e3) / 1e3
        self.radius_km = EARTH_RADIUS_KM * self.earth_k
        k = 2 * np.pi / (self.wavelength_km * 1e3)
        a = self.radius_km * 1e3
        self.m = (k * a / 2.0) ** (1.0 / 3.0)
        self.delta = complex(surface_impedance(self.freq_khz, ground.sigma_ms_m, ground.eps_r))
        self.q = -1j * self.m * self.delta
        self._table = None
        n = self._terms_needed(X_CROSSOVER)
        self.roots = residue_roots(self.q, n)
        # Curvature correction of the flat-earth branch: the leading curvature term of the
        # small-x expansion grows as x^(3/2) (Fock, Wait), so the ratio series/flat measured at
        # the crossover is carried down as ratio^((x/xc)^1.5). Continuous at xc by construction.
        xc = np.array([X_CROSSOVER])
        d_c = self.x_to_km(xc)
        self._log_corr_c = complex(
            np.log(self._series(xc)[0])
            - np.log(flat_earth_attenuation(numerical_distance(self.freq_khz, ground, d_c))[0])
        )

    # --- geometry -------------------------------------------------------------------------
    def km_to_x(self, dist_km):
        """Normalised distance x = m·d/a_e."""
        return self.m * np.asarray(dist_km, dtype=float) / self.radius_km

    def x_to_km(self, x):
        return np.asarray(x, dtype=float) * self.radius_km / self.m

    def _terms_needed(self, x_min: float) -> int:
        # |t_s| ≈ α_s ≈ [3π/8 (4s − 1)]^(2/3); keep terms with (√3/2)|t_s| x < SERIES_EXPONENT.
        alpha = SERIES_EXPONENT / (np.sqrt(3) / 2 * x_min)
        return int(max(8, np.ceil((alpha**1.5 / (3 * np.pi / 8) + 1) / 4) + 2))

    # --- the two branches -----------------------------------------------------------------
    def _series(self, x, roots=None):
        """Residue series W(x, q) (without spherical spreading) for x ≥ X_CROSSOVER, with the
        cached roots unless others are given."""
        x = np.asarray(x, dtype=float)
        out = np.empty(x.shape, dtype=complex)
        if x.size == 0:
            return out
        t = self.roots if roots is None else roots
        denom = t - self.q**2
        # decay of term s relative to the first: exp(−(√3/2)(|t_s| − |t_1|)·x)
        decay = np.sqrt(3) / 2 * (np.abs(t) - np.abs(t[0]))
        order = np.argsort(x)
        xs = x[order]
        chunk = 512
        res = np.empty(xs.shape, dtype=complex)
        for i in range(0, xs.size, chunk):
            xc = xs[i : i + chunk]
            n = max(1, int(np.searchsorted(decay * xc[0], SERIES_EXPONENT)))
            # per-point truncation (not per chunk) so a value never depends on its neighbours
            keep = np.outer(xc, decay[:n]) < SERIES_EXPONENT
            terms = np.where(keep, np.exp(-1j * np.outer(xc, t[:n])), 0) / denom[:n]
            res[i : i + chunk] = (
                np.sqrt(np.pi * xc) * np.exp(-1j * np.pi / 4) * terms.sum(axis=1)
            )  # W(x, q), docs/methods.md §1
        out[order] = res
        return out

    def attenuation(self, dist_km):
        """Complex attenuation factor W (relative to the inverse-distance field).

        Includes the spherical-spreading factor sqrt(θ/sin θ), θ = d/a_e.

        Parameters
        ----------
        dist_km : distance along the ground [km], scalar or array, ≥ one wavelength

        Returns
        -------
        complex ndarray of the same shape
        """
        d = self._check_distance(dist_km)
        x = self.km_to_x(d)
        out = np.empty(d.shape, dtype=complex)
        near = x < X_CROSSOVER
        if np.any(near):
            w = numerical_distance(self.freq_khz, self.ground, d[near])
            corr = np.exp(self._log_corr_c * (x[near] / X_CROSSOVER) ** 1.5)
            out[near] = flat_earth_attenuation(w) * corr
        if np.any(~near):
            out[~near] = self._series(x[~near])
        theta = d / self.radius_km
        return out * np.sqrt(theta / np.sin(theta))

    def flat_attenuation(self, dist_km):
        """Uncorrected flat-earth attenuation F(w) (for comparison and tests)."""
        d = self._check_distance(dist_km)
        return flat_earth_attenuation(numerical_distance(self.freq_khz, self.ground, d))

    def series_attenuation(self, dist_km):
        """Residue series W(x, q) at any distance with x ≥ X_CROSSOVER/4 (for tests)."""
        d = self._check_distance(dist_km)
        x = self.km_to_x(d)
        roots = None
        if np.any(x < X_CROSSOVER):  # more roots for this call only; the cache is left alone
            n = self._terms_needed(float(x.min()))
            if n > self.roots.size:
                roots = residue_roots(self.q, n)
        return self._series(x, roots)

    def _check_distance(self, dist_km):
        d = np.asarray(dist_km, dtype=float)
        if d.size and not np.all(np.isfinite(d)):
            raise ValueError("dist_km must be finite (got NaN or inf)")
        if d.size and d.min() < self.wavelength_km:
            raise ValueError(
                f"dist_km must be >= one wavelength ({self.wavelength_km:.3g} km at "
                f"{self.freq_khz:g} kHz) for the far-field ground-wave method (got {d.min():g})"
            )
        if d.size and d.max() > MAX_DIST_KM:
            raise ValueError(f"dist_km must be <= {MAX_DIST_KM:.0f} km (got {d.max():g})")
        return d

    # --- tabulated curve (for mixed paths and inversion) ---------------------------------
    @property
    def table(self):
        """Cached (log10 distance [km], attenuation [dB]) on a fine geometric grid.

        From 1e-4 km to 9000 km, 12 000 points (0.06 % spacing); linear interpolation in
        (log d, dB) is then within 0.001 dB of the direct evaluation. Below one wavelength
        the Norton function is used as a smooth continuation that tends to 0 dB at d = 0:
        mixed-path methods only take differences of attenuations there, where near-field
        terms cancel to first order.
        """
        if getattr(self, "_table", None) is None:
            d = np.geomspace(1e-4, 0.45 * np.pi * EARTH_RADIUS_KM, 12_000)
            far = d >= self.wavelength_km
            att = np.empty(d.shape, dtype=complex)
            att[~far] = flat_earth_attenuation(
                numerical_distance(self.freq_khz, self.ground, d[~far])
            )
            att[far] = self.attenuation(d[far])
            self._table = (np.log10(d), 20 * np.log10(np.abs(att)))
        return self._table

    def gain_db(self, dist_km):
        """20·log10|W| [dB] (≤ 0) from the cached table; 0 at d = 0. Accepts d ≥ 0."""
        logd, att_db = self.table
        d = np.asarray(dist_km, dtype=float)
        with np.errstate(divide="ignore"):
            ld = np.log10(d)
        return np.where(d <= 0, 0.0, np.interp(ld, logd, att_db, left=0.0))

    def curve_db(self, dist_km):
        """Field [dB] relative to the unattenuated field at 1 km: −20 log10 d + 20 log10|W|."""
        d = np.asarray(dist_km, dtype=float)
        return -20 * np.log10(d) + self.gain_db(d)

    def distance_for_curve_db(self, value_db):
        """Inverse of :meth:`curve_db` (monotone): the distance [km] where it equals ``value_db``."""
        logd, att_db = self.table
        curve = -20 * logd + att_db  # decreasing
        return 10 ** np.interp(-np.asarray(value_db, dtype=float), -curve, logd)

    # --- fields ---------------------------------------------------------------------------
    def field_mv_m(self, dist_km, e1km_mv_m: float = E1KM_REF_MV_M):
        """Ground-wave field [mV/m] for an unattenuated field ``e1km_mv_m`` at 1 km."""
        d = np.asarray(dist_km, dtype=float)
        return e1km_mv_m / d * np.abs(self.attenuation(d))

    def field_dbu(self, dist_km, e1km_mv_m: float = E1KM_REF_MV_M):
        """Ground-wave field [dBµV/m] for an unattenuated field ``e1km_mv_m`` at 1 km."""
        d = np.asarray(dist_km, dtype=float)
        return (
            mv_m_to_dbu(e1km_mv_m)
            - 20 * np.log10(d)
            + 20 * np.log10(np.abs(self.attenuation(d)))
        )

    def distance_to_field_km(
        self, level_mv_m, e1km_mv_m: float = E1KM_REF_MV_M, max_km: float = 5000.0
    ):
        """Distance [km] at which the field falls to ``level_mv_m`` (monotone on one ground).

        Returns NaN where the level is already not reached at one wavelength, and ``inf``
        where it is still exceeded at ``max_km``.
        """
        levels = np.atleast_1d(np.asarray(level_mv_m, dtype=float))
        if np.any(~np.isfinite(levels)) or np.any(levels <= 0):
            raise ValueError(f"level_mv_m must be > 0 and finite (got {level_mv_m!r})")
        lam = self.wavelength_km
        rel = mv_m_to_dbu(levels) - mv_m_to_dbu(e1km_mv_m)  # curve value [dB re E at 1 km]
        out = np.empty(levels.shape)
        for i, tg in enumerate(rel):
            if tg > float(self.curve_db(lam)):
                out[i] = np.nan
                continue
            if tg < float(self.curve_db(max_km)):
                out[i] = np.inf
                continue
            # the cached table is within 0.001 dB: bracket its answer by ±1 % and polish on
            # the direct evaluation
            d0 = float(self.distance_for_curve_db(tg))
            lo, hi = max(lam, 0.99 * d0), min(max_km, 1.01 * d0)

            def f(dd, tg=tg):
                return float(self.field_dbu(dd, 1.0)) - float(mv_m_to_dbu(1.0)) - tg

            if f(lo) * f(hi) > 0:  # table and direct evaluation disagree at the bracket ends
                lo, hi = lam, max_km
            out[i] = optimize.brentq(f, lo, hi, xtol=1e-6)
        return out.reshape(np.shape(level_mv_m)) if np.ndim(level_mv_m) else float(out[0])


@lru_cache(maxsize=256)
def _model_cached(freq_khz: float, sigma_ms_m: float, eps_r: float, earth_k: float):
    return GroundWaveModel(freq_khz, Ground(sigma_ms_m, eps_r), earth_k)


def model(freq_khz: float, ground: Ground, earth_k: float = 4.0 / 3.0) -> GroundWaveModel:
    """The cached :class:`GroundWaveModel` for (frequency, ground constants, K)."""
    f = _check_freq(freq_khz)
    k = check_finite("earth_k", earth_k, *EARTH_K_RANGE)
    return _model_cached(f, ground.sigma_ms_m, ground.eps_r, k)


def field_mv_m(freq_khz, ground: Ground, dist_km, e1km_mv_m=E1KM_REF_MV_M, earth_k=4.0 / 3.0):
    """Ground-wave field [mV/m] over a smooth homogeneous earth (see :class:`GroundWaveModel`)."""
    return model(freq_khz, ground, earth_k).field_mv_m(dist_km, e1km_mv_m)


def field_dbu(freq_khz, ground: Ground, dist_km, e1km_mv_m=E1KM_REF_MV_M, earth_k=4.0 / 3.0):
    """Ground-wave field [dBµV/m] over a smooth homogeneous earth."""
    return model(freq_khz, ground, earth_k).field_dbu(dist_km, e1km_mv_m)


def distance_to_field_km(
    freq_khz, ground: Ground, level_mv_m, e1km_mv_m=E1KM_REF_MV_M, earth_k=4.0 / 3.0
):
    """Distance [km] at which the ground wave falls to ``level_mv_m`` on a homogeneous path."""
    return model(freq_khz, ground, earth_k).distance_to_field_km(level_mv_m, e1km_mv_m)
