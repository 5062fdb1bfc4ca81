"""Vertical towers and directional arrays: radiation patterns and absolute field at 1 km.

A tower carries a sinusoidal current over perfectly conducting ground; an array is a set of such
towers fed with given field ratios and phases. The absolute field follows from conservation of
power: the power into the antenna, less losses, equals the power radiated through the upper
hemisphere.

References
----------
47 CFR 73.150 (directional antenna systems, 1 Ω loss per tower at the current loop) and
47 CFR 73.160 (vertical plane radiation characteristics); docs/methods.md §3.
J. D. Kraus, *Antennas*, 2nd ed., §5 (thin linear antenna, radiation resistance).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from scipy import special

from .validate import check_finite
from .groundwave import C0

__all__ = [
    "ETA0",
    "FIELD_OHM",
    "MAX_TOWERS",
    "Tower",
    "Element",
    "Array",
    "electrical_deg",
    "height_m",
    "quarter_wave_m",
]

ETA0 = 376.730313  # impedance of free space [Ω] (CODATA 2018: 376.730313668)
#: η0/(2π) [Ω]: the far field of a current I [A] on a vertical tower over perfect ground is
#: E = (η0/2π)·I·g(θ)/r; the often-quoted "60" rounds this (59.958 Ω) and makes every
#: radiation resistance 0.14 % high.
FIELD_OHM = ETA0 / (2 * np.pi)
MAX_TOWERS = 12
# an array that radiates less than this share of what its towers would radiate apart (−60 dB)
# is a mistake in its feeds (two equal co-located towers in anti-phase radiate nothing), not a
# design: refused rather than run with every contour "not reached" or an absurd maximum power
CANCEL_LIMIT = 1e-6
HEIGHT_RANGE_DEG = (0.1, 350.0)
#: Gauss–Legendre nodes in elevation for the power integral (azimuth is integrated exactly
#: with J0). 64 nodes: doubling changes the field by < 0.001 dB for arrays up to 12 towers
#: spread over a few wavelengths (tests/test_antenna.py).
ELEVATION_NODES = 64


def electrical_deg(height_m, freq_khz):
    """Physical height [m] → electrical height [deg] at ``freq_khz``."""
    wavelength_m = C0 / (np.asarray(freq_khz, dtype=float) * 1e3)
    return 360.0 * np.asarray(height_m, dtype=float) / wavelength_m


def height_m(height_deg, freq_khz):
    """Electrical height [deg] → physical height [m] at ``freq_khz``."""
    wavelength_m = C0 / (np.asarray(freq_khz, dtype=float) * 1e3)
    return np.asarray(height_deg, dtype=float) / 360.0 * wavelength_m


def quarter_wave_m(freq_khz):
    """Height of a quarter-wave tower [m] at ``freq_khz``."""
    return height_m(90.0, freq_khz)


@dataclass(frozen=True)
class Tower:
    """A uniform-cross-section vertical tower over perfect ground with sinusoidal current.

    Parameters
    ----------
    height_deg : electrical height A [deg], 0.1 .. 350
    top_loading_deg : apparent extra height B from top loading [deg], 0 .. 180
    loss_ohm : loss resistance [Ω] at the current loop, or at the base when A + B < 90°
    efficiency : radiation efficiency (0, 1]; used instead of ``loss_ohm`` when given
    """

    height_deg: float
    top_loading_deg: float = 0.0
    loss_ohm: float = 0.0
    efficiency: float | None = None

    def __post_init__(self):
        check_finite("height_deg", self.height_deg, *HEIGHT_RANGE_DEG)
        check_finite("top_loading_deg", self.top_loading_deg, 0.0, 180.0)
        check_finite("loss_ohm", self.loss_ohm, 0.0, 1e4)
        if self.efficiency is not None:
            check_finite("efficiency", self.efficiency, 0.0, 1.0, low_open=True)
            if self.loss_ohm:
                raise ValueError("give a tower's loss as loss_ohm or efficiency, not both")
        total = self.height_deg + self.top_loading_deg
        if not 0.1 <= total <= 350.0:
            raise ValueError(
                f"height_deg + top_loading_deg must be within 0.1 .. 350 (got {total:g})"
            )

    @classmethod
    def from_height_m(cls, height_m_: float, freq_khz: float, **kw) -> Tower:
        """Tower from a physical height [m] at a frequency [kHz]."""
        check_finite("height_m", height_m_, 0.0, 1000.0, low_open=True)
        return cls(float(electrical_deg(height_m_, freq_khz)), **kw)

    @property
    def _ab(self):
        return np.radians(self.height_deg), np.radians(self.top_loading_deg)

    @property
    def horizon_factor(self) -> float:
        """cos B − cos(A + B): horizontal field per unit loop current, in units of
        (η0/2π)/r."""
        a, b = self._ab
        return float(np.cos(b) - np.cos(a + b))

    def vertical(self, elev_deg):
        """Vertical radiation characteristic f(θ), 1 at the horizon.

        f(θ) = [cos B·cos(A sin θ) − sin θ·sin B·sin(A sin θ) − cos(A + B)]
               / [(cos B − cos(A + B))·cos θ]
        which for B = 0 is 47 CFR 73.160 / docs/methods.md §3: [cos(G sin θ) − cos G]/[(1 − cos G) cos θ].
        (Derived by integrating the sinusoidal current and its image.)
        """
        a, b = self._ab
        th = np.radians(np.asarray(elev_deg, dtype=float))
        s, c = np.sin(th), np.cos(th)
        num = np.cos(b) * np.cos(a * s) - s * np.sin(b) * np.sin(a * s) - np.cos(a + b)
        with np.errstate(invalid="ignore", divide="ignore"):
            f = num / (self.horizon_factor * c)
        return np.where(c < 1e-12, 0.0, f)

    @property
    def base_current_factor(self) -> float:
        """I_base / I_loop = sin(A + B) (1 for towers with a loop above ground)."""
        a, b = self._ab
        return float(np.sin(a + b)) if a + b < np.pi / 2 else 1.0

    @cached_property
    def radiation_resistance_ohm(self) -> float:
        """Radiation resistance [Ω] at the current loop, or at the base when A + B < 90°.

        R = (η0/2π)·∫ g(θ)² cos θ dθ over 0..90° elevation, g = horizon_factor·f(θ)
        (power of the far field E = (η0/2π)·I·g/r through the upper hemisphere; Kraus,
        Antennas, §5; docs/methods.md §3). At the base, R_base = R_loop / sin²(A + B).
        """
        x, w = np.polynomial.legendre.leggauss(4 * ELEVATION_NODES)
        th = (x + 1) * np.pi / 4
        g = self.horizon_factor * self.vertical(np.degrees(th))
        integral = np.pi / 4 * np.sum(w * g**2 * np.cos(th))
        r_loop = FIELD_OHM * integral
        return float(r_loop / self.base_current_factor**2)


@dataclass(frozen=True)
class Element:
    """One tower of an array, placed and fed relative to the array's reference point.

    Parameters
    ----------
    tower : the tower
    field_ratio : horizontal-plane field relative to the other elements [-], ≥ 0
    phase_deg : current phase [deg]
    spacing_deg : distance from the reference point [electrical deg], ≥ 0
    orientation_deg : bearing from the reference point [deg true]
    """

    tower: Tower
    field_ratio: float = 1.0
    phase_deg: float = 0.0
    spacing_deg: float = 0.0
    orientation_deg: float = 0.0

    def __post_init__(self):
        check_finite("field_ratio", self.field_ratio, 0.0, 1e3)
        check_finite("phase_deg", self.phase_deg, -3600.0, 3600.0)
        check_finite("spacing_deg", self.spacing_deg, 0.0, 36_000.0)
        check_finite("orientation_deg", self.orientation_deg, -360.0, 720.0)


@dataclass(frozen=True)
class Array:
    """A directional array of 1–12 towers (a one-element array is just its tower).

    Parameters
    ----------
    elements : the towers with their feeds and positions
    rotation_deg : rotation of the whole array [deg, clockwise from true north]
    """

    elements: tuple[Element, ...]
    rotation_deg: float = 0.0
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    #: the pattern an array gives as a radiator (:mod:`.pattern` builds the standard one)
    kind = "theoretical"

    def __post_init__(self):
        object.__setattr__(self, "elements", tuple(self.elements))
        n = len(self.elements)
        if not 1 <= n <= MAX_TOWERS:
            raise ValueError(f"an array must have 1 to {MAX_TOWERS} towers (got {n})")
        if all(e.field_ratio == 0 for e in self.elements):
            raise ValueError("field ratios of an array must not all be zero")
        check_finite("rotation_deg", self.rotation_deg, -360.0, 720.0)
        eff = [e.tower.efficiency for e in self.elements]
        if any(x is not None for x in eff) and len(set(eff)) > 1:
            raise ValueError("give the same efficiency for every tower of an array")
        ratio = self.hemisphere_integral() / self._pair_integral(ELEVATION_NODES, diagonal=True)
        if not ratio > CANCEL_LIMIT:
            shown = "nothing of" if ratio <= 0 else f"{10 * np.log10(ratio):.0f} dB of"
            raise ValueError(f"the towers' fields cancel: the array radiates {shown} what its "
                             "towers would radiate apart; check the field ratios, phases and "
                             "spacings")

    @classmethod
    def single(cls, tower: Tower) -> Array:
        """The array made of one tower at the reference point."""
        return cls((Element(tower),))

    @property
    def array(self) -> Array:
        """The towers of this radiator: the array itself (a standard pattern holds one too)."""
        return self

    # --- geometry and relative pattern ----------------------------------------------------
    @property
    def positions_rad(self) -> np.ndarray:
        """Element positions as complex numbers [rad of phase]: east + j·north."""
        return self._positions

    @cached_property
    def _positions(self) -> np.ndarray:
        """Element positions as complex numbers [rad]: east + j·north."""
        s = np.radians([e.spacing_deg for e in self.elements])
        az = np.radians([e.orientation_deg + self.rotation_deg for e in self.elements])
        return s * (np.sin(az) + 1j * np.cos(az))

    @cached_property
    def _feeds(self) -> np.ndarray:
        return np.array(
            [e.field_ratio * np.exp(1j * np.radians(e.phase_deg)) for e in self.elements]
        )

    def relative(self, azimuth_deg, elev_deg):
        """|Σ F_i f_i(θ) exp(j(ψ_i + S_i cos θ cos(φ_i − φ)))| (docs/methods.md §3), broadcast."""
        az = np.radians(np.asarray(azimuth_deg, dtype=float))
        el = np.asarray(elev_deg, dtype=float)
        az, el = np.broadcast_arrays(az, el)
        cos_el = np.cos(np.radians(el))
        ux, uy = np.sin(az), np.cos(az)  # unit vector toward the azimuth (east, north)
        total = np.zeros(az.shape, dtype=complex)
        for e, p, a in zip(self.elements, self._positions, self._feeds):
            proj = p.real * ux + p.imag * uy  # S_i cos(φ_i − φ)
            total += a * e.tower.vertical(el) * np.exp(1j * proj * cos_el)
        return np.abs(total)

    def _pair_integral(self, n_nodes: int, diagonal: bool = False) -> float:
        """∫∫ |Σ|² cos θ dθ dφ over the upper hemisphere; azimuth exact via J0. With
        ``diagonal`` only the towers' own terms: the power they would radiate apart."""
        x, w = np.polynomial.legendre.leggauss(n_nodes)
        th = (x + 1) * np.pi / 4
        wt = w * np.pi / 4 * np.cos(th)
        f = np.array([e.tower.vertical(np.degrees(th)) for e in self.elements])  # (n, k)
        a = self._feeds
        sep = np.abs(self._positions[:, None] - self._positions[None, :])  # |p_i − p_j| [rad]
        coup = np.real(a[:, None] * np.conj(a[None, :]))  # Re(a_i a_j*)
        if diagonal:
            coup = np.diag(np.diag(coup))
        j0 = special.j0(sep[:, :, None] * np.cos(th)[None, None, :])
        inner = np.einsum("ij,ik,jk,ijk->k", coup, f, f, j0)
        return float(2 * np.pi * np.sum(wt * inner))

    def hemisphere_integral(self, n_nodes: int = ELEVATION_NODES) -> float:
        """Cached power integral of the relative pattern (see :meth:`_pair_integral`)."""
        if n_nodes not in self._cache:
            self._cache[n_nodes] = self._pair_integral(n_nodes)
        return self._cache[n_nodes]

    def _loss_per_k2(self) -> float:
        """Loss power per K² [W per (mV/m)²]: Σ I_i² R_i with I_i = K F_i/((η0/2π) h_i), the
        current at the loop or, for towers shorter than 90°, at the base where R_i is given."""
        total = 0.0
        for e in self.elements:
            t = e.tower
            i_loop = e.field_ratio / (FIELD_OHM * t.horizon_factor)
            total += (i_loop * t.base_current_factor) ** 2 * t.loss_ohm
        return total

    def k_mv_m(self, power_kw: float, n_nodes: int = ELEVATION_NODES) -> float:
        """Scale K [mV/m at 1 km per unit relative field] for ``power_kw`` into the antenna.

        P_in·η = K²·I/η0 (efficiency given) or P_in = K²·(I/η0 + Σ I_i²R_i/K²) (loss resistance),
        I = hemisphere integral of the relative pattern (docs/methods.md §3, 47 CFR 73.150).
        """
        p_w = check_finite("power_kw", power_kw, 0.0, 1e4, low_open=True) * 1e3
        rad = self.hemisphere_integral(n_nodes) / ETA0
        eff = self.elements[0].tower.efficiency
        if eff is not None:
            return float(np.sqrt(eff * p_w / rad))
        return float(np.sqrt(p_w / (rad + self._loss_per_k2())))

    def field_mv_m(self, azimuth_deg, elev_deg, power_kw: float):
        """Absolute field [mV/m at 1 km] toward (azimuth [deg true], elevation [deg])."""
        return self.k_mv_m(power_kw) * self.relative(azimuth_deg, elev_deg)

    def radiated_power_kw(self, power_kw: float) -> float:
        """Power actually radiated [kW] for ``power_kw`` into the antenna."""
        k = self.k_mv_m(power_kw)
        return k**2 * self.hemisphere_integral() / ETA0 / 1e3

    def rms_mv_m(self, power_kw: float, elev_deg: float = 0.0) -> float:
        """RMS over azimuth of the field at elevation ``elev_deg`` [mV/m at 1 km], exact:
        mean of |Σ a_i f_i e^(j p_i·u cos θ)|² = Σ Re(a_i a_j*) f_i f_j J0(|p_i − p_j| cos θ)."""
        k = self.k_mv_m(power_kw)
        f = np.array([float(e.tower.vertical(elev_deg)) for e in self.elements])
        sep = np.abs(self._positions[:, None] - self._positions[None, :])
        coup = np.real(self._feeds[:, None] * np.conj(self._feeds[None, :]))
        cos_el = np.cos(np.radians(elev_deg))
        ms = float(np.sum(coup * np.outer(f, f) * special.j0(sep * cos_el)))
        return k * np.sqrt(max(ms, 0.0))

    def horizontal_summary(self, power_kw: float, step_deg: float = 0.1) -> dict:
        """RMS, maximum and minimum of the horizontal-plane field [mV/m at 1 km]."""
        k = self.k_mv_m(power_kw)
        az = np.arange(0.0, 360.0, step_deg)
        e = k * self.relative(az, 0.0)
        i_max, i_min = int(np.argmax(e)), int(np.argmin(e))
        return {
            "rms_mv_m": self.rms_mv_m(power_kw),
            "max_mv_m": float(e[i_max]),
            "max_azimuth_deg": float(az[i_max]),
            "min_mv_m": float(e[i_min]),
            "min_azimuth_deg": float(az[i_min]),
        }
