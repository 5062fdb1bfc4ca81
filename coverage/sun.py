"""Sunrise and sunset at the site, month by month: they start and end the operating periods.

Night operation runs from local sunset to local sunrise; the critical hours are the two hours
after local sunrise and the two before local sunset (47 CFR 73.187(a), read).

Notes
-----
The sun's apparent position follows the low-precision solar coordinates of J. Meeus,
*Astronomical Algorithms* (2nd ed., 1998), ch. 25 (mean longitude L0, mean anomaly M, equation
of centre C, apparent longitude λ with the nutation/aberration term in Ω, corrected obliquity ε,
declination δ) and the equation of time of ch. 28 in Smart's series form, as the NOAA solar
calculator uses them. The coefficients below are written from memory and checked in
tests/test_sun.py against astropy's full solar ephemeris (within one minute, over twelve months
at four latitudes). Sunrise and sunset are when the sun's centre is 0.833° below a level
horizon (34′ of refraction and 16′ of semidiameter). Each event is solved twice, the second
time with the sun's position at the first estimate. Precision is about a minute between the
polar circles; where the sun does not rise or set the time is None.

Times are computed for the 15th of each month (mid-month; common practice, no published
source) and given in UTC and, when the study gives the site's standard-time offset, in local
standard time.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np

from .validate import check_finite

__all__ = ["SUN_ALTITUDE_DEG", "MID_MONTH_DAY", "CRITICAL_HOURS", "sun_events_utc_min",
           "monthly_sun_times", "hhmm"]

SUN_ALTITUDE_DEG = -0.833  # refraction 34′ + semidiameter 16′ (Meeus ch. 15) # from memory
MID_MONTH_DAY = 15  # common practice, no published source
CRITICAL_HOURS = 2.0  # 47 CFR 73.187(a) (read): two hours after sunrise, two before sunset
_J2000 = 2451545.0


def _julian_day(date: _dt.date) -> float:
    """Julian day at 0h UTC of ``date`` (proleptic Gregorian)."""
    return date.toordinal() + 1721424.5


def _sun(jd):
    """Declination [deg] and equation of time [min] at Julian day ``jd`` (UTC ≈ TT here:
    the ~70 s difference moves the sun by 0.0008°)."""
    t = (np.asarray(jd, dtype=float) - _J2000) / 36525.0  # Julian centuries from J2000
    l0 = np.radians((280.46646 + t * (36000.76983 + 0.0003032 * t)) % 360.0)  # mean longitude
    m = np.radians(357.52911 + t * (35999.05029 - 0.0001537 * t))  # mean anomaly
    e = 0.016708634 - t * (0.000042037 + 0.0000001267 * t)  # orbit eccentricity
    c = (np.sin(m) * (1.914602 - t * (0.004817 + 0.000014 * t))
         + np.sin(2 * m) * (0.019993 - 0.000101 * t) + np.sin(3 * m) * 0.000289)  # centre
    omega = np.radians(125.04 - 1934.136 * t)
    lam = np.radians(np.degrees(l0) + c - 0.00569 - 0.00478 * np.sin(omega))  # apparent long.
    eps0 = 23.0 + (26.0 + (21.448 - t * (46.815 + t * (0.00059 - t * 0.001813))) / 60.0) / 60.0
    eps = np.radians(eps0 + 0.00256 * np.cos(omega))  # corrected obliquity
    dec = np.degrees(np.arcsin(np.sin(eps) * np.sin(lam)))
    y = np.tan(eps / 2) ** 2
    eot = 4.0 * np.degrees(y * np.sin(2 * l0) - 2 * e * np.sin(m)
                           + 4 * e * y * np.sin(m) * np.cos(2 * l0)
                           - 0.5 * y * y * np.sin(4 * l0) - 1.25 * e * e * np.sin(2 * m))
    return dec, eot


def sun_events_utc_min(lat: float, lon: float, date: _dt.date):
    """Sunrise and sunset on ``date`` at (lat, lon) [deg] in minutes after 0h UTC of that date
    (may fall below 0 or beyond 1440 far from Greenwich); None where the sun stays up or down.
    """
    lat = check_finite("lat", lat, -90.0, 90.0)
    lon = check_finite("lon", lon, -180.0, 180.0)
    jd0 = _julian_day(date)
    out = []
    for sign in (-1.0, 1.0):  # rise (hour angle before noon), set
        minutes = 720.0 - 4.0 * lon  # first guess: local solar noon
        for _ in range(3):
            dec, eot = _sun(jd0 + minutes / 1440.0)
            phi, d = np.radians(lat), np.radians(dec)
            cos_h = ((np.sin(np.radians(SUN_ALTITUDE_DEG)) - np.sin(phi) * np.sin(d))
                     / (np.cos(phi) * np.cos(d)))
            if not -1.0 <= cos_h <= 1.0:
                minutes = None
                break
            h = np.degrees(np.arccos(cos_h))
            minutes = 720.0 - 4.0 * (lon - sign * h) - float(eot)
        out.append(None if minutes is None else float(minutes))
    return tuple(out)


def hhmm(minutes: float | None) -> str:
    """Minutes after midnight → "HH:MM" (wrapped into the day); None → "—"."""
    if minutes is None:
        return "—"
    m = int(round(minutes)) % 1440
    return f"{m // 60:02d}:{m % 60:02d}"


def monthly_sun_times(lat: float, lon: float, year: int, utc_offset_h: float | None = None):
    """Sunrise, sunset and the critical hours for the 15th of each month of ``year``.

    Returns one dict per month: ``month`` (1–12), ``date``, ``sunrise_utc``/``sunset_utc``
    ("HH:MM"), the same in local standard time when ``utc_offset_h`` is given, and the
    critical hours ``critical_morning``/``critical_evening`` as "HH:MM–HH:MM" in the same clock.
    """
    rows = []
    for month in range(1, 13):
        date = _dt.date(year, month, MID_MONTH_DAY)
        rise, set_ = sun_events_utc_min(lat, lon, date)
        row = {"month": month, "date": date.isoformat(), "sunrise_utc": hhmm(rise),
               "sunset_utc": hhmm(set_)}
        shift = 0.0
        if utc_offset_h is not None:
            shift = 60.0 * utc_offset_h
            row["sunrise_local"] = hhmm(None if rise is None else rise + shift)
            row["sunset_local"] = hhmm(None if set_ is None else set_ + shift)
        crit = 60.0 * CRITICAL_HOURS
        row["critical_morning"] = ("—" if rise is None else
                                   f"{hhmm(rise + shift)}–{hhmm(rise + shift + crit)}")
        row["critical_evening"] = ("—" if set_ is None else
                                   f"{hhmm(set_ + shift - crit)}–{hhmm(set_ + shift)}")
        rows.append(row)
    return rows
