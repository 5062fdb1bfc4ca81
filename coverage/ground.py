"""Ground electrical constants: the `Ground` record and the ITU-R P.368 ground classes.

Conductivity zones read from GeoJSON live in :mod:`mwreach.coverage.zones`.
"""

from __future__ import annotations

from dataclasses import dataclass

from .validate import check_finite

__all__ = ["Ground", "GROUND_CLASSES", "ground_class"]

# Validity window of the ground-wave method (ITU-R P.368 covers 10 kHz to 30 MHz).
SIGMA_RANGE_MS_M = (1e-4, 1e7)  # from very dry ice to (practically) a perfect conductor
EPS_R_RANGE = (1.0, 100.0)


@dataclass(frozen=True)
class Ground:
    """Homogeneous ground: conductivity and relative permittivity.

    Parameters
    ----------
    sigma_ms_m : conductivity [mS/m], 1e-4 .. 1e7
    eps_r : relative permittivity [-], 1 .. 100
    name : label for reports
    source : where the constants come from
    """

    sigma_ms_m: float
    eps_r: float
    name: str = ""
    source: str = ""

    def __post_init__(self):
        where = f"ground {self.name!r}" if self.name else ""
        object.__setattr__(
            self,
            "sigma_ms_m",
            check_finite("sigma_ms_m", self.sigma_ms_m, *SIGMA_RANGE_MS_M, where=where),
        )
        object.__setattr__(
            self, "eps_r", check_finite("eps_r", self.eps_r, *EPS_R_RANGE, where=where)
        )

    @property
    def sigma_s_m(self) -> float:
        """Conductivity [S/m]."""
        return self.sigma_ms_m * 1e-3

    @property
    def key(self) -> tuple[float, float]:
        """What the physics depends on (used for caching and merging sections)."""
        return (self.sigma_ms_m, self.eps_r)

    def label(self) -> str:
        """Short human label: ``"land 3 mS/m, εr 22"``."""
        head = f"{self.name} " if self.name else ""
        return f"{head}{self.sigma_ms_m:g} mS/m, εr {self.eps_r:g}"


_P368 = "ITU-R P.368 ground classes (methods.md §1; from memory, four corroborated)"

#: Named ground classes of ITU-R P.368, keyed by a short identifier.
GROUND_CLASSES: dict[str, Ground] = {
    g.name: g
    for g in (
        Ground(1000.0, 80.0, "sea-low-salinity", _P368),
        Ground(5000.0, 70.0, "sea", _P368),
        Ground(3.0, 80.0, "fresh-water", _P368),
        Ground(30.0, 40.0, "land-30", _P368),
        Ground(10.0, 30.0, "wet-ground", _P368),
        Ground(3.0, 22.0, "land", _P368),
        Ground(1.0, 15.0, "medium-dry", _P368),
        Ground(0.3, 7.0, "dry", _P368),
        Ground(0.1, 3.0, "very-dry", _P368),
        Ground(0.03, 3.0, "ice-1c", _P368),
        Ground(0.01, 3.0, "ice-10c", _P368),
    )
}


def ground_class(name: str, *, where: str = "") -> Ground:
    """Look up a ground class by name; the error lists the valid names."""
    try:
        return GROUND_CLASSES[name]
    except KeyError:
        suffix = f" in {where}" if where else ""
        raise ValueError(
            f"unknown ground class {name!r}{suffix}; valid: {', '.join(GROUND_CLASSES)}"
        ) from None
