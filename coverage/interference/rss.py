"""Root-sum-square of (protection ratio × field) with the 50 % (or 25 %) exclusion rule (47 CFR
73.182(k), from memory); docs/methods.md §5.
"""

from __future__ import annotations

import numpy as np


def rss(values, exclusion_percent: int = 50):
    """Root-sum-square with the exclusion rule (docs/methods.md §5).

    Values (ratio × field, linear) are sorted in decreasing order and accumulated; with a 50 %
    (25 %) rule, accumulation stops at the first value below 50 % (25 %) of the RSS of the
    larger ones. Returns (rss, used mask in the input order).
    """
    v = np.asarray(values, dtype=float)
    used = np.zeros(v.shape, dtype=bool)
    if v.size == 0:
        return 0.0, used
    order = np.argsort(-v, kind="stable")
    total = 0.0
    for i in order:
        if v[i] <= 0:
            break
        if exclusion_percent and total > 0 and v[i] < exclusion_percent / 100.0 * np.sqrt(total):
            break
        total += v[i] ** 2
        used[i] = True
    return float(np.sqrt(total)), used


def _rss_sorted(v, exclusion_percent: int):
    """The RSS rule on values sorted largest first along axis 0 (any further axes are
    columns): the RSS of each column with the exclusion rule and how many values it keeps."""
    csum = np.cumsum(v**2, axis=0)
    prev = np.sqrt(np.concatenate([np.zeros((1,) + v.shape[1:]), csum[:-1]]))
    stop = v <= 0
    if exclusion_percent:
        stop |= (prev > 0) & (v < exclusion_percent / 100.0 * prev)
    stop = np.concatenate([stop, np.ones((1,) + v.shape[1:], dtype=bool)])
    k = np.argmax(stop, axis=0)  # values kept per column
    total = np.where(k > 0, np.sqrt(np.take_along_axis(
        csum, np.maximum(k - 1, 0)[None], axis=0)[0]), 0.0)
    return total, k


def _dbu_to_linear(dbu):
    """dB values → linear (relative to 0 dB); −inf, inf and NaN (no field) give 0."""
    dbu = np.asarray(dbu, dtype=float)
    finite = np.isfinite(dbu)
    return np.where(finite, 10 ** (np.where(finite, dbu, 0.0) / 20.0), 0.0)


def _limit_dbu(total, floor_dbu):
    """A linear RSS → dBµV/m, never below ``floor_dbu`` (−inf where nothing is kept)."""
    with np.errstate(divide="ignore"):
        return np.maximum(np.where(total > 0, 20 * np.log10(np.maximum(total, 1e-300)),
                                   -np.inf), floor_dbu)


def rss_columns(lin, exclusion_percent: int):
    """Column-wise :func:`rss` of a (n_values, n_points) array of linear values: the RSS of
    each column with the exclusion rule and the mask of the values it keeps."""
    lin = np.asarray(lin, dtype=float)
    if lin.size == 0:
        return np.zeros(lin.shape[1:]), np.zeros(lin.shape, dtype=bool)
    order = np.argsort(-lin, axis=0, kind="stable")
    total, k = _rss_sorted(np.take_along_axis(lin, order, axis=0), exclusion_percent)
    kept_sorted = np.arange(lin.shape[0])[:, None] < k[None, :]
    used = np.zeros(lin.shape, dtype=bool)
    np.put_along_axis(used, order, kept_sorted, axis=0)
    return total, used


def _rss_limit(products_dbu, names, mechs, exclusion_percent: int, floor_dbu: float,
               want_names: bool = True):
    """Per point: the RSS (with exclusion) of ratio × field [dBµV/m] of several stations, never
    below ``floor_dbu``; with the names and mechanisms the rule kept (empty lists unless
    ``want_names``)."""
    prods = np.asarray(products_dbu, dtype=float)  # (n_stations, n_points)
    if prods.ndim != 2 or prods.shape[0] == 0:
        n_pts = prods.shape[1] if prods.ndim == 2 else 0
        return (np.full(n_pts, floor_dbu), [[] for _ in range(n_pts)],
                [[] for _ in range(n_pts)], np.zeros(prods.shape, dtype=bool))
    lin = _dbu_to_linear(prods)
    total, used = rss_columns(lin, exclusion_percent)
    limits = _limit_dbu(total, floor_dbu)
    used_names, used_mechs = [], []
    if not want_names:
        return limits, used_names, used_mechs, used
    mechs = np.asarray(mechs, dtype=object).reshape(prods.shape)
    for j in range(prods.shape[1]):
        idx = np.flatnonzero(used[:, j])
        used_names.append([names[i] for i in idx])
        used_mechs.append([mechs[i, j] for i in idx])
    return limits, used_names, used_mechs, used
