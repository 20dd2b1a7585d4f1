"""Ephemeris: UTC times to days since J2000.0, sidereal time, the sun's apparent place, refraction.

    days = _days_since_j2000(times_utc)                  UTC times -> days since J2000.0 [d]
    gmst = _gmst_deg_from_days(days)                     IAU 1982 GMST (Meeus eq. 12.4) [deg]
    ra, dec, r_au, eqeq = _sun_equatorial(days)          Meeus ch. 25 (low accuracy, ~0.01 deg)
    el, az = _altaz_from_hour_angle(ha, dec, lat)        Meeus eq. 13.5-13.6

The private engine shared by :mod:`advisor.physics.sun` and :mod:`advisor.physics.sky`; their
public functions document the conventions (UTC used for UT1 and TT, longitude east-positive).
"""

from __future__ import annotations

import datetime as _dt

import numpy as np
import pandas as pd

_J2000_NS = np.datetime64("2000-01-01T12:00:00", "ns")
_NS_PER_DAY = 86_400e9
_JD_J2000 = 2451545.0


# --------------------------------------------------------------------------------------------
# time handling (shared with sky.py)
# --------------------------------------------------------------------------------------------
def _as_datetime64_ns(times_utc) -> np.ndarray:
    """UTC times as a naive ``datetime64[ns]`` array (0-d for a scalar), NaT kept.

    Accepts numpy datetime64 (scalar or array, read as UTC), pandas ``DatetimeIndex`` /
    ``Series`` / ``Timestamp`` (tz-aware: converted to UTC; naive: read as UTC), Python
    ``datetime`` and ISO 8601 strings.
    """
    if isinstance(times_utc, (pd.Series, pd.Index)) and times_utc.dtype.kind == "M":
        # datetimes, aware or naive: their int64 are UTC (or read as UTC)
        return np.array(pd.DatetimeIndex(times_utc).as_unit("ns").asi8).view("datetime64[ns]")
    if isinstance(times_utc, pd.Series):
        values = pd.to_datetime(times_utc, utc=True).dt.tz_localize(None)
        return values.to_numpy(dtype="datetime64[ns]")
    if isinstance(times_utc, pd.Index):
        return pd.to_datetime(times_utc, utc=True).tz_localize(None).to_numpy(dtype="datetime64[ns]")
    if isinstance(times_utc, (pd.Timestamp, _dt.datetime, str)):
        stamp = pd.Timestamp(times_utc)
        if stamp is pd.NaT:
            return np.array(np.datetime64("NaT", "ns"))
        if stamp.tzinfo is not None:
            stamp = stamp.tz_convert("UTC").tz_localize(None)
        return np.array(stamp.to_datetime64(), dtype="datetime64[ns]")
    arr = np.asarray(times_utc)
    if arr.dtype.kind == "M":
        return arr.astype("datetime64[ns]")
    # objects / strings, possibly with offsets: let pandas parse, then restore the shape
    flat = pd.to_datetime(pd.Index(arr.ravel()), utc=True).tz_localize(None)
    return flat.to_numpy(dtype="datetime64[ns]").reshape(arr.shape)


def _days_since_j2000(times_utc) -> np.ndarray:
    """Days since J2000.0 (2000-01-01 12:00) of UTC times [d]; NaN for NaT."""
    arr = _as_datetime64_ns(times_utc)
    nat = np.isnat(arr)
    delta_ns = np.where(nat, np.timedelta64(0, "ns"), arr - _J2000_NS).astype(np.int64)
    days = delta_ns / _NS_PER_DAY
    return np.where(nat, np.nan, days)


def _to_julian_day(times_utc) -> np.ndarray:
    """Julian day of UTC times [d]; NaN for NaT (Meeus ch. 7)."""
    return _JD_J2000 + _days_since_j2000(times_utc)


def _finish(x):
    """Return a Python float for a 0-d result, the array otherwise."""
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


# --------------------------------------------------------------------------------------------
# ephemeris
# --------------------------------------------------------------------------------------------
def _gmst_deg_from_days(days_j2000: np.ndarray) -> np.ndarray:
    """Greenwich mean sidereal time [deg, 0..360] from UT days since J2000.0.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, eq. 12.4
    (IAU 1982 expression).
    """
    d = np.asarray(days_j2000, dtype=float)
    t = d / 36525.0
    # 360.98564736629 d = 360 d + 0.98564736629 d; keep the large part exact modulo 360
    whole = np.floor(d)
    theta = 280.46061837 + 360.0 * (d - whole) + 0.98564736629 * d + t * t * (0.000387933 - t / 38710000.0)
    return np.mod(theta, 360.0)


def _sun_equatorial(days_j2000: np.ndarray):
    """Apparent right ascension, declination, radius vector and equation of the equinoxes.

    Returns ``(ra_deg, dec_deg, radius_au, eqeq_deg)``, each the shape of the input.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., ch. 25 (low accuracy, eqs.
    25.2-25.8) and ch. 22 (main nutation term, -17.20" sin Omega).
    NOAA Global Monitoring Laboratory, Solar Calculator (same expressions).
    """
    jc = np.asarray(days_j2000, dtype=float) / 36525.0
    mean_long = np.mod(280.46646 + jc * (36000.76983 + 0.0003032 * jc), 360.0)
    mean_anom = np.radians(357.52911 + jc * (35999.05029 - 0.0001537 * jc))
    ecc = 0.016708634 - jc * (0.000042037 + 0.0000001267 * jc)
    centre = (
        np.sin(mean_anom) * (1.914602 - jc * (0.004817 + 0.000014 * jc))
        + np.sin(2.0 * mean_anom) * (0.019993 - 0.000101 * jc)
        + np.sin(3.0 * mean_anom) * 0.000289
    )
    true_long = mean_long + centre
    true_anom = mean_anom + np.radians(centre)
    radius_au = 1.000001018 * (1.0 - ecc * ecc) / (1.0 + ecc * np.cos(true_anom))
    omega = np.radians(125.04 - 1934.136 * jc)
    nutation_long_deg = -0.00478 * np.sin(omega)
    app_long = np.radians(true_long - 0.00569 + nutation_long_deg)
    obliq0 = 23.0 + (26.0 + (21.448 - jc * (46.8150 + jc * (0.00059 - jc * 0.001813))) / 60.0) / 60.0
    obliq = np.radians(obliq0 + 0.00256 * np.cos(omega))
    ra = np.degrees(np.arctan2(np.cos(obliq) * np.sin(app_long), np.cos(app_long)))
    dec = np.degrees(np.arcsin(np.sin(obliq) * np.sin(app_long)))
    eqeq = nutation_long_deg * np.cos(obliq)
    return np.mod(ra, 360.0), dec, radius_au, eqeq


#: Long time series take the sun's RA/Dec from an hourly grid, linearly interpolated: over an
#: hour the sun moves 0.04 deg in RA, so the interpolation error is below 1e-6 deg.
_GRID_MIN_POINTS = 5000
_GRID_STEP_DAYS = 1.0 / 24.0


def _sun_equatorial_fast(days_j2000):
    """:func:`_sun_equatorial`, evaluated on an hourly grid and interpolated for long series."""
    days = np.asarray(days_j2000, dtype=float)
    finite = np.isfinite(days)
    if days.size < _GRID_MIN_POINTS or not finite.any():
        return _sun_equatorial(days)
    lo, hi = np.nanmin(days), np.nanmax(days)
    grid = np.arange(np.floor(lo / _GRID_STEP_DAYS) - 1, np.ceil(hi / _GRID_STEP_DAYS) + 2) * _GRID_STEP_DAYS
    if grid.size * 4 > days.size:  # short span but many points: interpolation saves little
        return _sun_equatorial(days)
    ra_g, dec_g, radius_g, eqeq_g = _sun_equatorial(grid)
    ra_g = np.degrees(np.unwrap(np.radians(ra_g)))
    flat = days.ravel()
    out = [np.interp(flat, grid, g).reshape(days.shape) for g in (ra_g, dec_g, radius_g, eqeq_g)]
    out = [np.where(finite, o, np.nan) for o in out]
    return np.mod(out[0], 360.0), out[1], out[2], out[3]


def _sun_hour_angle_dec(days_j2000, longitude_deg):
    """Local apparent hour angle [deg, -180..180) and declination [deg] of the sun."""
    ra, dec, radius_au, eqeq = _sun_equatorial_fast(days_j2000)
    hour_angle = _gmst_deg_from_days(days_j2000) + eqeq + longitude_deg - ra
    return np.mod(hour_angle + 180.0, 360.0) - 180.0, dec, radius_au


_REFRACTION_SPLIT_SIZE = 256


def _refraction_high(e):
    tan_e = np.tan(np.radians(e))
    return 58.1 / tan_e - 0.07 / tan_e**3 + 0.000086 / tan_e**5


def _refraction_low(e):
    return 1735.0 + e * (-518.2 + e * (103.4 + e * (-12.79 + e * 0.711)))


def _refraction_below(e):
    return -20.774 / np.tan(np.radians(e))


def _refraction_deg(elevation_deg, pressure_hpa=1010.0, temp_c=10.0):
    """Atmospheric refraction to add to a true elevation [deg].

    The NOAA solar calculator's piecewise expression (continuous, defined at every elevation),
    scaled by (P / 1010 hPa) (283 K / (273 K + T)) as in Meeus (1998) ch. 16.

    References
    ----------
    NOAA Global Monitoring Laboratory, Solar Calculator, "Approximate atmospheric refraction".
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., ch. 16.
    """
    e = np.asarray(elevation_deg, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if e.size < _REFRACTION_SPLIT_SIZE:
            arcsec = np.where(
                e > 5.0, _refraction_high(e), np.where(e > -0.575, _refraction_low(e), _refraction_below(e))
            )
        else:  # each expression only where it applies (elementwise: the same numbers)
            arcsec = np.empty(e.shape)
            high = e > 5.0
            low = ~high & (e > -0.575)
            below = ~(high | low)  # NaN too, as above
            arcsec[high] = _refraction_high(e[high])
            arcsec[low] = _refraction_low(e[low])
            arcsec[below] = _refraction_below(e[below])
    scale = (np.asarray(pressure_hpa, dtype=float) / 1010.0) * (283.0 / (273.0 + np.asarray(temp_c, dtype=float)))
    return arcsec / 3600.0 * scale


def _altaz_from_hour_angle(hour_angle_deg, dec_deg, latitude_deg):
    """Geometric elevation and azimuth (from north, clockwise) [deg] (Meeus eq. 13.5-13.6)."""
    h = np.radians(hour_angle_deg)
    d = np.radians(dec_deg)
    phi = np.radians(latitude_deg)
    sin_e = np.sin(phi) * np.sin(d) + np.cos(phi) * np.cos(d) * np.cos(h)
    elevation = np.degrees(np.arcsin(np.clip(sin_e, -1.0, 1.0)))
    azimuth = np.degrees(
        np.arctan2(-np.cos(d) * np.sin(h), np.sin(d) * np.cos(phi) - np.cos(d) * np.cos(h) * np.sin(phi))
    )
    return elevation, np.mod(azimuth, 360.0)
