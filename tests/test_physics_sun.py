"""Tests for advisor.physics.sun: solar position and hours since sunset/sunrise.

Sources are named beside each check.  The demo site (lat 47.12, lon -114.0) is invented; it is
only a place to evaluate at, never a source of expected values.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from advisor.physics import sun

SITE_LAT_DEG = 47.12
SITE_LON_DEG = -114.0
SITE_HEIGHT_M = 1050.0


def _astropy():
    """Import astropy configured for offline use (bundled IERS tables, no downloads)."""
    pytest.importorskip("astropy")
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    iers.conf.iers_degraded_accuracy = "warn"
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time

    return u, AltAz, EarthLocation, get_sun, Time


def _angle_diff_deg(a, b):
    return np.abs(np.mod(np.asarray(a) - np.asarray(b) + 180.0, 360.0) - 180.0)


# ---------------------------------------------------------------------------------------------
# position
# ---------------------------------------------------------------------------------------------
def test_nrel_spa_worked_example():
    """Reda & Andreas (2004), NREL/TP-560-34302, worked example:
    2003-10-17 12:30:30 at UTC-7, 39.742476 N, 105.1786 W, 820 hPa, 11 C ->
    topocentric zenith 50.11162 deg, azimuth 194.34024 deg.  A NOAA/Meeus-level algorithm
    agrees to ~0.01 deg; we assert 0.02 deg."""
    when = pd.Timestamp("2003-10-17 12:30:30", tz="Etc/GMT+7")  # POSIX sign: GMT+7 is UTC-7
    elevation_deg, azimuth_deg = sun.solar_position(
        when, 39.742476, -105.1786, refraction=True, pressure_hpa=820.0, temp_c=11.0
    )
    assert isinstance(elevation_deg, float)
    assert 90.0 - elevation_deg == pytest.approx(50.11162, abs=0.02)
    assert azimuth_deg == pytest.approx(194.34024, abs=0.02)


def test_meeus_example_25a_apparent_ra_dec():
    """Meeus, Astronomical Algorithms 2nd ed., example 25.a (values from memory):
    1992 Oct 13.0 TD -> apparent RA 198.38083 deg, Dec -7.78507 deg, R = 0.99766 au."""
    days = 2448908.5 - 2451545.0
    ra_deg, dec_deg, radius_au, _eqeq = sun._sun_equatorial(np.array(days))
    assert float(ra_deg) == pytest.approx(198.38083, abs=2e-5)
    assert float(dec_deg) == pytest.approx(-7.78507, abs=2e-5)
    assert float(radius_au) == pytest.approx(0.99766, abs=1e-5)


@pytest.mark.filterwarnings("ignore")
def test_position_matches_astropy_over_a_decade():
    """Reference library: astropy get_sun -> AltAz (pressure 0: no refraction), 200 times
    2020-2030 at the demo site; elevation within 0.02 deg, azimuth within 0.05 deg where the
    sun is above -10 deg and not near the zenith (azimuth ill-defined there)."""
    u, AltAz, EarthLocation, get_sun, Time = _astropy()
    rng = np.random.default_rng(7)
    start = np.datetime64("2020-01-01T00:00:00", "s")
    seconds = np.sort(rng.uniform(0, 11 * 365.25 * 86400, 200)).astype("int64")
    times = start + seconds.astype("timedelta64[s]")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(times, scale="utc")
        site = EarthLocation(lat=SITE_LAT_DEG * u.deg, lon=SITE_LON_DEG * u.deg, height=SITE_HEIGHT_M * u.m)
        ref = get_sun(t).transform_to(AltAz(obstime=t, location=site, pressure=0 * u.hPa))
    ref_el, ref_az = ref.alt.deg, ref.az.deg

    elevation_deg, azimuth_deg = sun.solar_position(times, SITE_LAT_DEG, SITE_LON_DEG, refraction=False)
    assert elevation_deg.shape == (200,)
    use = (ref_el > -10.0) & (ref_el < 85.0)
    assert use.sum() > 50
    assert np.max(np.abs(elevation_deg - ref_el)[use]) <= 0.02
    assert np.max(_angle_diff_deg(azimuth_deg, ref_az)[use]) <= 0.05


def test_refraction_lifts_the_low_sun_and_scales_with_pressure():
    """Meeus ch. 16: refraction ~ 0.5 deg at the horizon, ~1' at 45 deg, proportional to
    pressure (factor P/1010 hPa)."""
    times = np.array(["2024-03-20T14:00", "2024-03-20T19:00", "2024-03-21T01:30"], dtype="datetime64[m]")
    geometric, _ = sun.solar_position(times, SITE_LAT_DEG, SITE_LON_DEG, refraction=False)
    apparent, _ = sun.solar_position(times, SITE_LAT_DEG, SITE_LON_DEG)
    thin, _ = sun.solar_position(times, SITE_LAT_DEG, SITE_LON_DEG, pressure_hpa=505.0)
    lift = apparent - geometric
    assert np.all(lift > 0.0)
    np.testing.assert_allclose(thin - geometric, lift / 2.0, rtol=1e-9)
    assert sun._refraction_deg(0.0) == pytest.approx(1735.0 / 3600.0)  # ~29' at the horizon
    assert sun._refraction_deg(45.0) == pytest.approx(58.0 / 3600.0, rel=0.02)  # ~1' at 45 deg


def test_time_inputs_agree_and_keep_shape():
    """Same instants as numpy datetime64, naive pandas index, tz-aware local index and Series."""
    local = pd.date_range("2024-07-01 06:00", periods=6, freq="3h", tz="America/Denver")
    as_numpy = local.tz_convert("UTC").tz_localize(None).to_numpy()
    el_np, az_np = sun.solar_position(as_numpy, SITE_LAT_DEG, SITE_LON_DEG)
    for variant in (local, pd.Series(local), local.tz_convert("UTC").tz_localize(None)):
        el, az = sun.solar_position(variant, SITE_LAT_DEG, SITE_LON_DEG)
        np.testing.assert_allclose(el, el_np)
        np.testing.assert_allclose(az, az_np)
    grid = as_numpy.reshape(2, 3)
    el_grid, _ = sun.solar_position(grid, SITE_LAT_DEG, SITE_LON_DEG)
    assert el_grid.shape == (2, 3)
    np.testing.assert_allclose(el_grid.ravel(), el_np)
    with_nat = np.array(["2024-07-01T12:00", "NaT"], dtype="datetime64[ns]")
    el_nat, az_nat = sun.solar_position(with_nat, SITE_LAT_DEG, SITE_LON_DEG)
    assert np.isfinite(el_nat[0]) and np.isnan(el_nat[1]) and np.isnan(az_nat[1])


def test_site_arrays_broadcast_elementwise():
    """Vectorised over latitude/longitude as well as time: equals one call per site."""
    times = np.array(["2024-01-15T18:00", "2024-06-15T18:00", "2024-09-15T18:00"], dtype="datetime64[s]")
    lats = np.array([-33.9, 0.0, 60.0])
    lons = np.array([18.4, -78.5, 10.7])
    el, az = sun.solar_position(times, lats, lons)
    for i in range(3):
        e1, a1 = sun.solar_position(times[i], lats[i], lons[i])
        assert el[i] == pytest.approx(e1) and az[i] == pytest.approx(a1)
    since = sun.hours_since_sunset(times, lats, lons)
    for i in range(3):
        assert since[i] == pytest.approx(sun.hours_since_sunset(times[i], lats[i], lons[i]))


# ---------------------------------------------------------------------------------------------
# sunset / sunrise
# ---------------------------------------------------------------------------------------------
def _brute_force_hours_since(times, lat_deg, lon_deg, falling):
    """Last crossing of -0.833 deg found on a 1-minute grid of solar_position (geometric)."""
    minutes = np.arange(-2 * 1440, 1)  # the preceding two days, 1-minute steps
    grid = times[:, None] + minutes[None, :].astype("timedelta64[m]")
    el, _ = sun.solar_position(grid, lat_deg, lon_deg, refraction=False)
    above = el > sun.SUNRISE_SUNSET_ALTITUDE_DEG
    crossing = (above[:, :-1] & ~above[:, 1:]) if falling else (~above[:, :-1] & above[:, 1:])
    out = np.full(len(times), np.nan)
    for i in range(len(times)):  # test-side reference, a handful of rows
        idx = np.nonzero(crossing[i])[0]
        if idx.size:
            j = idx[-1]  # crossing between minute j and j+1: interpolate linearly
            e0, e1 = el[i, j], el[i, j + 1]
            frac = (sun.SUNRISE_SUNSET_ALTITUDE_DEG - e0) / (e1 - e0)
            out[i] = -(minutes[j] + frac) / 60.0
    return out


@pytest.mark.parametrize(
    "lat_deg, lon_deg",
    [(SITE_LAT_DEG, SITE_LON_DEG), (0.0, 36.8), (-33.9, 151.2), (60.2, 24.9)],
)
def test_hours_since_sunset_and_sunrise_match_brute_force_grid(lat_deg, lon_deg):
    """Check: a brute-force 1-minute search of the elevation crossing -0.833 deg (the standard
    altitude of Meeus ch. 15) with this module's own solar_position; within 2 minutes."""
    rng = np.random.default_rng(11)
    start = np.datetime64("2020-01-01T00:00", "m")
    times = start + np.sort(rng.integers(0, 11 * 525960, 24)).astype("timedelta64[m]")
    for func, falling in ((sun.hours_since_sunset, True), (sun.hours_since_sunrise, False)):
        got = func(times, lat_deg, lon_deg)
        want = _brute_force_hours_since(times, lat_deg, lon_deg, falling)
        assert got.shape == times.shape
        assert np.all(np.isfinite(want))
        np.testing.assert_allclose(got, want, atol=2.0 / 60.0)
        assert np.all((got >= 0.0) & (got < 24.5))


@pytest.mark.filterwarnings("ignore")
def test_sunset_matches_astropy_crossing():
    """Reference library: the time astropy's sun (AltAz, no refraction) crosses -0.833 deg,
    found on a 1-minute grid around the predicted sunset; within 2 minutes.
    (No published sunset time is used: none is known reliably from memory.)"""
    u, AltAz, EarthLocation, get_sun, Time = _astropy()
    evening = np.array(
        ["2021-03-20T05:00", "2023-06-21T07:00", "2025-09-23T06:00", "2027-12-21T05:00"], dtype="datetime64[m]"
    )  # evenings at the demo site (22:00-01:00 local), some hours after sunset
    since = sun.hours_since_sunset(evening, SITE_LAT_DEG, SITE_LON_DEG)
    predicted = evening - np.round(since * 60.0).astype("int64").astype("timedelta64[m]")
    offsets = np.arange(-60, 61)
    grid = (predicted[:, None] + offsets[None, :].astype("timedelta64[m]")).ravel()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(grid, scale="utc")
        site = EarthLocation(lat=SITE_LAT_DEG * u.deg, lon=SITE_LON_DEG * u.deg, height=SITE_HEIGHT_M * u.m)
        alt = get_sun(t).transform_to(AltAz(obstime=t, location=site, pressure=0 * u.hPa)).alt.deg
    alt = alt.reshape(len(evening), len(offsets))
    for i in range(len(evening)):
        above = alt[i] > sun.SUNRISE_SUNSET_ALTITUDE_DEG
        j = np.nonzero(above[:-1] & ~above[1:])[0]
        assert j.size == 1
        ref_minute = offsets[j[0]] + 0.5
        assert abs(ref_minute) <= 2.0, (evening[i], ref_minute)


def test_polar_day_and_night_with_a_short_lookback_give_nan():
    """Geometry (Meeus ch. 15): at 78 N the sun's lowest elevation at the June solstice is
    dec - (90 - lat) = 23.4 - 12 = +11 deg (no sunset for weeks), and at the December
    solstice its highest is -11 deg (no sunrise); with a 2-day lookback there is no event to
    find -> NaN.  The default lookback (a year) finds the events weeks back (see
    test_physics_sun_polar.py for those times against astropy)."""
    june = np.array(["2024-06-21T12:00"], dtype="datetime64[m]")
    december = np.array(["2024-12-21T12:00"], dtype="datetime64[m]")
    assert np.isnan(sun.hours_since_sunset(june, 78.0, 15.0, max_lookback_days=2.0)).all()
    assert np.isnan(sun.hours_since_sunrise(december, 78.0, 15.0, max_lookback_days=2.0)).all()
    assert np.isnan(sun.hours_since_sunset(december, 78.0, 15.0, max_lookback_days=2.0)).all()
    assert (sun.hours_since_sunset(june, 78.0, 15.0) > 24.0 * 30).all()  # weeks of midnight sun
    assert (sun.hours_since_sunrise(december, 78.0, 15.0) > 24.0 * 30).all()  # weeks of polar night
    # the site itself always has both events
    assert np.isfinite(sun.hours_since_sunset(june, SITE_LAT_DEG, SITE_LON_DEG, max_lookback_days=2.0)).all()
    with pytest.raises(ValueError):
        sun.hours_since_sunset(june, 78.0, 15.0, max_lookback_days=0.0)


def test_hours_since_sunset_types_and_continuity():
    """Scalar in -> float out; NaT -> NaN; within one night the value grows 1 h per hour and
    resets to ~0 just after sunset (the most recent event is picked)."""
    value = sun.hours_since_sunset(pd.Timestamp("2024-01-10 12:00", tz="UTC"), SITE_LAT_DEG, SITE_LON_DEG)
    assert isinstance(value, float)
    night = pd.date_range("2024-01-11 01:00", periods=10, freq="1h", tz="UTC")  # 18:00-03:00 local
    hours = sun.hours_since_sunset(night, SITE_LAT_DEG, SITE_LON_DEG)
    np.testing.assert_allclose(np.diff(hours), 1.0, atol=1e-3)
    with_nat = np.array(["2024-01-11T03:00", "NaT"], dtype="datetime64[ns]")
    out = sun.hours_since_sunset(with_nat, SITE_LAT_DEG, SITE_LON_DEG)
    assert np.isfinite(out[0]) and np.isnan(out[1])
    # one minute before and after the predicted sunset: large vs ~0
    sunset = np.datetime64("2024-01-11T03:00", "s") - np.timedelta64(int(round(out[0] * 3600)), "s")
    pair = np.array([sunset - np.timedelta64(60, "s"), sunset + np.timedelta64(60, "s")])
    before, after = sun.hours_since_sunset(pair, SITE_LAT_DEG, SITE_LON_DEG)
    assert before > 23.0 and after == pytest.approx(1.0 / 60.0, abs=1e-3)


def test_long_series_use_the_hourly_grid_without_losing_accuracy():
    """Self-consistency of our two code paths (no external source needed): a year at 10-minute
    steps goes through the interpolated hourly grid; it must match the direct evaluation of
    the same Meeus ch. 25 expressions to well within their own ~0.01 deg accuracy."""
    from advisor.physics import sun

    times = pd.date_range("2026-01-01", "2027-01-01", freq="10min", tz="UTC")
    days = sun._days_since_j2000(times)
    direct = sun._sun_equatorial(days)
    fast = sun._sun_equatorial_fast(days)
    ra_diff = np.abs((fast[0] - direct[0] + 180.0) % 360.0 - 180.0)
    assert ra_diff.max() < 1e-5 and np.abs(fast[1] - direct[1]).max() < 1e-5
    assert np.abs(fast[2] - direct[2]).max() < 1e-8  # AU; parallax changes by < 1e-7 arcsec
