"""A source's track over a measurement (advisor.physics.track), against astropy.

Reference library: astropy (test-only), ICRS -> AltAz with pressure 0 (geometric elevation), sampled
every 15 s over each measurement, and the sun from ``get_sun`` (GCRS) against each source in the
same frame.  Source positions are rounded J2000 coordinates of bright quasars quoted from memory;
any direction serves for a geometric check.  Latitudes 47 N, 19 N and 70 S are places to evaluate at.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from advisor.physics import sky, track

SOURCES = {  # name: (RA J2000 deg, Dec J2000 deg), rounded, from memory
    "3C 279": (194.0465, -5.7893),
    "0716+714": (110.4727, 71.3434),
    "3C 454.3": (343.4906, 16.1482),
    "OJ 287": (133.7036, 20.1085),
    "south": (80.0, -70.0),
}
RA = np.array([v[0] for v in SOURCES.values()])
DEC = np.array([v[1] for v in SOURCES.values()])
DURATION_MIN = 45.0


def _astropy():
    pytest.importorskip("astropy")
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    iers.conf.iers_degraded_accuracy = "warn"


def _astropy_elevations(times, lat_deg, lon_deg):
    """(n_samples, n_times, n_sources) elevations over each measurement, 15 s apart."""
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord
    from astropy.time import Time

    offsets = np.arange(0, DURATION_MIN * 60 + 1, 15).astype("timedelta64[s]")
    grid = (np.asarray(times, dtype="datetime64[s]")[None, :] + offsets[:, None]).ravel()
    site = EarthLocation(lat=lat_deg * u.deg, lon=lon_deg * u.deg, height=0 * u.m)
    out = np.empty((grid.size, len(RA)))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(grid, scale="utc")
        frame = AltAz(obstime=t, location=site, pressure=0 * u.hPa)
        for j in range(len(RA)):
            out[:, j] = SkyCoord(ra=RA[j] * u.deg, dec=DEC[j] * u.deg, frame="icrs").transform_to(frame).alt.deg
    return out.reshape(offsets.size, len(times), len(RA))


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("lat_deg, lon_deg", [(47.12, -114.0), (19.0, 100.0), (-70.0, 20.0)])
def test_elevations_over_the_measurement_match_astropy(lat_deg, lon_deg):
    """Reference library: astropy AltAz sampled every 15 s over 45 min, 40 random starts in 2026
    x 5 sources: start, middle, lowest and highest within 0.015 deg, measured 0.008 (geometric positions; we leave
    out nutation and aberration, < 0.01 deg each, and the 15 s sampling misses < 0.001 deg at a
    culmination)."""
    _astropy()
    rng = np.random.default_rng(int(abs(lat_deg)))
    times = np.datetime64("2026-01-01T00:00", "s") + np.sort(rng.integers(0, 365 * 86400, 40)).astype("timedelta64[s]")
    got = track.source_track(times, RA, DEC, lat_deg, lon_deg, DURATION_MIN, 25.0)
    ref = _astropy_elevations(times, lat_deg, lon_deg)
    middle = ref.shape[0] // 2
    for name, ours, theirs in (
        ("start", got.elevation_deg, ref[0]),
        ("middle", got.mid_elevation_deg, ref[middle]),
        ("lowest", got.lowest_elevation_deg, ref.min(axis=0)),
        ("highest", got.highest_elevation_deg, ref.max(axis=0)),
    ):
        assert ours.shape == (40, len(RA)), name
        assert np.max(np.abs(ours - theirs)) <= 0.015, name


def test_a_transit_during_the_measurement_is_its_highest_point():
    """Meeus eq. 13.6 at H = 0: a source crossing the meridian culminates at 90 - |phi - delta|;
    the ends of the measurement are lower.  (Definition: no reference needed beyond the formula.)"""
    lat, lon = 19.0, 100.0
    ra, dec = SOURCES["OJ 287"]
    times = pd.date_range("2026-02-01", periods=24 * 60, freq="1min", tz="UTC")
    got = track.source_track(times, ra, dec, lat, lon, DURATION_MIN, 25.0)
    el = sky.source_elevation_deg(times, ra, dec, lat, lon)[:, 0]
    peak = int(np.argmax(el))
    start = peak - 20  # the meridian passes 20 min into this measurement
    culmination = 90.0 - abs(lat - sky.precess_j2000_to_date(ra, dec, times[peak])[1])
    assert got.highest_elevation_deg[start, 0] == pytest.approx(culmination, abs=0.01)
    assert got.elevation_deg[start, 0] < culmination - 0.05
    assert got.highest_elevation_deg[start, 0] > max(el[start], el[start + 45])


def test_minutes_above_is_the_skys():
    """The same quantity as advisor.physics.sky.elevation_and_minutes_above (checked there against
    a brute-force grid): equal to float32 resolution."""
    times = pd.date_range("2026-03-01", periods=3000, freq="7min", tz="UTC")
    got = track.source_track(times, RA, DEC, 47.12, -114.0, DURATION_MIN, 25.0)
    el, minutes = sky.elevation_and_minutes_above(times, RA, DEC, 47.12, -114.0, 25.0)
    np.testing.assert_allclose(got.elevation_deg, el, atol=1e-4)
    np.testing.assert_allclose(got.minutes_above, minutes, atol=1e-3)
    order = np.random.default_rng(1).permutation(len(times))  # out of order: the same per time
    shuffled = track.source_track(times[order], RA, DEC, 47.12, -114.0, DURATION_MIN, 25.0)
    for name in (
        "elevation_deg",
        "minutes_above",
        "mid_elevation_deg",
        "lowest_elevation_deg",
        "highest_elevation_deg",
    ):
        np.testing.assert_array_equal(getattr(shuffled, name), getattr(got, name)[order], err_msg=name)


@pytest.mark.filterwarnings("ignore")
def test_closest_approach_to_the_sun_over_the_measurement_matches_astropy():
    """Reference library: astropy get_sun (GCRS) against 3C 279 in GCRS, sampled every minute over
    45 min, at the hour of closest approach in 2026 (the sun passes 0.2-0.3 deg from it in October)
    and at 40 random times: the minimum within 0.02 deg (the accuracy of sky.sun_separation_deg)."""
    _astropy()
    import astropy.units as u
    from astropy.coordinates import GCRS, SkyCoord, get_sun
    from astropy.time import Time

    ra, dec = SOURCES["3C 279"]
    hourly = np.datetime64("2026-01-01T00:00", "s") + np.arange(0, 365 * 24) * np.timedelta64(3600, "s")
    closest = hourly[int(np.argmin(sky.sun_separation_deg(hourly, ra, dec)[:, 0]))]
    rng = np.random.default_rng(3)
    starts = np.concatenate([[closest - np.timedelta64(20, "m")], hourly[rng.integers(0, hourly.size, 40)]]).astype(
        "datetime64[s]"
    )
    got = track.sun_separation_over_deg(starts, ra, dec, DURATION_MIN)[:, 0]
    assert got[0] < 1.0
    offsets = np.arange(0, 46).astype("timedelta64[m]")
    grid = (starts[None, :] + offsets[:, None]).ravel()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(grid, scale="utc")
        src = SkyCoord(ra=ra * u.deg, dec=dec * u.deg, frame="icrs").transform_to(GCRS(obstime=t))
        ref = get_sun(t).separation(src).deg.reshape(offsets.size, starts.size).min(axis=0)
    assert np.max(np.abs(got - ref)) <= 0.02


def test_closest_approach_interpolation_against_minute_sampling():
    """The hourly nodes and the linear interpolation between them against the separation itself
    (advisor.physics.sky.sun_separation_deg, checked against astropy) sampled every minute over each
    measurement: 3000 starts across 2026 and the day 3C 279 passes the Sun, within 0.002 deg; a
    start's value does not depend on the other starts."""
    ra, dec = RA, DEC
    rng = np.random.default_rng(11)
    base = np.datetime64("2026-01-01T00:00", "s")
    random = base + rng.integers(0, 365 * 86400, 3000).astype("timedelta64[s]")
    october = np.datetime64("2026-10-08T12:00", "s") + np.arange(0, 86400, 97).astype("timedelta64[s]")
    for starts in (np.sort(random), october):
        got = track.sun_separation_over_deg(starts, ra, dec, DURATION_MIN)
        sampled = np.min([sky.sun_separation_deg(starts + np.timedelta64(k, "m"), ra, dec) for k in range(46)], axis=0)
        assert np.max(np.abs(got - sampled)) <= 0.002
    one = track.sun_separation_over_deg(october[500], ra, dec, DURATION_MIN)
    np.testing.assert_allclose(one[0], track.sun_separation_over_deg(october, ra, dec, DURATION_MIN)[500], atol=1e-6)
    times = np.array(["2026-06-01T00:00", "NaT"], dtype="datetime64[ns]")
    assert np.isnan(track.sun_separation_over_deg(times, ra, dec, DURATION_MIN)[1]).all()


def test_bad_duration_is_refused():
    with pytest.raises(ValueError):
        track.source_track(np.datetime64("2026-01-01T00:00"), 0.0, 0.0, 0.0, 0.0, -1.0, 25.0)
    with pytest.raises(ValueError):
        track.sun_separation_over_deg(np.datetime64("2026-01-01T00:00"), 0.0, 0.0, -1.0)
