"""The weather of past attempts, computed by the same feature code as ``check`` (numpy/pandas only).

    weather = weather_at(frame, times, site)          # what `attempt add` records at an attempt
    why = not_covered(weather, 0, frame, site)        # None, or why the feed gives no weather then
    hf = history_features(history, site, feed)        # features of every history row, for `train`

An attempt row either carries its own weather (the columns of
:data:`advisor.io.history.WEATHER_COLUMNS`, as ``advisor attempt add`` records them) or only
its time, method and outcome; then its weather is computed from a feed (``train --feed``, or the
site's feed) at its time.  Either way the features are computed by
:func:`advisor.features.compute_features`, exactly as ``check`` computes them.  The windowed
values a single row cannot recompute (10-minute mean and maximum wind, one-hour temperature
rate) are taken as recorded.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from advisor.features import LOOKBACK, TEMP_RATE_WINDOW_MIN, compute_features, row_features
from advisor.io.feed import CHECK_TAIL_BYTES, Feed, canonical_frame, read_feed
from advisor.io.history import REQUIRED_WEATHER, WEATHER_COLUMNS, History, HistoryError, own_weather
from advisor.io.references import Registry
from advisor.io.site import CANONICAL_COLUMNS, FeedLayout, Site

#: Windowed features a history records directly (they cannot be recomputed from one row).
RECORDED_FEATURES = ("wind_mean_ms", "wind_gust_ms", "air_temp_rate_c_per_h")
#: Where a history row's features came from.
SOURCES = ("history", "feed", "none")


def weather_at(frame: pd.DataFrame, times_utc, site: Site) -> pd.DataFrame:
    """The weather at each of ``times_utc`` from the observed rows of a canonical feed ``frame``.

    Columns: ``time``, every column of :data:`~advisor.io.history.WEATHER_COLUMNS`, ``data_ok``,
    ``data_age_min`` and ``sample_time`` (the feed sample each row reads, NaT if none).
    """
    observed = frame[frame["kind"] == "observed"] if "kind" in frame else frame
    rows = row_features(observed, times_utc, site, Registry.empty())
    out = rows[["time", *WEATHER_COLUMNS, "data_ok", "data_age_min"]].copy()
    source = rows["source_row"].to_numpy()
    sample_ns = pd.DatetimeIndex(observed["time"]).as_unit("ns").asi8 if len(observed) else np.zeros(1, np.int64)
    nat = np.iinfo(np.int64).min  # NaT in datetime64[ns]
    picked = np.where(source >= 0, sample_ns[np.clip(source, 0, len(sample_ns) - 1)], nat)
    out["sample_time"] = pd.DatetimeIndex(picked.astype("datetime64[ns]")).tz_localize("UTC")
    return out


def read_feed_for(path, layout: FeedLayout, times_utc) -> Feed:
    """The feed at ``path``, read only from its tail when that holds every time of ``times_utc``
    with the history the features need before it (:data:`advisor.features.LOOKBACK`); else whole."""
    feed = read_feed(path, layout, tail_bytes=CHECK_TAIL_BYTES)
    first = feed.quality.first_time_utc
    earliest = pd.DatetimeIndex(times_utc).min()
    if first is not None and earliest - LOOKBACK >= first:
        return feed
    return read_feed(path, layout)


def not_covered(weather: pd.DataFrame, i: int, frame: pd.DataFrame, site: Site) -> str | None:
    """Why the feed gives no usable weather at row ``i`` of :func:`weather_at`, or None when it does."""
    observed = frame[frame["kind"] == "observed"] if "kind" in frame else frame
    t = pd.Timestamp(weather["time"].iloc[i])
    when = f"{t:%Y-%m-%dT%H:%M:%SZ}"
    if len(observed) == 0:
        return "the feed has no observations"
    first, last = pd.Timestamp(observed["time"].iloc[0]), pd.Timestamp(observed["time"].iloc[-1])
    span = f"its observations run {first:%Y-%m-%dT%H:%M}Z .. {last:%Y-%m-%dT%H:%M}Z"
    if t < first:
        return f"{when} is before the feed starts ({span})"
    age = float(weather["data_age_min"].iloc[i])
    cadence = weather["feed_cadence_min"].iloc[i] if "feed_cadence_min" in weather else None
    limit = float(site.feed.age_limit_min(cadence))
    if t > last + pd.Timedelta(minutes=limit):
        return f"{when} is after the feed ends ({span})"
    if not np.isfinite(age) or age > limit:
        return f"the feed has no good sample within {limit:g} min before {when} ({span})"
    if not bool(weather["data_ok"].iloc[i]):
        return f"the feed's latest sample at {when} is implausible or incomplete"
    missing = [c for c in REQUIRED_WEATHER if not np.isfinite(float(weather[c].iloc[i]))]
    if "air_temp_rate_c_per_h" in missing:
        return (
            f"the feed has less than {TEMP_RATE_WINDOW_MIN / 2:g} min of samples before {when}, "
            "too little for the temperature rate"
        )
    if missing:
        return f"the feed gives no {', '.join(missing)} at {when}"
    return None


@dataclass(frozen=True)
class HistoryFeatures:
    """Features of every history row (same order) and where each row's weather came from."""

    features: pd.DataFrame
    source: np.ndarray  # per row: "history", "feed" or "none" (SOURCES)
    feed_source: str | None  # the feed that completed rows, if any

    def count(self, source: str) -> int:
        return int((self.source == source).sum())


def _recorded_features(
    frame: pd.DataFrame, times: pd.DatetimeIndex, site: Site, registry: Registry, freq_ghz: float, source: str
) -> pd.DataFrame:
    """Features from the weather a history records at each attempt (rows without it get data_ok false)."""
    table = pd.DataFrame({"time": times.strftime("%Y-%m-%dT%H:%M:%SZ")})
    for name in CANONICAL_COLUMNS:
        if name in frame.columns:
            table[name] = frame[name].to_numpy(dtype=float)
        elif name in REQUIRED_WEATHER:
            table[name] = np.nan
    recorded = canonical_frame(
        table, FeedLayout(max_feed_age_min=site.feed.max_feed_age_min, max_gap_min=1e9), source=source
    )
    features = compute_features(recorded.frame, times, site, registry, freq_ghz)
    for name in RECORDED_FEATURES:
        values = frame[name].to_numpy(dtype=float) if name in frame.columns else np.full(len(frame), np.nan)
        features[name] = values
    # features derived from the windowed wind follow the recorded values (as features.row_features derives them)
    gust, mean = features["wind_gust_ms"].to_numpy(), features["wind_mean_ms"].to_numpy()
    with np.errstate(invalid="ignore", divide="ignore"):
        features["gust_factor"] = np.where(mean >= 0.5, gust / mean, np.nan)
    th = site.thresholds
    features["wind_pointing_error_arcsec"] = th.pointing_error_arcsec_at_4ms * (gust / 4.0) ** 2
    features["pointing_beam_fraction"] = (
        features["wind_pointing_error_arcsec"].to_numpy() / features["beam_fwhm_arcsec"].to_numpy()
    )
    ok = features["data_ok"].to_numpy(dtype=bool) & own_weather(frame)
    features["data_ok"] = ok
    return features


def history_features(
    history: History, site: Site, feed: Feed | None = None, registry: Registry | None = None, freq_ghz: float = 86.0
) -> HistoryFeatures:
    """Features at each attempt (one row per history row, same order), as ``check`` computes them.

    Rows that carry their own weather use it; the others are computed from ``feed`` (its
    observed rows up to each attempt's time).  Rows with neither keep ``data_ok`` false and are
    counted as ``none``.  ``registry`` gives the reference-scan features (default: none).
    """
    frame = history.frame.reset_index(drop=True)
    times = pd.DatetimeIndex(frame["time"])
    registry = registry if registry is not None else Registry.empty()
    own = own_weather(frame)
    if not own.any() and feed is None:
        missing = next((c for c in REQUIRED_WEATHER if c not in frame.columns), REQUIRED_WEATHER[0])
        raise HistoryError(
            f"no weather column {missing!r} and no --feed archive to compute it from",
            source=history.source,
            line=1,
            hint=f"add the columns {', '.join(REQUIRED_WEATHER)}, record attempts with 'advisor "
            "attempt add', or pass --feed ARCHIVE.csv",
        )
    features = _recorded_features(frame, times, site, registry, freq_ghz, history.source)
    source = np.where(own & features["data_ok"].to_numpy(dtype=bool), "history", "none").astype(object)
    if feed is not None and (~own).any():
        observed = feed.frame[feed.frame["kind"] == "observed"]
        rows = np.flatnonzero(~own)
        completed = compute_features(observed, times[rows], site, registry, freq_ghz)
        completed.index = rows
        features = features.copy()
        for name in features.columns:
            if name in completed.columns:
                column = features[name].to_numpy().copy() if name != "calibrator_name" else None
                if column is None:
                    continue
                column[rows] = completed[name].to_numpy(dtype=column.dtype)
                features[name] = column
        source[rows] = np.where(completed["data_ok"].to_numpy(dtype=bool), "feed", "none")
    return HistoryFeatures(features, source, feed.source if feed is not None else None)
