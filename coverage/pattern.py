"""Standard and augmented (modified standard) radiation patterns of directional stations.

Service and interference determinations of a directional station use its *standard* pattern:
the theoretical pattern of the array (:class:`~.antenna.Array`), enlarged by 5 % and filled in
its minima by a quadrature term Q, so that a real array, which never nulls as deeply as theory,
stays inside it (47 CFR 73.150(a)–(b)). An *augmentation* raises the standard pattern over a
span of azimuths around a central azimuth to a filed field there (47 CFR 73.152(c)).

Every radiator the rest of the package uses — a bare :class:`~.antenna.Array` (the theoretical
pattern) or a :class:`StandardPattern` — answers ``field_mv_m(azimuth, elevation, power_kw)``,
``rms_mv_m(power_kw, elev_deg)``, ``horizontal_summary(power_kw)`` and holds its towers as
``array``.

Notes
-----
The standard pattern at azimuth φ and elevation θ (73.150(b)(1)(i), docs/methods.md §3.2):

    E_std(φ, θ) = 1.05 · sqrt(E_th(φ, θ)² + Q(θ)²)
    Q(θ) = max(0.025 · g(θ) · E_rss, 10 · g(θ) · sqrt(P))
    E_rss = k · sqrt(Σ F_i²)          the elements' horizontal fields, summed in power
    g(θ) = f(θ) of the shortest tower; for a shortest tower taller than 180°,
           g(θ) = sqrt(f(θ)² + 0.0625) / 1.030776
    P = the facility's power [kW], taken as 1 when below 1 kW

The 1.05 factor and the structure of the expression follow the rule's text (the definition of
E_std was read); the equation itself is an image in every stored copy of the rule, so the
constants 0.025, 10, 0.0625 and 1.030776 (= sqrt(1.0625), so that g(0) = 1) and the clause for
P below 1 kW are written from memory and marked so.

An augmentation j with central azimuth φ_j, span S_j and augmented horizontal field E_j at φ_j
(73.152(c), read):

    E_aug(φ, θ)² = E(φ, θ)² + A_j · [g(θ) · cos(180° · DA / S_j)]²,  DA = |φ − φ_j| ≤ S_j/2
    A_j = E_j² − E(φ_j, 0)²     (E the pattern before augmentation j)

applied in ascending order of central azimuth, each on the result of the earlier ones, so that
an earlier span covering a later central azimuth changes the later A. A must be positive.

The pattern is built at the facility's power P and scales as sqrt(power / P) when another power
is asked for (the maximum-power search): its shape is the filed one.

References
----------
47 CFR 73.150(a), (b)(1)(i) (standard pattern), 73.152(c) (augmentation), 73.160 (f(θ)).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .antenna import Array
from .validate import check_finite

__all__ = [
    "PATTERN_KINDS",
    "Augmentation",
    "Facility",
    "StandardPattern",
    "g_factor",
    "elevation_table",
    "TABLE_ELEVATIONS_DEG",
]

PATTERN_KINDS = ("standard", "theoretical")
STANDARD_FACTOR = 1.05  # 73.150(b)(1)(i), read (the rule's "1.05" in the definition of E_std)
Q_RSS_SHARE = 0.025  # 73.150(b)(1)(i) # from memory (equation is an image in the stored rule)
Q_POWER_MV_M = 10.0  # mV/m per sqrt(kW), 73.150(b)(1)(i) # from memory
Q_MIN_POWER_KW = 1.0  # P below 1 kW is taken as 1 kW, 73.150(b)(1)(i) # from memory
TALL_TOWER_DEG = 180.0  # "in excess of 0.5 wavelength", 73.150(b)(1)(i) # from memory
TALL_FILL = 0.0625  # 73.150(b)(1)(i) # from memory
TALL_NORM = 1.030776  # = sqrt(1 + 0.0625): g(0) = 1, 73.150(b)(1)(i) # from memory
#: elevations of the tabulation a filing gives: 0° to 60° every 5° (73.150(b)(1), read)
TABLE_ELEVATIONS_DEG = tuple(float(e) for e in range(0, 61, 5))


def g_factor(array: Array, elev_deg):
    """Vertical factor g(θ) of the quadrature term: f(θ) of the array's shortest tower, with the
    null of a tower taller than 180° filled (module Notes). 1 at the horizon."""
    shortest = min((e.tower for e in array.elements),
                   key=lambda t: t.height_deg + t.top_loading_deg)
    f = np.abs(shortest.vertical(elev_deg))
    if shortest.height_deg + shortest.top_loading_deg > TALL_TOWER_DEG:
        return np.sqrt(f**2 + TALL_FILL) / TALL_NORM
    return f


def _angle_between(a_deg, b_deg):
    """Absolute difference of two azimuths [deg], 0..180."""
    d = np.abs((np.asarray(a_deg, dtype=float) - b_deg) % 360.0)
    return np.minimum(d, 360.0 - d)


@dataclass(frozen=True)
class Augmentation:
    """One augmentation of a standard pattern (47 CFR 73.152(c)).

    Parameters
    ----------
    azimuth_deg : central azimuth [deg true], 0 .. 360
    span_deg : span S centred on it [deg], > 0 .. 360
    field_mv_m : augmented horizontal field at the central azimuth [mV/m at 1 km] at the
        facility's power, > 0
    """

    azimuth_deg: float
    span_deg: float
    field_mv_m: float

    def __post_init__(self):
        check_finite("azimuth_deg", self.azimuth_deg, 0.0, 360.0)
        check_finite("span_deg", self.span_deg, 0.0, 360.0, low_open=True)
        check_finite("field_mv_m", self.field_mv_m, 0.0, 1e5, low_open=True)

    def weight(self, azimuth_deg):
        """cos²(180°·DA/S) inside the span, 0 outside."""
        da = _angle_between(azimuth_deg, self.azimuth_deg)
        inside = da <= self.span_deg / 2.0
        return np.where(inside, np.cos(np.pi * da / self.span_deg) ** 2, 0.0)


@dataclass(frozen=True)
class StandardPattern:
    """The standard pattern of ``array`` at ``power_kw``, with its augmentations.

    Parameters
    ----------
    array : the directional array (2 or more towers)
    power_kw : the facility's power [kW]: the power the pattern is built at
    augmentations : augmentations, any order (applied in ascending central azimuth)
    """

    array: Array
    power_kw: float
    augmentations: tuple[Augmentation, ...] = ()
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    kind = "standard"

    def __post_init__(self):
        object.__setattr__(self, "augmentations",
                           tuple(sorted(self.augmentations, key=lambda a: a.azimuth_deg)))
        if len(self.array.elements) < 2:
            raise ValueError("a standard pattern is for a directional array of 2 or more towers; "
                             "a single tower uses pattern = \"theoretical\"")
        check_finite("power_kw", self.power_kw, 0.0, 1e4, low_open=True)
        seen = [a.azimuth_deg % 360.0 for a in self.augmentations]
        if len(set(seen)) < len(seen):
            raise ValueError("two augmentations share a central azimuth; give one per azimuth")
        _ = self.a_values  # refuse a non-positive A now, not at the first field asked

    # --- the pattern at its own power ------------------------------------------------------
    @cached_property
    def k_mv_m(self) -> float:
        """Theoretical pattern scale k [mV/m at 1 km] at the facility's power (1 Ω rule)."""
        return self.array.k_mv_m(self.power_kw)

    @cached_property
    def rss_mv_m(self) -> float:
        """E_rss: the elements' horizontal fields summed in power [mV/m at 1 km]."""
        return self.k_mv_m * float(np.sqrt(sum(e.field_ratio**2 for e in self.array.elements)))

    def q_mv_m(self, elev_deg):
        """Quadrature term Q(θ) [mV/m at 1 km] (module Notes)."""
        g = g_factor(self.array, elev_deg)
        p = max(self.power_kw, Q_MIN_POWER_KW)
        return np.maximum(Q_RSS_SHARE * g * self.rss_mv_m, Q_POWER_MV_M * g * np.sqrt(p))

    def q_branch(self, elev_deg=0.0) -> str:
        """Which term sets Q: ``"rss"`` (0.025·g·E_rss) or ``"power"`` (10·g·√P)."""
        p = max(self.power_kw, Q_MIN_POWER_KW)
        return "rss" if Q_RSS_SHARE * self.rss_mv_m >= Q_POWER_MV_M * np.sqrt(p) else "power"

    def theoretical_mv_m(self, azimuth_deg, elev_deg):
        """Theoretical pattern E_th [mV/m at 1 km] at the facility's power."""
        return self.k_mv_m * self.array.relative(azimuth_deg, elev_deg)

    def unaugmented_mv_m(self, azimuth_deg, elev_deg):
        """Standard pattern before augmentation [mV/m at 1 km] at the facility's power."""
        th = self.theoretical_mv_m(azimuth_deg, elev_deg)
        return STANDARD_FACTOR * np.sqrt(th**2 + self.q_mv_m(elev_deg) ** 2)

    def _augmented_sq(self, azimuth_deg, elev_deg, a_values):
        """E² after the first ``len(a_values)`` augmentations (ascending central azimuth)."""
        az, el = np.broadcast_arrays(np.asarray(azimuth_deg, dtype=float),
                                     np.asarray(elev_deg, dtype=float))
        e2 = self.unaugmented_mv_m(az, el) ** 2
        if a_values:
            g2 = g_factor(self.array, el) ** 2
            for aug, a in zip(self.augmentations, a_values):
                e2 = e2 + a * g2 * aug.weight(az)
        return e2

    @cached_property
    def a_values(self) -> tuple[float, ...]:
        """A_j [(mV/m)²] of each augmentation, in the order applied (module Notes)."""
        out: list[float] = []
        for aug in self.augmentations:
            before = float(np.sqrt(self._augmented_sq(aug.azimuth_deg, 0.0, out)))
            a = aug.field_mv_m**2 - before**2
            if not a > 0:
                raise ValueError(
                    f"augmentation at {aug.azimuth_deg:g} deg: field_mv_m {aug.field_mv_m:g} must "
                    f"exceed the pattern there ({before:.2f} mV/m); 47 CFR 73.152(c) needs A > 0")
            out.append(a)
        return tuple(out)

    def pattern_mv_m(self, azimuth_deg, elev_deg):
        """The (augmented) standard pattern [mV/m at 1 km] at the facility's power."""
        return np.sqrt(self._augmented_sq(azimuth_deg, elev_deg, self.a_values))

    # --- radiator interface ----------------------------------------------------------------
    def _scale(self, power_kw: float) -> float:
        p = check_finite("power_kw", power_kw, 0.0, 1e4, low_open=True)
        return float(np.sqrt(p / self.power_kw))

    def field_mv_m(self, azimuth_deg, elev_deg, power_kw: float):
        """Field [mV/m at 1 km] toward (azimuth [deg true], elevation [deg]) for ``power_kw``:
        the filed pattern scaled by sqrt(power_kw / facility power)."""
        return self._scale(power_kw) * self.pattern_mv_m(azimuth_deg, elev_deg)

    def rms_mv_m(self, power_kw: float, elev_deg: float = 0.0) -> float:
        """RMS over azimuth [mV/m at 1 km] at elevation ``elev_deg``, exact:
        1.05²·(RMS_th² + Q²) + Σ A_j·g²·S_j/720 (the mean of cos² over a span is S/720 of the
        circle)."""
        rms_th = self.array.rms_mv_m(self.power_kw, elev_deg)
        q = float(self.q_mv_m(elev_deg))
        g2 = float(g_factor(self.array, elev_deg)) ** 2
        ms = STANDARD_FACTOR**2 * (rms_th**2 + q**2)
        ms += sum(a * g2 * aug.span_deg / 720.0 for aug, a in zip(self.augmentations,
                                                                    self.a_values))
        return self._scale(power_kw) * float(np.sqrt(ms))

    def horizontal_summary(self, power_kw: float, step_deg: float = 0.1) -> dict:
        """RMS, maximum and minimum of the horizontal-plane field [mV/m at 1 km]."""
        az = np.arange(0.0, 360.0, step_deg)
        e = self.field_mv_m(az, 0.0, power_kw)
        i_max, i_min = int(np.argmax(e)), int(np.argmin(e))
        return {"rms_mv_m": self.rms_mv_m(power_kw), "max_mv_m": float(e[i_max]),
                "max_azimuth_deg": float(az[i_max]), "min_mv_m": float(e[i_min]),
                "min_azimuth_deg": float(az[i_min])}


@dataclass(frozen=True)
class Facility:
    """The antenna of one operating period: towers, the pattern kind the rules use, and the
    augmentations of a standard pattern.

    Parameters
    ----------
    array : the towers
    kind : ``"standard"`` (default for 2 or more towers) or ``"theoretical"``; a single tower
        is always theoretical
    augmentations : augmentations of the standard pattern (47 CFR 73.152)
    """

    array: Array
    kind: str = ""
    augmentations: tuple[Augmentation, ...] = ()

    def __post_init__(self):
        kind = self.kind or ("standard" if len(self.array.elements) > 1 else "theoretical")
        if kind not in PATTERN_KINDS:
            raise ValueError(f"pattern must be one of {', '.join(PATTERN_KINDS)} "
                             f"(got {self.kind!r})")
        if kind == "standard" and len(self.array.elements) < 2:
            raise ValueError("pattern = \"standard\" needs a directional array of 2 or more "
                             "towers; a single tower is \"theoretical\"")
        if self.augmentations and kind != "standard":
            raise ValueError("augmentations modify a standard pattern (47 CFR 73.152): "
                             "set pattern = \"standard\" or remove them")
        object.__setattr__(self, "kind", kind)
        object.__setattr__(self, "augmentations", tuple(self.augmentations))

    def radiator(self, power_kw: float):
        """The pattern the rules use at ``power_kw``: :class:`StandardPattern` or the array."""
        if self.kind == "theoretical":
            return self.array
        return _standard(self.array, float(power_kw), self.augmentations)


_STANDARD_CACHE: dict = {}


def _standard(array, power_kw, augmentations) -> StandardPattern:
    key = (array, power_kw, augmentations)
    if key not in _STANDARD_CACHE:
        if len(_STANDARD_CACHE) > 4096:
            _STANDARD_CACHE.clear()
        _STANDARD_CACHE[key] = StandardPattern(array, power_kw, augmentations)
    return _STANDARD_CACHE[key]


def elevation_table(radiator, power_kw: float, azimuths_deg,
                    elevations_deg=TABLE_ELEVATIONS_DEG) -> dict:
    """Tabulation of a radiator every ``elevations_deg`` × ``azimuths_deg`` [mV/m at 1 km].

    Returns ``{"elevation_deg", "azimuth_deg", "pattern_mv_m" (elevation × azimuth),
    "theoretical_mv_m", "rms_mv_m" (per elevation)}``.
    """
    az = np.asarray(azimuths_deg, dtype=float)
    el = np.asarray(elevations_deg, dtype=float)
    pattern = radiator.field_mv_m(az[None, :], el[:, None], power_kw)
    theory = radiator.array.field_mv_m(az[None, :], el[:, None], power_kw)
    return {"elevation_deg": el, "azimuth_deg": az, "pattern_mv_m": pattern,
            "theoretical_mv_m": theory,
            "rms_mv_m": np.array([radiator.rms_mv_m(power_kw, e) for e in el])}
