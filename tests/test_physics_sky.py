"""Tests for advisor.physics.sky: sidereal time, precession, source elevation and visibility.

The demo site (lat 47.120, lon -114.000, 1050 m) is invented; it only sets where we evaluate.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from advisor.physics import sky

SITE_LAT_DEG = 47.120
SITE_LON_DEG = -114.000
SITE_HEIGHT_M = 1050.0


def _hms_deg(h, m, s):
    return 15.0 * (h + m / 60.0 + s / 3600.0)


def _dms_deg(d, m, s):
    """Degrees, minutes, seconds of a positive declination."""
    return d + m / 60.0 + s / 3600.0


# Public catalogue positions (J2000), as given in the brief; the third is approximately
# S5 0716+714 (from memory; the exact value does not matter: both sides use the same input).
SOURCES_RA_DEG = np.array([_hms_deg(12, 29, 6.7), _hms_deg(22, 53, 57.7), _hms_deg(7, 21, 53.4)])
SOURCES_DEC_DEG = np.array([_dms_deg(2, 3, 9.0), _dms_deg(16, 8, 54.0), _dms_deg(71, 20, 36.0)])


def _astropy():
    """Import astropy configured for offline use (bundled IERS tables, no downloads)."""
    pytest.importorskip("astropy")
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    iers.conf.iers_degraded_accuracy = "warn"
    import astropy.units as u
    from astropy.coordinates import FK5, ICRS, AltAz, EarthLocation
    from astropy.time import Time

    return u, FK5, ICRS, AltAz, EarthLocation, Time


def _random_times(n, seed):
    rng = np.random.default_rng(seed)
    start = np.datetime64("2020-01-01T00:00:00", "s")
    return start + np.sort(rng.integers(0, 11 * 365 * 86400, n)).astype("timedelta64[s]")


def test_gmst_meeus_example_12a():
    """Meeus, Astronomical Algorithms 2nd ed., example 12.a: 1987 April 10, 0h UT ->
    GMST = 13h10m46.3668s."""
    assert sky.gmst_deg(np.datetime64("1987-04-10T00:00:00")) == pytest.approx(_hms_deg(13, 10, 46.3668), abs=1e-6)


def test_gmst_meeus_example_12b():
    """Meeus, Astronomical Algorithms 2nd ed., example 12.b: 1987 April 10, 19h21m00s UT ->
    GMST = 128.7378734 deg."""
    assert sky.gmst_deg(pd.Timestamp("1987-04-10 19:21:00", tz="UTC")) == pytest.approx(128.7378734, abs=1e-6)


def test_local_sidereal_time_adds_east_longitude():
    """Meeus ch. 12: local sidereal time = GMST + east longitude (mod 360); sidereal time gains
    ~3m56s per solar day (360.9856 deg/day)."""
    times = pd.date_range("2024-05-01", periods=4, freq="6h", tz="UTC")
    gmst = sky.gmst_deg(times)
    np.testing.assert_allclose(sky.local_sidereal_time_deg(times, SITE_LON_DEG), np.mod(gmst + SITE_LON_DEG, 360.0))
    one_day = sky.gmst_deg(np.datetime64("2024-05-02T00:00")) - sky.gmst_deg(np.datetime64("2024-05-01T00:00"))
    assert np.mod(one_day, 360.0) == pytest.approx(0.98564736629, abs=1e-8)


def test_precession_meeus_example_21b_theta_persei():
    """Meeus, Astronomical Algorithms 2nd ed., example 21.b (values from memory): theta Persei,
    J2000 RA 2h44m11.986s, Dec +49d13m42.48s, proper motion +0.03425 s/yr, -0.0895"/yr,
    to 2028 Nov 13.19 TD (28.86705 yr) -> RA 2h46m11.331s, Dec +49d20m54.54s.
    Proper motion is applied here (the function does not take it); TT-UTC is negligible."""
    years = 28.86705
    ra0_deg = _hms_deg(2, 44, 11.986 + 0.03425 * years)
    dec0_deg = _dms_deg(49, 13, 42.48 - 0.0895 * years)
    when = np.datetime64("2028-11-13T04:33:36")  # 0.19 d after 0h
    ra_deg, dec_deg = sky.precess_j2000_to_date(ra0_deg, dec0_deg, when)
    assert ra_deg == pytest.approx(_hms_deg(2, 46, 11.331), abs=15.0 * 0.002 / 3600.0)  # 0.002 s
    assert dec_deg == pytest.approx(_dms_deg(49, 20, 54.54), abs=0.02 / 3600.0)  # 0.02"


@pytest.mark.filterwarnings("ignore")
def test_precession_matches_astropy_fk5():
    """Reference library: astropy FK5(equinox=J2000) -> FK5(equinox=date) (IAU 1976
    precession, same theory as Meeus ch. 21) for the sources and a pole-ish star; 0.1"."""
    u, FK5, _ICRS, _AltAz, _EarthLocation, Time = _astropy()
    ra = np.append(SOURCES_RA_DEG, 37.95)
    dec = np.append(SOURCES_DEC_DEG, 89.26)
    times = _random_times(5, seed=3)
    got_ra, got_dec = sky.precess_j2000_to_date(ra[None, :], dec[None, :], times[:, None])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i, when in enumerate(times):
            eq = Time(when, scale="utc")
            ref = FK5(ra=ra * u.deg, dec=dec * u.deg, equinox="J2000").transform_to(FK5(equinox=eq))
            dra = np.mod(got_ra[i] - ref.ra.deg + 180.0, 360.0) - 180.0
            assert np.max(np.abs(dra * np.cos(np.radians(dec)))) < 0.1 / 3600.0
            assert np.max(np.abs(got_dec[i] - ref.dec.deg)) < 0.1 / 3600.0


@pytest.mark.filterwarnings("ignore")
def test_source_elevation_matches_astropy_altaz():
    """Reference library: astropy ICRS -> AltAz (pressure 0: no refraction) for 3C 273,
    3C 454.3 and a source at Dec +71, 100 times 2020-2030 at the demo site; within 0.05 deg
    (nutation and aberration, ignored here, are < 0.01 deg)."""
    u, _FK5, ICRS, AltAz, EarthLocation, Time = _astropy()
    times = _random_times(100, seed=5)
    elevation_deg, azimuth_deg = sky.source_altaz_deg(
        times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG
    )
    assert elevation_deg.shape == (100, 3) and azimuth_deg.shape == (100, 3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(times, scale="utc")
        site = EarthLocation(lat=SITE_LAT_DEG * u.deg, lon=SITE_LON_DEG * u.deg, height=SITE_HEIGHT_M * u.m)
        frame = AltAz(obstime=t[:, None], location=site, pressure=0 * u.hPa)
        ref = ICRS(ra=SOURCES_RA_DEG[None, :] * u.deg, dec=SOURCES_DEC_DEG[None, :] * u.deg).transform_to(frame)
    assert np.max(np.abs(elevation_deg - ref.alt.deg)) <= 0.05
    high = ref.alt.deg < 85.0  # azimuth is ill-defined near the zenith
    daz = np.abs(np.mod(azimuth_deg - ref.az.deg + 180.0, 360.0) - 180.0)
    assert np.max(daz[high]) <= 0.1
    np.testing.assert_allclose(
        sky.source_elevation_deg(times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG), elevation_deg
    )


def test_shapes_for_scalar_time_and_single_source():
    """Output is (n_times, n_sources) for any input: scalars count as length 1."""
    el = sky.source_elevation_deg(np.datetime64("2024-01-01T00:00"), 187.28, 2.05, SITE_LAT_DEG, SITE_LON_DEG)
    assert el.shape == (1, 1)
    times = pd.date_range("2024-01-01", periods=7, freq="1h", tz="America/Denver")
    assert sky.source_elevation_deg(times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG).shape == (7, 3)


def test_elevation_extremes_follow_declination():
    """Spherical astronomy (Meeus ch. 13): a source transits at 90 - |lat - dec| and a
    circumpolar one passes below the pole at lat + dec - 90; over a sidereal day the sampled
    extremes reach these within the sampling error."""
    times = np.datetime64("2024-02-01T00:00") + np.arange(0, 1437).astype("timedelta64[m]")
    _, dec_date = sky.precess_j2000_to_date(SOURCES_RA_DEG, SOURCES_DEC_DEG, times[0])
    el = sky.source_elevation_deg(times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG)
    np.testing.assert_allclose(el.max(axis=0), 90.0 - np.abs(SITE_LAT_DEG - dec_date), atol=0.01)
    assert el[:, 2].min() == pytest.approx(SITE_LAT_DEG + dec_date[2] - 90.0, abs=0.01)


def _brute_force_minutes(times, min_elevation_deg, horizon_min):
    """Minutes until the elevation first drops below the limit, on a 1-minute grid."""
    steps = np.arange(0, int(horizon_min) + 1)
    grid = (times[:, None] + steps[None, :].astype("timedelta64[m]")).ravel()
    el = sky.source_elevation_deg(grid, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG)
    el = el.reshape(len(times), len(steps), len(SOURCES_RA_DEG))
    below = el < min_elevation_deg
    first = np.argmax(below, axis=1).astype(float)  # index of the first minute below
    return np.where(below.any(axis=1), first, float(horizon_min))


@pytest.mark.parametrize("min_elevation_deg", [20.0, 30.0])
def test_minutes_above_elevation_matches_brute_force_grid(min_elevation_deg):
    """Check: a brute-force 1-minute grid of source_elevation_deg over the next 24 h
    (analytic hour-angle result, Meeus ch. 15 formula with the sidereal rate); within 2 min.
    At 20 deg the Dec +71 source never drops below (lowest 28.5 deg): horizon returned."""
    times = _random_times(16, seed=9).astype("datetime64[m]")
    got = sky.minutes_above_elevation(
        times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG, min_elevation_deg
    )
    want = _brute_force_minutes(times, min_elevation_deg, 1440.0)
    assert got.shape == (16, 3)
    # the brute force lands on the first whole minute below: it is up to 1 min later
    np.testing.assert_allclose(got, want, atol=2.0)
    assert ((got > 0) & (got < 1440)).any() and (got == 0).any()
    if min_elevation_deg == 20.0:
        np.testing.assert_array_equal(got[:, 2], 1440.0)
    else:
        assert (got[:, 2] < 1440.0).all()


def test_minutes_above_elevation_caps_at_horizon_and_zero_when_below():
    """Result lies in [0, horizon_min]; 0 exactly where the source is below the limit now."""
    times = _random_times(40, seed=2)
    el = sky.source_elevation_deg(times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG)
    got = sky.minutes_above_elevation(
        times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG, 25.0, horizon_min=90.0
    )
    assert np.all((got >= 0.0) & (got <= 90.0))
    np.testing.assert_array_equal(got[el < 25.0], 0.0)
    assert np.all(got[el >= 25.1] > 0.0)
    # per-source limits broadcast: an unreachable limit gives 0 everywhere for that source
    per_source = sky.minutes_above_elevation(
        times, SOURCES_RA_DEG, SOURCES_DEC_DEG, SITE_LAT_DEG, SITE_LON_DEG, np.array([25.0, 25.0, 89.9])
    )
    np.testing.assert_array_equal(per_source[:, 2], 0.0)
