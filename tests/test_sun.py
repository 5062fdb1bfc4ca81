"""Sunrise and sunset (coverage/sun.py) against astropy's solar ephemeris (a reference library
from the package index, used by the tests only)."""

import datetime as dt
import warnings

import numpy as np
import pytest

from mwreach.coverage.sun import SUN_ALTITUDE_DEG, hhmm, monthly_sun_times, sun_events_utc_min

astropy = pytest.importorskip("astropy")
from astropy import units as u  # noqa: E402
from astropy.coordinates import AltAz, EarthLocation, get_body  # noqa: E402
from astropy.time import Time  # noqa: E402
from astropy.utils import iers  # noqa: E402
from astropy.utils.exceptions import AstropyWarning  # noqa: E402

iers.conf.auto_download = False  # CI has no network beyond the package index
iers.conf.iers_degraded_accuracy = "ignore"  # UT1−UTC unknown for future dates: < 1 s error
iers.conf.auto_max_age = None  # the bundled table may be months old; no download to refresh it


def astropy_events_min(lat, lon, dates, guesses_min):
    """For each (date, guess), the minute after 0h UTC of the date where astropy's apparent
    solar altitude, without refraction, crosses −0.833°: sampled each minute ±20 min around the
    guess (all in one call), the crossing interpolated linearly (the altitude is straight to
    1e-4° over a minute near the horizon)."""
    site = EarthLocation(lat=lat * u.deg, lon=lon * u.deg, height=0 * u.m)
    offsets = np.arange(-20.0, 20.0 + 1e-9, 1.0)
    minutes = np.array(guesses_min)[:, None] + offsets[None, :]
    t0 = Time([dt.datetime(d.year, d.month, d.day) for d in dates], scale="utc")
    times = t0[:, None] + minutes * u.min
    with warnings.catch_warnings():  # polar motion beyond the bundled IERS table: arcsec level
        warnings.simplefilter("ignore", AstropyWarning)
        alt = get_body("sun", times, site).transform_to(
            AltAz(obstime=times, location=site, pressure=0 * u.hPa)).alt.deg
    out = []
    for row_min, row_alt in zip(minutes, alt):
        f = row_alt - SUN_ALTITUDE_DEG
        k = np.flatnonzero(np.sign(f[:-1]) != np.sign(f[1:]))
        assert k.size == 1, "one crossing in the window"
        i = int(k[0])
        out.append(row_min[i] - f[i] * (row_min[i + 1] - row_min[i]) / (f[i + 1] - f[i]))
    return np.array(out)


@pytest.mark.parametrize("lat, lon", [(38.40, -46.20), (52.0, 10.0), (-33.9, 151.2),
                                      (60.0, -150.0)])
def test_sunrise_and_sunset_within_a_minute_of_astropy(lat, lon):
    dates = [dt.date(2027, month, 15) for month in range(1, 13)] * 2
    mine = np.array([sun_events_utc_min(lat, lon, d)[k] for k in (0, 1) for d in dates[:12]])
    ref = astropy_events_min(lat, lon, dates, mine)
    # minutes: the issue asks for one minute; measured at most 3 s at these four sites
    assert np.max(np.abs(mine - ref)) < 0.25


def test_polar_night_and_day_have_no_events():
    assert sun_events_utc_min(80.0, 0.0, dt.date(2027, 12, 15)) == (None, None)
    assert sun_events_utc_min(80.0, 0.0, dt.date(2027, 6, 15)) == (None, None)


def test_monthly_table_local_time_and_critical_hours():
    rows = monthly_sun_times(38.40, -46.20, 2027, utc_offset_h=-3.0)
    assert [r["month"] for r in rows] == list(range(1, 13))
    r = rows[5]  # June
    rise, set_ = sun_events_utc_min(38.40, -46.20, dt.date(2027, 6, 15))
    assert r["sunrise_local"] == hhmm(rise - 180.0)
    # 47 CFR 73.187(a) (read): two hours after sunrise and two before sunset
    assert r["critical_morning"] == f"{hhmm(rise - 180)}–{hhmm(rise - 60)}"
    assert r["critical_evening"] == f"{hhmm(set_ - 300)}–{hhmm(set_ - 180)}"
    # days are longer in June than in December at 38° N
    dec = sun_events_utc_min(38.40, -46.20, dt.date(2027, 12, 15))
    assert set_ - rise > dec[1] - dec[0] + 4 * 60  # about 5 h longer at 38° N; 4 h is safe


def test_hhmm_wraps_and_shows_missing():
    assert hhmm(-30.0) == "23:30" and hhmm(1445.0) == "00:05" and hhmm(None) == "—"
