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

from advisor.physics.ephemeris import _J2000_NS as _J2000
from advisor.physics.ephemeris import _days_since_j2000, _gmst_deg_from_days
from advisor.physics.sky import SIDEREAL_RATE_DEG_PER_H, _precess_days, sun_separation_deg

__all__ = ["SourceTrack", "source_track", "sun_separation_over_deg"]


@dataclass(frozen=True)
class SourceTrack:
    """Elevations of each source over a measurement starting at each time; arrays (n, m) [deg], [min]."""

    elevation_deg: np.ndarray  # at the start
    minutes_above: np.ndarray  # from the start until it drops below the minimum elevation
    mid_elevation_deg: np.ndarray  # halfway through
    lowest_elevation_deg: np.ndarray  # lowest over [t, t + duration]
    highest_elevation_deg: np.ndarray  # highest over [t, t + duration]


def _wrap_180(x: np.ndarray) -> None:
    """Angles to [-180, 180] in place, float32: ``np.mod(x + 180, 360) - 180`` to the bit, fast.

    For y = x + 180 within [-360, 720), fmod(y, 360) is y or, from 360 on, y - 360 (exact:
    Sterbenz's lemma), and numpy's floor-mod then adds 360 to a negative remainder (rounded as
    float32); a zero remainder is +0 there and may be -0 here, which the final -180 makes the same
    -180.  So one subtraction or addition where needed gives the same numbers without numpy's slow
    float remainder.  Anything else (NaN, out of range) goes through ``np.mod``.
    """
    x += np.float32(180.0)
    lo, hi = x.min(initial=0.0), x.max(initial=0.0)
    if lo >= -360.0 and hi < 720.0:
        np.subtract(x, np.float32(360.0), out=x, where=x >= np.float32(360.0))
        np.add(x, np.float32(360.0), out=x, where=x < np.float32(0.0))
    else:
        np.mod(x, np.float32(360.0), out=x)
    x -= np.float32(180.0)


def source_track(
    times_utc, ra_deg, dec_deg, latitude_deg, longitude_deg, duration_min, min_elevation_deg, horizon_min=1440.0
) -> SourceTrack:
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
    ra_day, dec_day = _precess_days(ra, dec, whole_days[:, None] + 0.5)  # (d, m)
    phi = np.radians(float(latitude_deg))
    d = np.radians(dec_day)
    a_day = np.sin(phi) * np.sin(d)  # sin E = a + b cos H
    b_day = np.cos(phi) * np.cos(d)
    with np.errstate(divide="ignore", invalid="ignore"):
        cos_h0 = (np.sin(np.radians(float(min_elevation_deg))) - a_day) / b_day
    h0_day = np.degrees(np.arccos(np.clip(cos_h0, -1.0, 1.0)))
    upper_day = np.degrees(np.arcsin(np.clip(a_day + b_day, -1.0, 1.0)))
    lower_day = np.degrees(np.arcsin(np.clip(a_day - b_day, -1.0, 1.0)))

    f32 = np.float32
    if np.all(inverse[1:] >= inverse[:-1]):  # times in order: repeat each day's row
        counts = np.bincount(inverse, minlength=len(whole_days))

        def per_time(day_values):
            return np.repeat(np.asarray(day_values).astype(f32), counts, axis=0)
    else:

        def per_time(day_values):
            return np.asarray(day_values).astype(f32)[inverse]

    lst = np.mod(_gmst_deg_from_days(days) + float(longitude_deg), 360.0).astype(f32)
    hour_angle = lst[:, None] - per_time(np.mod(ra_day, 360.0))
    _wrap_180(hour_angle)  # -180..180
    a, b = per_time(a_day), per_time(b_day)
    step = f32(duration / 60.0 * SIDEREAL_RATE_DEG_PER_H)  # hour angle swept [deg]

    def elevation_at(offset_deg):
        e = hour_angle + f32(offset_deg)
        e *= f32(np.pi / 180.0)
        np.cos(e, out=e)
        e *= b
        e += a
        np.clip(e, f32(-1.0), f32(1.0), out=e)
        np.arcsin(e, out=e)
        e *= f32(180.0 / np.pi)
        return e

    start = elevation_at(0.0)
    mid = elevation_at(step / f32(2.0))
    end = elevation_at(step)
    highest = np.maximum(start, end)
    crosses_upper = (hour_angle < 0) & (hour_angle >= -step)
    np.copyto(highest, per_time(upper_day), where=crosses_upper)
    lowest = np.minimum(start, end, out=end)
    crosses_lower = hour_angle >= f32(180.0) - step
    np.copyto(lowest, per_time(lower_day), where=crosses_lower)

    minutes = per_time(h0_day)
    minutes -= hour_angle
    minutes *= f32(60.0 / SIDEREAL_RATE_DEG_PER_H)
    np.clip(minutes, f32(0.0), f32(horizon_min), out=minutes)
    never_sets = cos_h0 < -1.0  # (d, m)
    if never_sets.any():
        minutes[never_sets[inverse]] = f32(horizon_min)
    minutes[start < f32(min_elevation_deg)] = f32(0.0)
    return SourceTrack(start, minutes, mid, lowest, highest)


def sun_separation_over_deg(times_utc, ra_deg, dec_deg, duration_min, *, as_float32: bool = False):
    """Closest approach of each source to the sun over a measurement starting at each time.

    Parameters
    ----------
    times_utc : datetime64 array, pandas DatetimeIndex/Series or scalar
        Start times, UTC; shape (n,).
    ra_deg, dec_deg : numeric
        J2000.0 coordinates of the sources; shape (m,). [deg]
    duration_min : float
        Length of the measurement, >= 0. [min]

    as_float32 : bool, default False
        Return the float32 numbers the result is made of (its float64 values are exactly these).

    Returns
    -------
    ndarray, shape (n, m)
        The least separation over [t, t + duration] [deg]; NaN for NaT.

    Notes
    -----
    The separation is measured on the sky (:func:`advisor.physics.sky.sun_separation_deg`), where
    only the sun moves, by about 0.04 deg an hour.  It is evaluated on the whole hours (UTC) around
    the times and interpolated linearly in between; the least value over the measurement is then
    the smaller end or a whole hour inside it.  Between two hours the true separation departs from
    the straight line by at most s^2 / (8 d) for the hour's arc s and a separation d: below 0.001
    deg at d = 0.2 deg.  The nodes are fixed hours, so a time's value never depends on the others.

    References
    ----------
    Meeus, J. (1998). *Astronomical Algorithms*, 2nd ed., Willmann-Bell, ch. 17, 21, 25.
    """
    duration = float(duration_min)
    if not duration >= 0.0:
        raise ValueError(f"duration_min must be >= 0, got {duration_min!r}")
    hours = np.atleast_1d(_days_since_j2000(times_utc)).ravel() * 24.0
    m = np.atleast_1d(np.asarray(ra_deg, dtype=float)).size
    out = np.full((hours.size, m), np.nan, dtype=np.float32 if as_float32 else float)
    ok = np.isfinite(hours)
    if not ok.any():
        return out
    h = hours[ok]
    first = int(np.floor(h.min()))
    nodes = first + np.arange(int(np.ceil(h.max() + duration / 60.0)) - first + 2)
    node_times = _J2000 + (nodes * 3_600_000_000_000).astype("timedelta64[ns]")
    per_hour = sun_separation_deg(node_times, ra_deg, dec_deg).astype(np.float32)  # (hours, m)
    slope = np.diff(per_hour, axis=0)

    def at(x):
        i = np.floor(x).astype(np.int64)
        value = slope[i - first]
        value *= (x - i).astype(np.float32)[:, None]
        value += per_hour[i - first]
        return value

    end = h + duration / 60.0
    least = np.minimum(at(h), at(end))
    hour = np.floor(h).astype(np.int64)
    for k in range(1, int(np.ceil(duration / 60.0)) + 1):  # whole hours inside the measurement
        node = hour + k
        inside = np.broadcast_to((node < end)[:, None], least.shape)
        np.minimum(least, per_hour[np.minimum(node, nodes[-1]) - first], out=least, where=inside)
    if ok.all():
        return least if as_float32 else least.astype(float)  # float32 steps: ~1e-5 deg
    out[ok] = least
    return out
