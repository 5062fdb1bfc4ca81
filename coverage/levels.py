"""The fixed drawing style of a contour level: colour, line pattern and weight by field level.

A level always looks the same, whatever else the study holds (0.5 mV/m is green in every study),
and neighbouring bands differ in line pattern or weight as well as colour, so that a greyscale
print still tells them apart. Blue is kept for water: no contour is drawn in blue. Used by the
map renderer (window and sheet) and by the KML writer.

| level [mV/m]      | colour              | line          |
|-------------------|---------------------|---------------|
| ≥ 10              | dark red  #7f0000   | solid, 2.2    |
| 5 … < 10          | red       #d7301f   | solid, 1.6    |
| 2 … < 5           | orange    #e08214   | dashed, 1.8   |
| 1 … < 2           | brown     #8c5a00   | dash-dot, 1.6 |
| 0.5 … < 1         | green     #1a7f37   | solid, 2.6    |
| 0.25 … < 0.5      | purple    #5e3c99   | dotted, 1.8   |
| < 0.25            | magenta   #c51b7d   | dash-dot-dot, 1.6 |
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["LevelStyle", "LEVEL_STYLES", "level_style"]


@dataclass(frozen=True)
class LevelStyle:
    """How a contour band is drawn: RGB colour, line pattern and line weight [pt]."""

    lower_mv_m: float
    rgb: tuple[int, int, int]
    dash: str  # "solid", "dash", "dot", "dashdot", "dashdotdot"
    width_pt: float

    @property
    def hex(self) -> str:
        return "#{:02x}{:02x}{:02x}".format(*self.rgb)


#: Bands from the strongest down; a level takes the first band whose lower bound it reaches.
LEVEL_STYLES = (
    LevelStyle(10.0, (0x7F, 0x00, 0x00), "solid", 2.2),
    LevelStyle(5.0, (0xD7, 0x30, 0x1F), "solid", 1.6),
    LevelStyle(2.0, (0xE0, 0x82, 0x14), "dash", 1.8),
    LevelStyle(1.0, (0x8C, 0x5A, 0x00), "dashdot", 1.6),
    LevelStyle(0.5, (0x1A, 0x7F, 0x37), "solid", 2.6),
    LevelStyle(0.25, (0x5E, 0x3C, 0x99), "dot", 1.8),
    LevelStyle(0.0, (0xC5, 0x1B, 0x7D), "dashdotdot", 1.6),
)


def level_style(level_mv_m) -> LevelStyle:
    """The style of a contour at ``level_mv_m`` [mV/m] (see the table above)."""
    v = float(level_mv_m) if level_mv_m is not None else 0.0
    for s in LEVEL_STYLES:
        if v >= s.lower_mv_m * (1 - 1e-9):
            return s
    return LEVEL_STYLES[-1]
