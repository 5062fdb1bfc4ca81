"""Checks of user-supplied values with messages that name the field, the value and the range."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping

__all__ = ["check_finite", "check_keys", "where_join", "read_json", "read_text"]


def check_finite(name: str, value, low=None, high=None, *, where: str = "", low_open=False):
    """Return ``float(value)`` or raise a ValueError naming the field, the value and the range.

    Parameters
    ----------
    name : field name as the user wrote it (``sigma_ms_m``)
    value : the value to check
    low, high : inclusive bounds (``low_open`` makes the lower bound exclusive)
    where : where the value came from (``"[ground] of demo.toml"``), appended to the message
    """
    suffix = f" in {where}" if where else ""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number (got {value!r}){suffix}") from None
    if not math.isfinite(v):
        raise ValueError(f"{name} must be a finite number (got {value!r}){suffix}")
    too_low = low is not None and (v <= low if low_open else v < low)
    too_high = high is not None and v > high
    if too_low or too_high:
        lo = "" if low is None else (f"> {low:g}" if low_open else f">= {low:g}")
        hi = "" if high is None else f"<= {high:g}"
        rng = " and ".join(s for s in (lo, hi) if s)
        raise ValueError(f"{name} must be {rng} (got {value!r}){suffix}")
    return v


def check_keys(table: Mapping, allowed: Iterable[str], where: str, required: Iterable[str] = ()):
    """Refuse unknown and missing keys of a TOML table; the message lists the valid keys."""
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


def read_text(path) -> str:
    """A UTF-8 text file's contents; a file that is not UTF-8 text gets an error naming it."""
    import pathlib

    try:
        return pathlib.Path(path).read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise ValueError(f"{path}: not UTF-8 text (byte {exc.start})") from None


def read_json(path):
    """Parse a JSON/GeoJSON file; syntax errors name the file, line and column."""
    import json

    try:
        return json.loads(read_text(path))
    except json.JSONDecodeError as exc:
        raise ValueError(f"{path}: not valid JSON (line {exc.lineno}, column {exc.colno}): "
                         f"{exc.msg}") from None
