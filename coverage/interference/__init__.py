"""Interference to and from neighbouring stations, one module per mechanism.

Day: ground waves (mixed paths over the study's zones) on each protected contour, and contour
overlap for second and third adjacent channels. Night: 10 % sky waves (47 CFR 73.190 or ITU-R
P.1147) combined by RSS into night limits, the proposal's own and each neighbour's.

Modules, in the order they build on each other:

- ``records``: neighbours, protection tables, night settings, check rows and results
- ``fields``: one station's ground and sky wave at given points
- ``rss``: root-sum-square with the exclusion rule
- ``nightservice``: the proposal's night limit and night service contour
- ``nightlimit``: a neighbour's own night limit, and class A sky-wave service contours
- ``overlap``: second- and third-adjacent day contour overlap
- ``maxpower``: the largest powers the checks allow, within the class's range
- ``checks``: every check, assembled (``NeighbourChecks``, ``run_interference``)

References: docs/methods.md §5 (47 CFR 73.21, 73.37, 73.182, 73.183; Rio 1981 plan; ITU-R
BS.560). Texts for people are in :mod:`mwreach.coverage.report`.
"""

from .checks import NeighbourChecks, run_interference
from .fields import night_contribution, point_ground_dbu, protected_contour_points, sky_dbu_from
from .nightlimit import NeighbourLimit, first_entry_db, skywave_service_points
from .nightservice import night_service
from .records import (
    DEFAULT_RATIOS,
    ORDINALS,
    InterferencePlan,
    InterferenceResult,
    MarginRow,
    Neighbour,
    NightResult,
    NightSettings,
    OverlapCheck,
    ProtectionTable,
    channel_offset,
)
from .rss import rss, rss_columns

__all__ = [
    "DEFAULT_RATIOS", "ORDINALS", "InterferencePlan", "InterferenceResult", "MarginRow",
    "Neighbour", "NeighbourChecks", "NeighbourLimit", "NightResult", "NightSettings",
    "OverlapCheck", "ProtectionTable", "channel_offset", "first_entry_db", "night_contribution",
    "night_service", "point_ground_dbu", "protected_contour_points", "rss", "rss_columns",
    "run_interference", "sky_dbu_from", "skywave_service_points",
]
