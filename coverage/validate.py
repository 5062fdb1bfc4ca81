"""Checks of single values with messages that name the field, the value and the range.

Files and tables are read in :mod:`mwreach.coverage.inputs`; this module only checks values, so
that the physics records (``Ground``, ``Tower`` …) can check their own arguments.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterable, Mapping

import numpy as np

__all__ = ["check_finite", "check_keys", "where_join", "shown"]


def shown(value) -> str:
    """A value as a message shows it: ``repr``, but an integer too long to read is described
    by its number of digits rather than printed in full."""
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) >= 10 ** 15:
        return f"an integer of {len(str(abs(value)))} digits"
    return repr(value)


def check_finite(name: str, value, low=None, high=None, *, where: str = "", low_open=False):
    """Return ``float(value)`` or raise a ValueError naming the field, the value and the range.

    Only real numbers are accepted: a boolean (TOML ``true``) or a string (``"1390"``) is
    refused rather than converted, so that a typing slip never becomes a silent 1 or 1390.

    Parameters
    ----------
    name : field name as the user wrote it (``sigma_ms_m``)
    value : the value to check
    low, high : inclusive bounds (``low_open`` makes the lower bound exclusive)
    where : where the value came from (``"[ground] of demo.toml"``), appended to the message
    """
    suffix = f" in {where}" if where else ""
    if isinstance(value, (bool, np.bool_)):
        raise ValueError(f"{name} must be a number (got {'true' if value else 'false'}){suffix}")
    if isinstance(value, str):
        try:
            float(value)
            hint = ": write it without quotes"
        except ValueError:
            hint = ""
        raise ValueError(f"{name} must be a number (got {value!r}{hint}){suffix}")
    if isinstance(value, (_dt.date, _dt.time)):
        raise ValueError(f"{name} must be a number (got the date/time {value.isoformat()}){suffix}")
    try:
        v = float(value)
    except OverflowError:  # an integer beyond the largest float
        v = math.inf
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number (got {shown(value)}){suffix}") from None
    if not math.isfinite(v):
        raise ValueError(f"{name} must be a finite number (got {shown(value)}){suffix}")
    too_low = low is not None and (v <= low if low_open else v < low)
    too_high = high is not None and v > high
    if too_low or too_high:
        lo = "" if low is None else (f"> {low:g}" if low_open else f">= {low:g}")
        hi = "" if high is None else f"<= {high:g}"
        rng = " and ".join(s for s in (lo, hi) if s)
        raise ValueError(f"{name} must be {rng} (got {shown(value)}){suffix}")
    return v


def check_keys(table: Mapping, allowed: Iterable[str], where: str, required: Iterable[str] = ()):
    """Refuse unknown and missing keys of a table; the message lists the valid keys."""
    allowed = list(allowed)
    for key in table:
        if key not in allowed:
            raise ValueError(f"unknown key {key!r} in {where}; valid keys: {', '.join(allowed)}")
    for key in required:
        if key not in table:
            raise ValueError(f"missing key {key!r} in {where}")


def where_join(*parts: str) -> str:
    """``where_join("[station]", "demo.toml")`` → ``"[station] of demo.toml"``."""
    return " of ".join(p for p in parts if p)
