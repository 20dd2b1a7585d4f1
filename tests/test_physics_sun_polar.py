"""Sunrise, sunset and day/night through polar day and polar night, against astropy.

Reference library: astropy (test-only), the sun's topocentric elevation without refraction
(``get_sun`` -> ``AltAz`` with pressure 0), whose crossings of the standard altitude -0.833 deg
(Meeus, *Astronomical Algorithms*, 2nd ed., ch. 15) are found here by bisection.  Latitudes
+-70 and +-78 deg have weeks of midnight sun and of polar night; 47.12 N, 114 W is the
invented demo site (a place to evaluate at, never a source of expected values).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from advisor.physics import sun

H0_DEG = sun.SUNRISE_SUNSET_ALTITUDE_DEG
#: Agreement of each event time with astropy's crossing.  Measured over 2026 at the five sites
#: below: at most 0.6 min (the sun then moves < 0.01 deg, the ephemeris' own accuracy).
EVENT_TOLERANCE_MIN = 1.0


def _astropy_elevation_deg(times, lat_deg, lon_deg):
    pytest.importorskip("astropy")
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    iers.conf.iers_degraded_accuracy = "warn"
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(np.asarray(times, dtype="datetime64[ms]"), scale="utc")
        site = EarthLocation(lat=lat_deg * u.deg, lon=lon_deg * u.deg, height=0 * u.m)
        return get_sun(t).transform_to(AltAz(obstime=t, location=site, pressure=0 * u.hPa)).alt.deg


def _astropy_crossings(guess, rising, lat_deg, lon_deg, half_width_s=180):
    """Astropy's crossing of -0.833 deg nearest each guess, by bisection in guess +- half_width.

    Returns (times, bracketed): ``bracketed`` is False where astropy's sun does not cross in
    the bracket in the expected direction (then ``times`` is meaningless).
    """
    lo = np.asarray(guess, dtype="datetime64[ms]") - np.timedelta64(half_width_s, "s")
    hi = np.asarray(guess, dtype="datetime64[ms]") + np.timedelta64(half_width_s, "s")
    ends = _astropy_elevation_deg(np.concatenate([lo, hi]), lat_deg, lon_deg) > H0_DEG
    bracketed = (ends[: lo.size] != ends[lo.size :]) & (ends[lo.size :] == rising)
    for _ in range(9):  # 360 s / 2**9 = 0.7 s
        mid = lo + (hi - lo) // 2
        crossed = (_astropy_elevation_deg(mid, lat_deg, lon_deg) > H0_DEG) == rising
        hi, lo = np.where(crossed, mid, hi), np.where(crossed, lo, mid)
    return lo + (hi - lo) // 2, bracketed


def _events_from_public_api(grid, lat_deg, lon_deg):
    """Every sunrise and sunset of the span, read back from hours_since_* on a grid."""
    out = {}
    for rising, func in ((True, sun.hours_since_sunrise), (False, sun.hours_since_sunset)):
        hours = func(grid, lat_deg, lon_deg)
        assert np.all(np.isfinite(hours))
        events = grid - np.round(hours * 3.6e6).astype("int64").astype("timedelta64[ms]")
        out[rising] = np.unique(events)  # includes the last event before the grid starts
    return out


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize(
    "lat_deg, lon_deg",
    [(70.0, -114.0), (-70.0, 20.0), (78.0, 15.0), (-78.0, 166.0), (47.12, -114.0)],
)
def test_a_year_of_sunrises_sunsets_and_day_state_match_astropy(lat_deg, lon_deg):
    """Over 2026 on a 3-hour grid:
    - every crossing astropy's elevation shows between two grid points is one of ours (no
      missed event, in particular the first sunset after the midnight sun and the first sunrise
      after the polar night), and none of ours is spurious: each is bracketed by astropy's
      crossing within +-3 min and agrees with it within EVENT_TOLERANCE_MIN (1 min);
    - sun_state says up/down as astropy's elevation does (away from the threshold), and
      calls a local solar day polar day/night exactly when the sun stays above/below
      -0.833 deg for that whole local solar day (no crossing in it)."""
    grid = np.datetime64("2026-01-01T00:00", "ms") + np.arange(0, 365 * 24, 3) * np.timedelta64(3600, "s")
    ours = _events_from_public_api(grid, lat_deg, lon_deg)
    ref_el = _astropy_elevation_deg(grid, lat_deg, lon_deg)
    above = ref_el > H0_DEG

    for rising in (True, False):
        brackets = np.flatnonzero((~above[:-1] & above[1:]) if rising else (above[:-1] & ~above[1:]))
        assert brackets.size > 100 if abs(lat_deg) < 75 else brackets.size > 50
        slack = np.timedelta64(2, "m")
        lo, hi = grid[brackets][:, None] - slack, grid[brackets + 1][:, None] + slack
        inside = (ours[rising][None, :] >= lo) & (ours[rising][None, :] <= hi)
        assert np.all(inside.sum(axis=1) == 1), "astropy sees a crossing we miss (or we see two)"
        ref, bracketed = _astropy_crossings(ours[rising], rising, lat_deg, lon_deg)
        assert bracketed.all(), ours[rising][~bracketed]
        error_min = np.abs((ours[rising] - ref).astype(float)) / 60000.0
        assert error_min.max() <= EVENT_TOLERANCE_MIN, (ours[rising][np.argmax(error_min)], error_min.max())

    state = sun.sun_state(grid, lat_deg, lon_deg)
    assert state.dtype == np.int8 and set(np.unique(state)) <= {-2, -1, 1, 2}
    clear = np.abs(ref_el - H0_DEG) > 0.05
    np.testing.assert_array_equal((state > 0)[clear], above[clear])

    # Polar day / night: no sunrise or sunset in the local solar day (lower transit to lower
    # transit, i.e. local mean midnight +- the equation of time, < 17 min).  The events were
    # checked against astropy above; days with an event within 20 min of midnight are skipped.
    def solar_day(times):
        days = (times - np.datetime64("2000-01-01T12:00", "ms")).astype(float) / 8.64e7 + lon_deg / 360.0 + 0.5
        return np.floor(days), np.mod(days, 1.0)

    events = np.concatenate([ours[True], ours[False]])
    event_day, event_frac = solar_day(events)
    near_midnight = np.unique(event_day[(event_frac < 20 / 1440) | (event_frac > 1 - 20 / 1440)])
    grid_day, _ = solar_day(grid)
    checked = (
        ~np.isin(grid_day, near_midnight)
        & ~np.isin(grid_day + 1, near_midnight)
        & ~np.isin(grid_day - 1, near_midnight)
    )
    no_event_today = ~np.isin(grid_day, event_day)
    assert checked.sum() > 0.8 * grid.size
    np.testing.assert_array_equal((np.abs(state) == 2)[checked], no_event_today[checked])
    if abs(lat_deg) > 66.6:
        assert (state == sun.SUN_POLAR_DAY).any() and (state == sun.SUN_POLAR_NIGHT).any()
    else:
        assert np.all(np.abs(state) == 1)

    # night by the state <=> the last event was a sunset (one table behind both)
    since_set, since_rise = (
        sun.hours_since_sunset(grid, lat_deg, lon_deg),
        sun.hours_since_sunrise(grid, lat_deg, lon_deg),
    )
    np.testing.assert_array_equal(state < 0, since_set < since_rise)


@pytest.mark.filterwarnings("ignore")
def test_polar_sunrise_at_70_north_in_may():
    """The case of the open issue: 70 N, 114 W on 2026-05-16T10:00Z, a few days before the
    midnight sun, the sun rose about 2.2 h earlier after a night of about half an hour.
    Reference: astropy's crossings of -0.833 deg found by bisection (1-min tolerance)."""
    when = np.datetime64("2026-05-16T10:00", "ms")
    since_rise = sun.hours_since_sunrise(when, 70.0, -114.0)
    since_set = sun.hours_since_sunset(when, 70.0, -114.0)
    assert isinstance(since_rise, float) and 2.0 < since_rise < 2.5
    assert since_set > since_rise
    assert sun.sun_state(when, 70.0, -114.0) == sun.SUN_UP
    for hours, rising in ((since_rise, True), (since_set, False)):
        ours = when - np.timedelta64(round(hours * 3.6e6), "ms")
        ref, bracketed = _astropy_crossings(np.array([ours]), rising, 70.0, -114.0)
        assert bracketed.all()
        assert abs((ours - ref[0]).astype(float)) / 60000.0 <= EVENT_TOLERANCE_MIN


def test_sun_state_scalar_nat_and_shapes():
    """Types and missing values: scalar in -> int out, NaT or NaN site -> SUN_UNKNOWN (0),
    never a day or a night; arrays keep their shape."""
    assert isinstance(sun.sun_state(np.datetime64("2026-06-21T12:00"), 78.0, 15.0), int)
    assert sun.sun_state(np.datetime64("2026-06-21T12:00"), 78.0, 15.0) == sun.SUN_POLAR_DAY
    assert sun.sun_state(np.datetime64("2026-12-21T12:00"), 78.0, 15.0) == sun.SUN_POLAR_NIGHT
    times = np.array([["2026-01-16T04:00", "NaT"], ["2026-01-16T20:00", "2026-01-16T20:00"]], dtype="datetime64[ns]")
    state = sun.sun_state(times, np.array([47.12, 47.12]), np.array([-114.0, np.nan]))
    assert state.shape == (2, 2)
    np.testing.assert_array_equal(state, [[sun.SUN_DOWN, sun.SUN_UNKNOWN], [sun.SUN_UP, sun.SUN_UNKNOWN]])
    hours = sun.hours_since_sunset(times, 47.12, np.array([-114.0, np.nan]))
    assert np.isfinite(hours[0, 0]) and np.isnan(hours[0, 1]) and np.isnan(hours[1, 1])
