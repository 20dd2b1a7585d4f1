"""A source's track over a measurement: elevations from start to end, and its closest approach to the sun.

    track = source_track(times_utc, ra_deg, dec_deg, lat, lon, duration_min, min_elevation_deg)
    track.elevation_deg, track.minutes_above                 at the start (as sky.elevation_and_minutes_above)
    track.mid_elevation_deg                                  halfway through the measurement
    track.lowest_elevation_deg, track.highest_elevation_deg  over [t, t + duration]
    sep = sun_separation_over_deg(times_utc, ra_deg, dec_deg, duration_min)   closest to the sun over it

Every array is (n_times, n_sources).  A calibrator must stay inside the site's elevation limits
for the whole measurement, not only when it starts: a source rising through the lower limit or
transiting above the upper one during the measurement is caught here.  Same conventions as
:mod:`advisor.physics.sky` (geometric positions, J2000 coordinates precessed once per day,
longitude east-positive).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from advisor.physics.ephemeris import _as_datetime64_ns, _days_since_j2000, _gmst_deg_from_days
from advisor.physics.sky import SIDEREAL_RATE_DEG_PER_H, _precess_days, sun_separation_deg

__all__ = ["SourceTrack", "source_track", "sun_separation_over_deg"]


@dataclass(frozen=True)
class SourceTrack:
    """Elevations of each source over a measurement starting at each time; arrays (n, m) [deg], [min]."""

    elevation_deg: np.ndarray          # at the start
    minutes_above: np.ndarray          # from the start until it drops below the minimum elevation
    mid_elevation_deg: np.ndarray      # halfway through
    lowest_elevation_deg: np.ndarray   # lowest over [t, t + duration]
    highest_elevation_deg: np.ndarray  # highest over [t, t + duration]


def source_track(times_utc, ra_deg, dec_deg, latitude_deg, longitude_deg, duration_min, min_elevation_deg,
                 horizon_min=1440.0) -> SourceTrack:
    """Where each source is over a measurement of ``duration_min`` starting at each time.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Start times, UTC; shape (n,).
    ra_deg, dec_deg : numeric
        J2000.0 coordinates of the sources; shape (m,). [deg]
    latitude_deg, longitude_deg : float
        Site latitude (north positive) and longitude (east positive). [deg]
    duration_min : float
        Length of the measurement, >= 0. [min]
    min_elevation_deg : float
        Elevation limit for :attr:`SourceTrack.minutes_above`. [deg]
    horizon_min : float, default 1440
        Look-ahead of ``minutes_above``. [min]

    Returns
    -------
    SourceTrack
        Arrays of shape (n, m), float32 (resolution ~1e-5 deg).

    Notes
    -----
    sin E = sin phi sin delta + cos phi cos delta cos H (Meeus eq. 13.6), the hour angle H growing
    at 15.041 deg/h.  Between the start and the end E changes monotonically except where the
    source crosses the meridian: above the pole side (H = 0) it culminates at
    arcsin(sin phi sin delta + cos phi cos delta) = 90 - |phi - delta|, below it (H = 180 deg) at
    arcsin(sin phi sin delta - cos phi cos delta); so the extremes over the interval are the ends
    and, where crossed, the culminations.  The declination is held at its value of the day
    (precession moves it < 0.2 arcsec a day).  ``minutes_above`` is the time to the setting hour
    angle H0, cos H0 = (sin e - sin phi sin delta) / (cos phi cos delta), as in
    :func:`advisor.physics.sky.minutes_above_elevation`.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 12, 13, 15, 21.
    """
    duration = float(duration_min)
    if not duration >= 0.0:
        raise ValueError(f"duration_min must be >= 0, got {duration_min!r}")
    days = np.atleast_1d(_days_since_j2000(times_utc)).ravel()
    ra = np.atleast_1d(np.asarray(ra_deg, dtype=float)).ravel()[None, :]
    dec = np.atleast_1d(np.asarray(dec_deg, dtype=float)).ravel()[None, :]
    whole_days, inverse = np.unique(np.floor(days), return_inverse=True)
    inverse = inverse.ravel()
    ra_day, dec_day = _precess_days(ra, dec, whole_days[:, None] + 0.5)          # (d, m)
    phi = np.radians(float(latitude_deg))
    d = np.radians(dec_day)
    a_day = np.sin(phi) * np.sin(d)                                             # sin E = a + b cos H
    b_day = np.cos(phi) * np.cos(d)
    with np.errstate(divide="ignore", invalid="ignore"):
        cos_h0 = (np.sin(np.radians(float(min_elevation_deg))) - a_day) / b_day
    h0_day = np.degrees(np.arccos(np.clip(cos_h0, -1.0, 1.0)))
    upper_day = np.degrees(np.arcsin(np.clip(a_day + b_day, -1.0, 1.0)))
    lower_day = np.degrees(np.arcsin(np.clip(a_day - b_day, -1.0, 1.0)))

    f32 = np.float32

    def per_time(day_values):
        return day_values.astype(f32)[inverse]

    lst = np.mod(_gmst_deg_from_days(days) + float(longitude_deg), 360.0).astype(f32)
    hour_angle = lst[:, None] - per_time(np.mod(ra_day, 360.0))
    hour_angle = np.mod(hour_angle + f32(180.0), f32(360.0)) - f32(180.0)      # -180..180
    a, b = per_time(a_day), per_time(b_day)
    step = f32(duration / 60.0 * SIDEREAL_RATE_DEG_PER_H)                       # hour angle swept [deg]

    def elevation_at(h):
        sin_e = np.cos(h * f32(np.pi / 180.0)) * b + a
        return np.degrees(np.arcsin(np.clip(sin_e, f32(-1.0), f32(1.0)))).astype(f32)

    start = elevation_at(hour_angle)
    mid = elevation_at(hour_angle + step / f32(2.0))
    end = elevation_at(hour_angle + step)
    crosses_upper = (hour_angle < 0) & (hour_angle + step >= 0)
    crosses_lower = hour_angle + step >= f32(180.0)
    highest = np.maximum(np.maximum(start, end), np.where(crosses_upper, per_time(upper_day), f32(-90.0)))
    lowest = np.minimum(np.minimum(start, end), np.where(crosses_lower, per_time(lower_day), f32(90.0)))

    minutes = (per_time(h0_day) - hour_angle) * f32(60.0 / SIDEREAL_RATE_DEG_PER_H)
    np.clip(minutes, f32(0.0), f32(horizon_min), out=minutes)
    minutes[(cos_h0 < -1.0)[inverse]] = f32(horizon_min)
    minutes[start < f32(min_elevation_deg)] = f32(0.0)
    return SourceTrack(start, minutes, mid, lowest, highest)


def sun_separation_over_deg(times_utc, ra_deg, dec_deg, duration_min):
    """Closest approach of each source to the sun over a measurement starting at each time.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Start times, UTC; shape (n,).
    ra_deg, dec_deg : numeric
        J2000.0 coordinates of the sources; shape (m,). [deg]
    duration_min : float
        Length of the measurement, >= 0. [min]

    Returns
    -------
    ndarray, shape (n, m)
        The smaller separation of the start and the end [deg].

    Notes
    -----
    The separation is measured on the sky (:func:`advisor.physics.sky.sun_separation_deg`), where
    only the sun moves, by about 0.04 deg an hour: over a measurement of an hour the minimum inside
    the interval is below the smaller end by at most s^2 / (2 d) for an arc s and a separation d,
    less than 0.001 deg at a separation of 1 deg.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 17, 21, 25.
    """
    start_times = np.atleast_1d(_as_datetime64_ns(times_utc)).ravel()
    end_times = start_times + np.timedelta64(int(round(float(duration_min) * 60e9)), "ns")
    return np.fmin(sun_separation_deg(start_times, ra_deg, dec_deg), sun_separation_deg(end_times, ra_deg, dec_deg))
