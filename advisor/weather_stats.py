"""Weather statistics of a feed: its cadence, wind over a window, the temperature rate, dew and frost.

    cadence = sample_cadence_min(time_ns, kind)
    rolled = _rolling(good_rows, cadence)        # wind mean/gust and temperature rate per sample
    flags = moisture_features(temp, dew, rh, visibility, site)

Pure numpy/pandas; :mod:`advisor.features` takes these at each evaluation time.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.io.site import Site
from advisor.io.times import utc_ns as _ns
from advisor.physics.moisture import (
    frost_point_from_dew_point_c,
    saturation_vapour_pressure_hpa,
    saturation_vapour_pressure_ice_hpa,
)

#: Averaging period of the wind statistics for a feed of one sample a minute or faster [min].
WIND_WINDOW_MIN = 10.0
TEMP_RATE_WINDOW_MIN = 60.0
#: Fewest part of its window a statistic's samples must cover (count × cadence / window).
MIN_WINDOW_COVERAGE = 0.5


def sample_cadence_min(time_ns: np.ndarray, kind: np.ndarray) -> np.ndarray:
    """Each good sample's cadence: the median interval between samples of its kind [min].

    Observations and forecast rows have their own cadence (a 1-minute mast and an hourly
    forecast in one frame); NaN for a kind with fewer than two samples.
    """
    out = np.full(len(time_ns), np.nan)
    if len(time_ns) < 2:
        return out
    dt_prev = np.diff(time_ns, prepend=time_ns[0]) / 6e10
    codes, uniques = pd.factorize(np.asarray(kind, dtype=object))  # by hashing, never sorting the texts
    for k in range(len(uniques)):
        mine = codes == k if len(uniques) > 1 else np.ones(len(codes), dtype=bool)
        intervals = dt_prev[mine][1:]
        if len(intervals):
            out[mine] = float(np.median(intervals))
    return out


def statistic_windows_min(cadence_min: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The windows the wind statistics and the temperature rate are computed over [min].

    :data:`WIND_WINDOW_MIN` and :data:`TEMP_RATE_WINDOW_MIN`, or the feed's cadence where it is
    coarser: an hourly sample's mean wind is a 1-h mean and its gust a 1-h maximum, and the
    temperature rate of a 3-hourly feed is over 3 h.  NaN cadence (too few samples): the defaults.
    """
    cadence = np.where(np.isfinite(cadence_min), cadence_min, 0.0)
    return np.maximum(WIND_WINDOW_MIN, cadence), np.maximum(TEMP_RATE_WINDOW_MIN, cadence)


def _rolling(good: pd.DataFrame, cadence_min: np.ndarray) -> pd.DataFrame:
    """Wind statistics and the temperature rate at each good sample, over windows that adapt to
    the cadence (:func:`statistic_windows_min`).

    A statistic counts only when its samples cover at least :data:`MIN_WINDOW_COVERAGE` of its
    window, each sample covering one interval of its feed's cadence (never the silence before
    it).  So a single calm row after 14 silent minutes never stands for ten minutes of wind: the
    statistic is NaN and the row is not good.  A slower feed's sample (hourly) covers its own
    interval and stands for it.
    """
    index = pd.DatetimeIndex(good["time"])  # only the columns used, not a copy of the frame
    series = {name: pd.Series(good[name].to_numpy(), index=index) for name in ("wind_mean_ms", "wind_gust_ms")}
    out = pd.DataFrame(index=index)
    wind_window, temp_window = statistic_windows_min(cadence_min)
    t_ns = _ns(index)
    mean = np.full(len(index), np.nan)
    gust = np.full(len(index), np.nan)
    for window_min in np.unique(wind_window):  # one pass per cadence (observed, forecast)
        rows = wind_window == window_min
        window = pd.Timedelta(minutes=float(window_min))
        dt_prev = np.diff(t_ns, prepend=t_ns[0] - int(window_min * 6e10)) / 6e10
        covers = np.minimum(np.minimum(dt_prev, cadence_min), window_min)  # NaN cadence: covers nothing
        covers = np.where(np.isfinite(covers), covers, 0.0)
        coverage = pd.Series(covers, index=index).rolling(window).sum().to_numpy()
        covered = coverage >= MIN_WINDOW_COVERAGE * window_min - 1e-9
        # pandas' rolling mean is an online sum, so its last bits depend on where the series
        # starts; rounding to 1e-6 m/s (far below any anemometer's resolution) makes a row's
        # value the same however the frame was cut (check, outlook and replay chunks agree).
        rolled_mean = series["wind_mean_ms"].rolling(window).mean().round(6).to_numpy()
        rolled_gust = series["wind_gust_ms"].rolling(window).max().to_numpy()
        mean[rows] = np.where(covered, rolled_mean, np.nan)[rows]
        gust[rows] = np.where(covered, rolled_gust, np.nan)[rows]
    out["wind_mean_ms"] = mean
    out["wind_gust_ms"] = gust
    out["wind_window_min"] = wind_window
    out["temp_rate_window_min"] = temp_window
    temp = good["air_temp_c"].to_numpy()
    back = np.searchsorted(t_ns, t_ns - (temp_window * 60e9).astype(np.int64), side="left")
    dt_h = (t_ns - t_ns[back]) / 3.6e12
    with np.errstate(invalid="ignore", divide="ignore"):
        rate = (temp - temp[back]) / dt_h
    # need at least half the window of history for a meaningful rate
    out["air_temp_rate_c_per_h"] = np.where(dt_h >= MIN_WINDOW_COVERAGE * temp_window / 60.0, rate, np.nan)
    return out


def moisture_features(air_temp_c, dew_point_c, rel_humidity_pct, visibility_m, site: Site) -> dict[str, np.ndarray]:
    """Dew and frost: spreads to saturation, humidity over ice, and the fog flag.

    Relative humidity is over water at every temperature, as hygrometers report it (WMO-No. 8,
    ch. 4); below 0 °C the air is buffered near saturation over ice, which is RH_w = 100 e_i/e_w
    (86 % at -15 °C), so the fog test uses the frost-point spread and RH over ice there, with the
    site's same thresholds.  The frost point comes from the dew point (the same vapour pressure;
    forecast rows carry their dew-point margin); where the dew point is 0 °C or above, dew forms
    first (and freezes on a surface below 0 °C), so the dew point stands in for it.
    """
    th = site.thresholds
    temp = np.asarray(air_temp_c, dtype=float)
    dew = np.asarray(dew_point_c, dtype=float)
    below = temp < 0.0
    with np.errstate(invalid="ignore"):
        frost = np.where(dew < 0.0, np.asarray(frost_point_from_dew_point_c(dew), dtype=float), dew)
        rh_ice = np.where(
            below,
            100.0
            * np.asarray(saturation_vapour_pressure_hpa(dew))
            / np.asarray(saturation_vapour_pressure_ice_hpa(temp)),
            np.nan,
        )
    dew_spread = temp - dew
    frost_spread = temp - frost
    humid = np.where(
        below,
        (frost_spread < th.fog_spread_c) & (rh_ice >= th.fog_rel_humidity_pct),
        (dew_spread < th.fog_spread_c) & (np.asarray(rel_humidity_pct) >= th.fog_rel_humidity_pct),
    )
    return {
        "dew_point_spread_c": dew_spread,
        "below_freezing": below,
        "frost_point_c": frost,
        "frost_point_spread_c": frost_spread,
        "rel_humidity_ice_pct": rh_ice,
        "fog": humid | (np.asarray(visibility_m) < th.fog_visibility_m),
    }
