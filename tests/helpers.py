"""Small helpers the tests share (study texts, closed-form areas)."""

import numpy as np


def homogeneous_study(lat: float, lon: float, step_deg: float = 10.0, step_km: float = 1.0,
                      level_mv_m: float = 0.5) -> str:
    """A one-tower study on homogeneous land (ITU-R P.368 class 'land') as TOML text."""
    return f"""
[study]
bearing_step_deg = {step_deg}
step_km = {step_km}
[station]
name = "Test"
lat = {lat}
lon = {lon}
freq_khz = 1000
power_day_kw = 1
[antenna]
[[antenna.tower]]
height_deg = 90
[ground]
class = "land"
[[contour]]
field_mv_m = {level_mv_m}
"""


def lens_km2(r1, r2, d):
    """Area of the overlap of two circles of radii r1, r2 whose centres are d apart (closed
    form of plane geometry)."""
    return (r1**2 * np.arccos((d**2 + r1**2 - r2**2) / (2 * d * r1))
            + r2**2 * np.arccos((d**2 + r2**2 - r1**2) / (2 * d * r2))
            - 0.5 * np.sqrt((-d + r1 + r2) * (d + r1 - r2) * (d - r1 + r2) * (d + r1 + r2)))
