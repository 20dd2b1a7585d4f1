"""Sun: position, sunrise/sunset, and day/night state (polar day and polar night included).

    elevation_deg, azimuth_deg = solar_position(times_utc, latitude_deg, longitude_deg)
    hours = hours_since_sunset(times_utc, latitude_deg, longitude_deg)
    hours = hours_since_sunrise(times_utc, latitude_deg, longitude_deg)
    state = sun_state(times_utc, latitude_deg, longitude_deg)   # 2 polar day, 1 up, -1 down, -2 polar night

The ephemeris is the low-accuracy solar theory of Meeus (ch. 25), the one behind the NOAA
solar calculator (about 0.01 deg).  The hour angle comes from the apparent sidereal time
(Meeus ch. 12 with the main nutation term), so position and sunrise/sunset share one model.
Longitude is east-positive (west negative); azimuth is clockwise from north, 0..360 deg.
Times are UTC; UTC is used for both UT1 (|UT1 - UTC| < 0.9 s) and TT (TT - UTC ~ 69 s), which
moves the sun by less than 0.005 deg.

Sunrise and sunset are the crossings of the standard altitude -0.833 deg, found by bisection
between consecutive upper and lower transits of the sun, so they stay right through polar day
and polar night: the first sunset after weeks of midnight sun is found like any other.
"""

from __future__ import annotations

import functools

import numpy as np

from advisor.physics.ephemeris import (  # noqa: F401  (re-exported: sky.py and the tests use them from here)
    _altaz_from_hour_angle,
    _as_datetime64_ns,
    _days_since_j2000,
    _finish,
    _gmst_deg_from_days,
    _refraction_deg,
    _sun_equatorial,
    _sun_equatorial_fast,
    _sun_hour_angle_dec,
    _to_julian_day,
)

__all__ = [
    "SUNRISE_SUNSET_ALTITUDE_DEG",
    "DEFAULT_LOOKBACK_DAYS",
    "SUN_POLAR_DAY",
    "SUN_UP",
    "SUN_DOWN",
    "SUN_POLAR_NIGHT",
    "SUN_UNKNOWN",
    "solar_position",
    "hours_since_sunset",
    "hours_since_sunrise",
    "sun_state",
]

#: Standard altitude of the sun's centre at rise/set: -(34' refraction + 16' semi-diameter)
#: [deg] (Meeus ch. 15).
SUNRISE_SUNSET_ALTITUDE_DEG = -0.833
#: Equatorial horizontal parallax of the sun at 1 au [deg] (Meeus ch. 40: 8.794 arcsec).
_SUN_PARALLAX_1AU_DEG = 8.794 / 3600.0
#: Default search back for the last sunset/sunrise [d]: a year and a day, so that the last
#: event is found anywhere on Earth, even after the half-year night at the poles.
DEFAULT_LOOKBACK_DAYS = 366.0
#: :func:`sun_state` codes.
SUN_POLAR_DAY, SUN_UP, SUN_UNKNOWN, SUN_DOWN, SUN_POLAR_NIGHT = 2, 1, 0, -1, -2
#: First search window [d]: outside the polar regions every day has a sunrise and a sunset.
_SHORT_LOOKBACK_DAYS = 3.0
#: Bisection steps on a half-day bracket: 0.5 d / 2**20 = 0.04 s.
_BISECTIONS = 20


# --------------------------------------------------------------------------------------------
# position
# --------------------------------------------------------------------------------------------
# --------------------------------------------------------------------------------------------
# public API
# --------------------------------------------------------------------------------------------
def solar_position(
    times_utc,
    latitude_deg,
    longitude_deg,
    refraction: bool = True,
    pressure_hpa=1010.0,
    temp_c=10.0,
):
    """Topocentric elevation and azimuth of the sun's centre.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC (tz-aware converted, naive read as UTC).
    latitude_deg : numeric
        Geodetic latitude, north positive. [deg]
    longitude_deg : numeric
        Longitude, east positive (west negative). [deg]
    refraction : bool, default True
        Return the apparent (refraction-corrected) elevation.
    pressure_hpa : numeric, default 1010
        Station air pressure for the refraction. [hPa]
    temp_c : numeric, default 10
        Air temperature for the refraction. [C]

    Returns
    -------
    elevation_deg, azimuth_deg : ndarray (float for scalar input)
        Elevation above the horizon [deg]; azimuth clockwise from north, 0..360 [deg].
        NaN where the time is NaT.

    Notes
    -----
    Apparent RA/Dec from Meeus ch. 25 (low accuracy, ~0.01 deg); hour angle from the apparent
    sidereal time; elevation lowered by the solar parallax 8.794"/R cos(e) (topocentric);
    refraction from the NOAA expression scaled by pressure and temperature.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 12, 13, 16, 25.
    NOAA Global Monitoring Laboratory, Solar Calculator.
    Reda, I., Andreas, A. (2004). Solar Position Algorithm for Solar Radiation Applications,
    NREL/TP-560-34302 (worked example used as a check).
    """
    days = _days_since_j2000(times_utc)
    hour_angle, dec, radius_au = _sun_hour_angle_dec(days, np.asarray(longitude_deg, dtype=float))
    elevation, azimuth = _altaz_from_hour_angle(hour_angle, dec, latitude_deg)
    elevation = elevation - (_SUN_PARALLAX_1AU_DEG / radius_au) * np.cos(np.radians(elevation))
    if refraction:
        elevation = elevation + _refraction_deg(elevation, pressure_hpa, temp_c)
    return _finish(elevation), _finish(azimuth)


# --------------------------------------------------------------------------------------------
# sunrise, sunset and day/night state
# --------------------------------------------------------------------------------------------
def _geometric_elevation_deg(days_j2000, latitude_deg, longitude_deg):
    """Topocentric elevation of the sun's centre without refraction [deg].

    The same quantity as ``solar_position(..., refraction=False)``: Meeus eq. 13.6 with the
    parallax 8.794"/R cos(e) taken off.
    """
    hour_angle, dec, radius_au = _sun_hour_angle_dec(days_j2000, longitude_deg)
    phi, d = np.radians(latitude_deg), np.radians(dec)
    sin_e = np.sin(phi) * np.sin(d) + np.cos(phi) * np.cos(d) * np.cos(np.radians(hour_angle))
    elevation = np.degrees(np.arcsin(np.clip(sin_e, -1.0, 1.0)))
    return elevation - (_SUN_PARALLAX_1AU_DEG / radius_au) * np.cos(np.radians(elevation))


class _EventTable:
    """Transits and horizon crossings of the sun at one site over a span of days.

    ``transit_days``: alternating lower (hour angle 180 deg) and upper (0 deg) transits,
    ascending [d since J2000.0]; ``upper``: which are upper; ``above``: sun above the standard
    altitude at each transit; ``crossing_days[i]``: the crossing between transits i and i+1
    (NaN if none); ``rise_days`` / ``set_days``: the crossings, ascending.
    """

    def __init__(self, first_day, last_day, latitude_deg, longitude_deg):
        lat, lon = float(latitude_deg), float(longitude_deg)
        # half-day k: mean upper transit (k even) or lower transit (k odd) near k/2 - lon/360
        k = np.arange(np.floor(2.0 * (first_day + lon / 360.0)) - 4.0, np.ceil(2.0 * (last_day + lon / 360.0)) + 5.0)
        upper = np.mod(k, 2.0) == 0.0
        target_deg = np.where(upper, 0.0, 180.0)
        t = k / 2.0 - lon / 360.0
        for _ in range(3):  # fixed point on the hour angle (equation of time < 17 min)
            hour_angle, _dec, _r = _sun_hour_angle_dec(t, lon)
            t = t - (np.mod(hour_angle - target_deg + 180.0, 360.0) - 180.0) / 360.0
        above = _geometric_elevation_deg(t, lat, lon) > SUNRISE_SUNSET_ALTITUDE_DEG
        # The elevation is monotonic between consecutive transits (to within the sun's daily
        # motion in declination), so a bracket holds a crossing exactly when its ends differ.
        change = above[:-1] != above[1:]
        lo, hi = t[:-1][change], t[1:][change]
        rising = ~above[:-1][change]
        for _ in range(_BISECTIONS):  # vectorised over all brackets at once
            mid = 0.5 * (lo + hi)
            crossed = (_geometric_elevation_deg(mid, lat, lon) > SUNRISE_SUNSET_ALTITUDE_DEG) == rising
            hi = np.where(crossed, mid, hi)
            lo = np.where(crossed, lo, mid)
        crossing = 0.5 * (lo + hi)
        self.transit_days, self.upper, self.above = t, upper, above
        self.crossing_days = np.full(t.size - 1, np.nan)
        self.crossing_days[change] = crossing
        self.rise_days, self.set_days = crossing[rising], crossing[~rising]


@functools.lru_cache(maxsize=8)
def _event_table(first_day: float, last_day: float, latitude_deg: float, longitude_deg: float) -> _EventTable:
    """:class:`_EventTable` of a span, kept for the next call with the same span (sunset and sunrise
    of the same times read the same table)."""
    table = _EventTable(first_day, last_day, latitude_deg, longitude_deg)
    for values in vars(table).values():
        values.flags.writeable = False
    return table


def _per_site(times_utc, latitude_deg, longitude_deg):
    """Flattened days since J2000.0 and, per distinct site, (row indices, lat, lon)."""
    days = _days_since_j2000(times_utc)
    lat, lon, days = np.broadcast_arrays(
        np.asarray(latitude_deg, dtype=float), np.asarray(longitude_deg, dtype=float), days
    )
    shape = days.shape
    days, lat, lon = days.ravel(), lat.ravel(), lon.ravel()
    ok = np.flatnonzero(np.isfinite(days) & np.isfinite(lat) & np.isfinite(lon))
    groups = []
    if ok.size and np.all(lat[ok] == lat[ok[0]]) and np.all(lon[ok] == lon[ok[0]]):
        groups.append((ok, lat[ok[0]], lon[ok[0]]))
    elif ok.size:  # several sites: one event table per distinct site (a loop over sites, not rows)
        sites, inverse = np.unique(np.column_stack([lat[ok], lon[ok]]), axis=0, return_inverse=True)
        inverse = inverse.ravel()
        for i, (site_lat, site_lon) in enumerate(sites):
            groups.append((ok[inverse == i], site_lat, site_lon))
    return days, shape, groups


def _hours_since_event(times_utc, latitude_deg, longitude_deg, rising, max_lookback_days):
    lookback = float(max_lookback_days)
    if not lookback > 0.0:
        raise ValueError(f"max_lookback_days must be positive, got {max_lookback_days!r}")
    days, shape, groups = _per_site(times_utc, latitude_deg, longitude_deg)
    out = np.full(days.shape, np.nan)
    for rows, lat, lon in groups:
        d = days[rows]
        # Search the last few days first; go back the whole lookback only for the times that
        # found nothing there (polar day or night), so the usual case stays cheap.
        for margin in sorted({min(lookback, _SHORT_LOOKBACK_DAYS), lookback}):
            table = _event_table(float(d.min() - margin - 1.0), float(d.max()), float(lat), float(lon))
            events = table.rise_days if rising else table.set_days
            last = np.searchsorted(events, d, side="right") - 1
            if np.all(last >= 0):
                break
        if events.size == 0:
            continue
        elapsed = d - events[np.clip(last, 0, None)]
        out[rows] = np.where((last >= 0) & (elapsed <= lookback), elapsed * 24.0, np.nan)
    return _finish(out.reshape(shape))


def hours_since_sunset(times_utc, latitude_deg, longitude_deg, max_lookback_days=DEFAULT_LOOKBACK_DAYS):
    """Hours since the most recent sunset at or before each time, polar regions included.

    Sunset is when the sun's centre (topocentric, without refraction) falls through the
    standard altitude -0.833 deg: the upper limb on the refracted horizon.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC.
    latitude_deg : numeric
        Latitude, north positive. [deg]
    longitude_deg : numeric
        Longitude, east positive. [deg]
    max_lookback_days : float, default 366
        How far back to search. [d]

    Returns
    -------
    ndarray (float for scalar input)
        Elapsed time since the last sunset [h].  In polar day this is the time since the last
        sunset before the midnight sun began (weeks to months); in polar night, since the sunset
        that began it.  NaN where no sunset happened within ``max_lookback_days`` (with the
        default year, only for a time that is NaT or a latitude/longitude that is NaN).

    Notes
    -----
    The upper and lower transits of the sun (hour angle 0 and 180 deg) are found for every
    day of the span; between two consecutive transits the elevation e(t) is monotonic, so a
    sunset lies in [t_upper, t_lower] exactly when e(t_upper) > h0 > e(t_lower), h0 = -0.833 deg,
    and is found by 20 bisection steps (to 0.04 s).  The cost is per day of the span, not per
    time.  Where the sun only grazes h0 (at the edges of polar day and night) a dip of a few
    minutes between two transits on the same side of h0 is not seen: the sun is then within a
    few hundredths of a degree of h0, below the ephemeris' own accuracy.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 13, 15, 25.
    """
    return _hours_since_event(times_utc, latitude_deg, longitude_deg, False, max_lookback_days)


def hours_since_sunrise(times_utc, latitude_deg, longitude_deg, max_lookback_days=DEFAULT_LOOKBACK_DAYS):
    """Hours since the most recent sunrise at or before each time, polar regions included.

    Same conventions as :func:`hours_since_sunset` (standard altitude -0.833 deg).

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC.
    latitude_deg : numeric
        Latitude, north positive. [deg]
    longitude_deg : numeric
        Longitude, east positive. [deg]
    max_lookback_days : float, default 366
        How far back to search. [d]

    Returns
    -------
    ndarray (float for scalar input)
        Elapsed time since the last sunrise [h]; NaN where there was none within
        ``max_lookback_days`` or the input is NaT/NaN.

    Notes
    -----
    Crossings of -0.833 deg by bisection between consecutive solar transits; see
    :func:`hours_since_sunset`.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 13, 15, 25.
    """
    return _hours_since_event(times_utc, latitude_deg, longitude_deg, True, max_lookback_days)


def sun_state(times_utc, latitude_deg, longitude_deg):
    """Whether the sun is up, and whether the whole local solar day is day or night.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Times, UTC.
    latitude_deg : numeric
        Latitude, north positive. [deg]
    longitude_deg : numeric
        Longitude, east positive. [deg]

    Returns
    -------
    ndarray of int8 (int for scalar input)
        ``SUN_POLAR_DAY`` (2): the sun stays above the standard altitude -0.833 deg for the
        whole local solar day containing the time (lower transit to lower transit: midnight
        sun); ``SUN_UP`` (1): above it now; ``SUN_DOWN`` (-1): below it now; ``SUN_POLAR_NIGHT``
        (-2): below it all day; ``SUN_UNKNOWN`` (0): the time is NaT or the site NaN.  Night is
        ``state < 0``, day ``state > 0``, a polar day or night ``abs(state) == 2``.

    Notes
    -----
    Up or down is decided by the same transit/crossing table as :func:`hours_since_sunset`,
    so ``state < 0`` exactly when the last crossing was a sunset: the two never disagree.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 13, 15, 25.
    """
    days, shape, groups = _per_site(times_utc, latitude_deg, longitude_deg)
    out = np.full(days.shape, SUN_UNKNOWN, dtype=np.int8)
    for rows, lat, lon in groups:
        d = days[rows]
        table = _event_table(float(d.min() - 1.0), float(d.max() + 1.0), float(lat), float(lon))
        k = np.searchsorted(table.transit_days, d, side="right") - 1  # bracket [t_k, t_k+1)
        crossing = table.crossing_days[k]
        with np.errstate(invalid="ignore"):
            after = np.isfinite(crossing) & (d >= crossing)
        up = np.where(after, table.above[k + 1], table.above[k])
        start = k - table.upper[k]  # the lower transit that begins this local solar day
        above = table.above
        all_day = above[start] & above[start + 1] & above[start + 2]
        no_day = ~(above[start] | above[start + 1] | above[start + 2])
        out[rows] = np.where(all_day, SUN_POLAR_DAY, np.where(no_day, SUN_POLAR_NIGHT, np.where(up, SUN_UP, SUN_DOWN)))
    out = out.reshape(shape)
    return int(out) if out.ndim == 0 else out
