"""Sky: sidereal time, precession, and where a J2000 source is seen from the site.

    gmst_deg(times_utc)                      Greenwich mean sidereal time
    local_sidereal_time_deg(times_utc, lon)  local mean sidereal time
    precess_j2000_to_date(ra, dec, times)    mean place of date
    source_altaz_deg(times, ra, dec, lat, lon) -> (elevation, azimuth), shape (n_times, n_sources)
    source_elevation_deg(...)                -> elevation only
    minutes_above_elevation(..., min_elevation_deg) -> minutes until the source drops below
    angular_separation_deg(ra1, dec1, ra2, dec2)   great-circle angle between two directions
    sun_separation_deg(times, ra, dec)       angle from the sun, shape (n_times, n_sources)

Geometric positions: nutation, aberration, refraction and parallax are ignored (together
< 0.01 deg for sources outside the solar system, refraction aside).  Longitude east-positive.
"""

from __future__ import annotations

import numpy as np

from advisor.physics.ephemeris import (
    _altaz_from_hour_angle,
    _days_since_j2000,
    _finish,
    _gmst_deg_from_days,
    _sun_equatorial_fast,
)

__all__ = [
    "SIDEREAL_RATE_DEG_PER_H",
    "gmst_deg",
    "local_sidereal_time_deg",
    "precess_j2000_to_date",
    "source_altaz_deg",
    "source_elevation_deg",
    "minutes_above_elevation",
    "angular_separation_deg",
    "sun_separation_deg",
]

#: Rate of change of hour angle of a fixed star [deg/h] (360.98564736629 deg per UT day,
#: Meeus eq. 12.4), i.e. 15.041 deg/h.
SIDEREAL_RATE_DEG_PER_H = 360.98564736629 / 24.0
_ARCSEC = 1.0 / 3600.0


def gmst_deg(times_utc):
    """Greenwich mean sidereal time.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC (taken as UT1; |UT1 - UTC| < 0.9 s).

    Returns
    -------
    ndarray (float for scalar input)
        GMST, 0..360. [deg]

    Notes
    -----
    theta0 = 280.46061837 + 360.98564736629 (JD - 2451545) + 0.000387933 T^2 - T^3 / 38710000.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, eq. 12.4
    (IAU 1982 expression).
    """
    return _finish(_gmst_deg_from_days(_days_since_j2000(times_utc)))


def local_sidereal_time_deg(times_utc, longitude_deg):
    """Local mean sidereal time.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC.
    longitude_deg : numeric
        Longitude, east positive. [deg]

    Returns
    -------
    ndarray (float for scalar input)
        GMST + longitude, 0..360. [deg]

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 12.
    """
    gmst = _gmst_deg_from_days(_days_since_j2000(times_utc))
    return _finish(np.mod(gmst + np.asarray(longitude_deg, dtype=float), 360.0))


def _precess_days(ra_deg, dec_deg, days_j2000):
    """Rigorous precession from J2000.0 to the mean equinox of date (broadcasting)."""
    t = np.asarray(days_j2000, dtype=float) / 36525.0
    zeta = np.radians((2306.2181 * t + 0.30188 * t**2 + 0.017998 * t**3) * _ARCSEC)
    z = np.radians((2306.2181 * t + 1.09468 * t**2 + 0.018203 * t**3) * _ARCSEC)
    theta = np.radians((2004.3109 * t - 0.42665 * t**2 - 0.041833 * t**3) * _ARCSEC)
    ra0 = np.radians(np.asarray(ra_deg, dtype=float))
    dec0 = np.radians(np.asarray(dec_deg, dtype=float))
    a = np.cos(dec0) * np.sin(ra0 + zeta)
    b = np.cos(theta) * np.cos(dec0) * np.cos(ra0 + zeta) - np.sin(theta) * np.sin(dec0)
    c = np.sin(theta) * np.cos(dec0) * np.cos(ra0 + zeta) + np.cos(theta) * np.sin(dec0)
    ra = np.degrees(np.arctan2(a, b) + z)
    dec = np.degrees(np.arctan2(c, np.hypot(a, b)))
    return np.mod(ra, 360.0), dec


def precess_j2000_to_date(ra_deg, dec_deg, times_utc):
    """Precess mean J2000.0 equatorial coordinates to the mean equinox of date.

    Parameters
    ----------
    ra_deg, dec_deg : numeric
        Right ascension and declination, J2000.0. [deg]
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Epoch(s) of date, UTC (TT - UTC is negligible here); broadcast against the coordinates.

    Returns
    -------
    ra_deg, dec_deg : ndarray (float for scalar input)
        Mean place of date (no nutation, no aberration, no proper motion). [deg]

    Notes
    -----
    zeta, z, theta from Meeus eq. 21.3 with the starting epoch J2000.0; the rotation from
    eq. 21.4, declination via atan2 so it stays accurate near the poles.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 21
    (rigorous method; IAU 1976 precession).
    """
    ra, dec = _precess_days(ra_deg, dec_deg, _days_since_j2000(times_utc))
    return _finish(ra), _finish(dec)


def _site_frame(times_utc, ra_deg, dec_deg, longitude_deg):
    """Precessed (n, m) declination and hour angle [deg] for times (n,) and sources (m,).

    Precession is evaluated once per whole day of the input (it moves a source by less than
    0.2 arcsec a day), so long time series cost one trigonometric pass per day, not per time.
    """
    days = np.atleast_1d(_days_since_j2000(times_utc)).ravel()[:, None]
    ra = np.atleast_1d(np.asarray(ra_deg, dtype=float)).ravel()[None, :]
    dec = np.atleast_1d(np.asarray(dec_deg, dtype=float)).ravel()[None, :]
    whole_days, inverse = np.unique(np.floor(days[:, 0]), return_inverse=True)
    ra_day, dec_day = _precess_days(ra, dec, whole_days[:, None] + 0.5)
    ra_date, dec_date = ra_day[inverse], dec_day[inverse]
    lst = _gmst_deg_from_days(days) + float(longitude_deg)
    hour_angle = np.mod(lst - ra_date + 180.0, 360.0) - 180.0
    return hour_angle, dec_date


def source_altaz_deg(times_utc, ra_deg, dec_deg, latitude_deg, longitude_deg):
    """Geometric elevation and azimuth of J2000 sources from a site.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC; shape (n,) (a scalar counts as n = 1).
    ra_deg, dec_deg : numeric
        J2000.0 right ascension and declination of the sources; shape (m,). [deg]
    latitude_deg : float
        Site latitude, north positive. [deg]
    longitude_deg : float
        Site longitude, east positive. [deg]

    Returns
    -------
    elevation_deg, azimuth_deg : ndarray, shape (n, m)
        Elevation [deg]; azimuth clockwise from north, 0..360 [deg].

    Notes
    -----
    Coordinates are precessed to the mean equinox of date (Meeus ch. 21) and the hour angle
    taken from the local mean sidereal time (Meeus ch. 12).  Nutation (< 0.005 deg), annual
    aberration (< 0.006 deg), diurnal aberration, polar motion and refraction are ignored.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 12, 13, 21.
    """
    hour_angle, dec_date = _site_frame(times_utc, ra_deg, dec_deg, longitude_deg)
    return _altaz_from_hour_angle(hour_angle, dec_date, float(latitude_deg))


def source_elevation_deg(times_utc, ra_deg, dec_deg, latitude_deg, longitude_deg):
    """Geometric elevation of J2000 sources from a site, shape (n_times, n_sources). [deg]

    Same arguments and conventions as :func:`source_altaz_deg`.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 12, 13, 21.
    """
    hour_angle, dec_date = _site_frame(times_utc, ra_deg, dec_deg, longitude_deg)
    return _elevation_deg(hour_angle, dec_date, float(latitude_deg))


def _elevation_deg(hour_angle_deg, dec_deg, latitude_deg):
    """Geometric elevation [deg] from hour angle and declination (Meeus eq. 13.6)."""
    phi = np.radians(latitude_deg)
    d = np.radians(dec_deg)
    sin_e = np.sin(phi) * np.sin(d) + np.cos(phi) * np.cos(d) * np.cos(np.radians(hour_angle_deg))
    return np.degrees(np.arcsin(np.clip(sin_e, -1.0, 1.0)))


def minutes_above_elevation(
    times_utc,
    ra_deg,
    dec_deg,
    latitude_deg,
    longitude_deg,
    min_elevation_deg,
    horizon_min=1440.0,
):
    """Minutes from each time until each source next drops below an elevation limit.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC; shape (n,).
    ra_deg, dec_deg : numeric
        J2000.0 coordinates of the sources; shape (m,). [deg]
    latitude_deg, longitude_deg : float
        Site latitude (north positive) and longitude (east positive). [deg]
    min_elevation_deg : numeric
        Elevation limit; scalar or shape (m,) (one per source). [deg]
    horizon_min : float, default 1440
        Look-ahead; the result never exceeds it. [min]

    Returns
    -------
    ndarray, shape (n, m)
        Minutes above the limit from now on [min]: 0 where the source is below the limit now,
        ``horizon_min`` where it stays above for the whole horizon (e.g. circumpolar above it).

    Notes
    -----
    The source sets through elevation e at hour angle H0 with
    cos H0 = (sin e - sin phi sin delta) / (cos phi cos delta); the time left is
    (H0 - H) / 15.041 deg/h, H the current hour angle in -180..180 deg.  The declination is
    held at its value now (precession over a day is < 0.2 arcsec).

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 12, 13, 15, 21.
    """
    return elevation_and_minutes_above(
        times_utc, ra_deg, dec_deg, latitude_deg, longitude_deg, min_elevation_deg, horizon_min
    )[1]


def elevation_and_minutes_above(
    times_utc, ra_deg, dec_deg, latitude_deg, longitude_deg, min_elevation_deg, horizon_min=1440.0
):
    """Elevation now [deg] and minutes above ``min_elevation_deg`` [min], both (n, m), in one pass.

    Same arguments and conventions as :func:`minutes_above_elevation`.  Everything that depends
    only on the declination (precessed once per day) is computed per day and source; only the
    hour angle and its cosine are computed per time and source.
    """
    days = np.atleast_1d(_days_since_j2000(times_utc)).ravel()
    ra = np.atleast_1d(np.asarray(ra_deg, dtype=float)).ravel()[None, :]
    dec = np.atleast_1d(np.asarray(dec_deg, dtype=float)).ravel()[None, :]
    whole_days, inverse = np.unique(np.floor(days), return_inverse=True)
    ra_day, dec_day = _precess_days(ra, dec, whole_days[:, None] + 0.5)  # (d, m)
    phi = np.radians(float(latitude_deg))
    d = np.radians(dec_day)
    a_day = np.sin(phi) * np.sin(d)  # sin(e) = a + b cos(H)
    b_day = np.cos(phi) * np.cos(d)
    limit = np.atleast_1d(np.asarray(min_elevation_deg, dtype=float)).ravel()[None, :]
    with np.errstate(divide="ignore", invalid="ignore"):
        cos_h0 = (np.sin(np.radians(limit)) - a_day) / b_day
    never_sets_day = cos_h0 < -1.0
    h0_day = np.degrees(np.arccos(np.clip(cos_h0, -1.0, 1.0)))

    # The (n, m) block runs in float32 (about ten times faster here; resolution ~1e-5 deg, far
    # below the 0.05 deg the tests hold us to); inputs reduced mod 360 in float64 first.
    # The (n, m) block runs in float32 (about ten times faster here; resolution ~1e-5 deg, far
    # below the 0.05 deg the tests hold us to); inputs are reduced mod 360 in float64 first.
    if np.all(inverse[1:] >= inverse[:-1]):  # times in order: repeat each day's row
        counts = np.bincount(inverse, minlength=len(whole_days))

        def per_time(day_values):
            return np.repeat(day_values.astype(np.float32), counts, axis=0)
    else:

        def per_time(day_values):
            return day_values.astype(np.float32)[inverse]

    f32 = np.float32
    lst = np.mod(_gmst_deg_from_days(days) + float(longitude_deg), 360.0).astype(f32)  # (n,)
    hour_angle = lst[:, None] - per_time(np.mod(ra_day, 360.0))
    hour_angle += f32(180.0)
    np.mod(hour_angle, f32(360.0), out=hour_angle)
    hour_angle -= f32(180.0)
    sin_e = np.cos(hour_angle * f32(np.pi / 180.0))
    sin_e *= per_time(b_day)
    sin_e += per_time(a_day)
    np.clip(sin_e, f32(-1.0), f32(1.0), out=sin_e)
    elevation = np.arcsin(sin_e, out=sin_e)
    elevation *= f32(180.0 / np.pi)
    minutes = per_time(h0_day) - hour_angle
    minutes *= f32(60.0 / SIDEREAL_RATE_DEG_PER_H)
    np.clip(minutes, f32(0.0), f32(horizon_min), out=minutes)
    minutes[per_time(never_sets_day) > 0] = f32(horizon_min)
    minutes[elevation < limit] = f32(0.0)
    minutes[np.isnan(elevation)] = np.nan
    return elevation, minutes


def angular_separation_deg(ra1_deg, dec1_deg, ra2_deg, dec2_deg):
    """Great-circle angle between two directions on the sky, elementwise (broadcasting).

    Parameters
    ----------
    ra1_deg, dec1_deg : numeric
        Right ascension and declination (or longitude and latitude) of the first. [deg]
    ra2_deg, dec2_deg : numeric
        The same for the second, in the same frame. [deg]

    Returns
    -------
    ndarray (float for scalar input)
        Separation, 0..180. [deg]

    Notes
    -----
    Vincenty's form, accurate at every separation (no loss near 0 or 180 deg):
    atan2(sqrt((cos d2 sin da)^2 + (cos d1 sin d2 - sin d1 cos d2 cos da)^2),
    sin d1 sin d2 + cos d1 cos d2 cos da).

    References
    ----------
    Vincenty, T. (1975). Direct and inverse solutions of geodesics on the ellipsoid with
    application of nested equations. Survey Review 23(176), 88-93 (the spherical case).
    """
    a1, d1, a2, d2 = (np.radians(np.asarray(x, dtype=float)) for x in (ra1_deg, dec1_deg, ra2_deg, dec2_deg))
    da = a2 - a1
    sin_d1, cos_d1, sin_d2, cos_d2 = np.sin(d1), np.cos(d1), np.sin(d2), np.cos(d2)
    num = np.hypot(cos_d2 * np.sin(da), cos_d1 * sin_d2 - sin_d1 * cos_d2 * np.cos(da))
    den = sin_d1 * sin_d2 + cos_d1 * cos_d2 * np.cos(da)
    return _finish(np.degrees(np.arctan2(num, den)))


def sun_separation_deg(times_utc, ra_deg, dec_deg):
    """Angle between the sun and J2000 sources, for every time and source.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC; shape (n,) (a scalar counts as n = 1).
    ra_deg, dec_deg : numeric
        J2000.0 right ascension and declination of the sources; shape (m,). [deg]

    Returns
    -------
    ndarray, shape (n, m)
        Separation from the sun's centre [deg]; NaN where the time is NaT.  Geocentric: the
        sun's parallax (< 9 arcsec) is left out.

    Notes
    -----
    The sun's apparent place of date (Meeus ch. 25) against the source precessed to the mean
    equinox of date (Meeus ch. 21; once per whole day, < 0.2 arcsec a day); nutation and the
    source's annual aberration are left out (each < 0.006 deg; 0.015 deg at most against
    astropy), far below any sun-avoidance limit (sites use 15 to over 40 deg; common practice).

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 17, 21, 25.
    """
    days = np.atleast_1d(_days_since_j2000(times_utc)).ravel()
    ra = np.atleast_1d(np.asarray(ra_deg, dtype=float)).ravel()[None, :]
    dec = np.atleast_1d(np.asarray(dec_deg, dtype=float)).ravel()[None, :]
    finite = np.isfinite(days)
    whole_days, inverse = np.unique(np.floor(np.where(finite, days, 0.0)), return_inverse=True)
    ra_day, dec_day = _precess_days(ra, dec, whole_days[:, None] + 0.5)  # (d, m)
    sun_ra, sun_dec, _r, _eqeq = _sun_equatorial_fast(days)
    inverse = inverse.ravel()
    d_sun, d_src = np.radians(sun_dec)[:, None], np.radians(dec_day)
    # cos(sep) = sin d1 sin d2 + cos d1 cos d2 cos(a1 - a2): one cosine per (time, source);
    # in float64 arccos keeps ~1e-6 deg even at a separation of 0.01 deg
    cos_sep = np.cos(np.radians(sun_ra)[:, None] - np.radians(ra_day)[inverse])
    cos_sep *= np.cos(d_sun) * np.cos(d_src)[inverse]
    cos_sep += np.sin(d_sun) * np.sin(d_src)[inverse]
    np.clip(cos_sep, -1.0, 1.0, out=cos_sep)
    out = np.degrees(np.arccos(cos_sep, out=cos_sep), out=cos_sep)
    out[~finite] = np.nan
    return out
