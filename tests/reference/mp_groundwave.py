"""Slow, high-precision ground-wave reference in mpmath (independent of scipy and of mwreach).

Used by ``build_groundwave.py`` to produce ``groundwave_mpmath.json`` and by the slow tests.
Formulas: docs/methods.md §1 (Norton flat earth; Van der Pol–Bremmer / Fock / Wait residue series).
Roots of w'(t) − q w(t) = 0 are found by continuation in q with mpmath.findroot, starting from
the Airy zeros that mpmath itself computes (mpmath.airyaizero).
"""

from __future__ import annotations

import mpmath as mp

C0 = mp.mpf(299792458)
EPS0 = mp.mpf("8.8541878128e-12")


def _setup(freq_khz, sigma_ms_m, eps_r, earth_k):
    f = mp.mpf(freq_khz) * 1000
    omega = 2 * mp.pi * f
    eps_c = mp.mpf(eps_r) - 1j * (mp.mpf(sigma_ms_m) / 1000) / (omega * EPS0)
    delta = mp.sqrt(eps_c - 1) / eps_c
    k = omega / C0
    a = mp.mpf(6371000) * mp.mpf(earth_k)
    m = mp.cbrt(k * a / 2)
    return k, a, m, delta


def flat_attenuation(freq_khz, sigma_ms_m, eps_r, dist_km):
    """Norton F(w) = 1 − j sqrt(π w) exp(−w) erfc(j sqrt(w)) at mp.dps digits."""
    k, _, _, delta = _setup(freq_khz, sigma_ms_m, eps_r, 1)
    w = -1j * k * mp.mpf(dist_km) * 1000 / 2 * delta**2
    sw = mp.sqrt(w)
    return 1 - 1j * mp.sqrt(mp.pi * w) * mp.exp(-w) * mp.erfc(1j * sw)


def _roots(q, n, steps=16):
    rot = mp.exp(-2j * mp.pi / 3)

    def g(t, qq):
        return rot * mp.airyai(t * rot, derivative=1) - qq * mp.airyai(t * rot)

    roots = []
    for s in range(1, n + 1):
        t = -mp.airyaizero(s, derivative=1) * mp.exp(-1j * mp.pi / 3)  # q = 0 limit
        for i in range(1, steps + 1):
            qq = q * i / steps
            # first-order predictor from the Riccati equation dt/dq = 1/(t − q²)
            t = t + (q / steps) / (t - qq**2)
            t = mp.findroot(lambda tt, qq=qq: g(tt, qq), t)
        roots.append(t)
    return roots


def series_attenuation(freq_khz, sigma_ms_m, eps_r, dist_km, earth_k=mp.mpf(4) / 3, exponent=25):
    """Residue series W(x, q)·sqrt(θ/sin θ), terms kept while (√3/2)|t_s| x < exponent."""
    k, a, m, delta = _setup(freq_khz, sigma_ms_m, eps_r, earth_k)
    q = -1j * m * delta
    d = mp.mpf(dist_km) * 1000
    x = m * d / a
    alpha = exponent / (mp.sqrt(3) / 2 * x)
    n = int(mp.ceil((alpha**1.5 / (3 * mp.pi / 8) + 1) / 4)) + 2
    total = mp.mpc(0)
    for t in _roots(q, n):
        total += mp.exp(-1j * x * t) / (t - q**2)
    w = mp.sqrt(mp.pi * x) * mp.exp(-1j * mp.pi / 4) * total
    theta = d / a
    return w * mp.sqrt(theta / mp.sin(theta))


def field_dbu(attenuation, dist_km, e1km_mv_m=300):
    """dBµV/m from an attenuation factor and distance."""
    return 20 * mp.log10(mp.mpf(e1km_mv_m) * 1000 / mp.mpf(dist_km) * abs(attenuation))
