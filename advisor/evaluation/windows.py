"""Windows: runs of consecutive time steps in which a method can be done, found by run-length logic.

    starts, stops = runs(mask)                      # [start, stop) index pairs of True runs
    table = find_windows(times_utc, step_min, usable, min_length_min,
                         wind_mean_ms=..., wind_gust_ms=..., dew_point_spread_c=...,
                         ruze_efficiency=...)       # one row per window, long enough only
    first = next_window(table)                      # the earliest window as a dict, or None

A step at time ``t`` stands for the interval ``[t, t + step)``: a window of steps ``i..j``
starts at ``t_i`` and ends at ``t_j + step``, so its edges fall exactly on step boundaries and
its length is a whole number of steps.  Steps that are not ``usable`` (gaps in a forecast,
unknown or infeasible steps) end a window; so does any jump in the times that is not exactly
one step.  Everything is numpy over whole arrays: no Python loop over steps.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.io.times import utc_ns as _ns

WINDOW_COLUMNS = (
    "start_utc",
    "end_utc",
    "length_min",
    "first_step",
    "stop_step",
    "max_wind_mean_ms",
    "max_wind_gust_ms",
    "min_dew_point_spread_c",
    "mean_ruze_efficiency",
    "advised_fraction",
    "beyond_horizon",
    "open_end",
)


def runs(mask, breaks=None) -> tuple[np.ndarray, np.ndarray]:
    """Start and stop indices of the runs of True in ``mask``.

    Parameters
    ----------
    mask : array of bool, length n
        Steps that may belong to a run.
    breaks : array of bool, length n, optional
        ``breaks[i]`` true means a run may not continue from step ``i - 1`` into step ``i``
        (e.g. a jump in time); ``breaks[0]`` is ignored.

    Returns
    -------
    starts, stops : int arrays
        Run ``k`` covers steps ``starts[k] .. stops[k] - 1``.
    """
    m = np.asarray(mask, dtype=bool)
    n = len(m)
    if n == 0:
        return np.array([], dtype=np.int64), np.array([], dtype=np.int64)
    prev = np.concatenate(([False], m[:-1]))
    nxt = np.concatenate((m[1:], [False]))
    if breaks is not None:
        b = np.asarray(breaks, dtype=bool).copy()
        b[0] = False
        prev = prev & ~b
        nxt = nxt & ~np.concatenate((b[1:], [False]))
    starts = np.flatnonzero(m & ~prev)
    stops = np.flatnonzero(m & ~nxt) + 1
    return starts.astype(np.int64), stops.astype(np.int64)


def _segment_reduce(values, starts, stops, how: str) -> np.ndarray:
    """NaN-aware max/min/mean/any of ``values`` over each ``[start, stop)`` segment."""
    x = np.asarray(values, dtype=float)
    if len(starts) == 0:
        return np.array([], dtype=float)
    finite = np.isfinite(x)
    # reduceat over interleaved [start, stop] boundaries; pad so stop == n is a valid index
    bounds = np.column_stack((starts, stops)).ravel()
    if how in ("max", "min"):
        fill = -np.inf if how == "max" else np.inf
        padded = np.append(np.where(finite, x, fill), fill)
        ufunc = np.maximum if how == "max" else np.minimum
        out = ufunc.reduceat(padded, bounds)[::2]
        return np.where(np.isfinite(out), out, np.nan)
    counts = np.add.reduceat(np.append(finite.astype(float), 0.0), bounds)[::2]
    sums = np.add.reduceat(np.append(np.where(finite, x, 0.0), 0.0), bounds)[::2]
    if how == "mean":
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(counts > 0, sums / counts, np.nan)
    if how == "any":
        return sums > 0
    raise ValueError(f"unknown reduction {how!r}")


def find_windows(
    times_utc,
    step_min: float,
    usable,
    min_length_min: float,
    *,
    wind_mean_ms,
    wind_gust_ms,
    dew_point_spread_c,
    ruze_efficiency,
    advised=None,
    beyond_horizon=None,
) -> pd.DataFrame:
    """Windows at least ``min_length_min`` long in which every step is ``usable``.

    Parameters
    ----------
    times_utc : DatetimeIndex (UTC), length n
        Step start times, normally a regular grid ``t0 + k * step``.
    step_min : float
        Step length. [min]
    usable : array of bool
        Steps in which the method can be done (feasible, data good, no gap).
    min_length_min : float
        Shortest window offered. [min]
    wind_mean_ms, wind_gust_ms, dew_point_spread_c, ruze_efficiency : arrays
        Per-step mean wind [m/s], gust [m/s], dew-point spread [°C] and expected Ruze efficiency.
    advised : array of bool, optional
        Steps in which this method is the verdict (gives ``advised_fraction``).
    beyond_horizon : array of bool, optional
        Steps whose forecast lies beyond its issue time's horizon.

    Returns
    -------
    pandas.DataFrame
        One row per window with :data:`WINDOW_COLUMNS`: start and end (UTC timestamps), length
        [min], step indices ``[first_step, stop_step)``, worst (highest) mean wind and gust,
        lowest dew-point spread, mean Ruze efficiency, share of steps in which the method is
        the verdict, whether any step is beyond the forecast horizon, and ``open_end`` when the
        window reaches the last step (it may last longer than the outlook shows).
    """
    t_ns = _ns(times_utc)
    n = len(t_ns)
    step_ns = int(round(float(step_min) * 60e9))
    if step_ns <= 0:
        raise ValueError(f"step_min must be positive, got {step_min!r}")
    breaks = np.concatenate(([False], np.diff(t_ns) != step_ns)) if n else np.zeros(0, dtype=bool)
    starts, stops = runs(usable, breaks)
    length_min = (stops - starts) * float(step_min)
    keep = length_min >= float(min_length_min) - 1e-9
    starts, stops, length_min = starts[keep], stops[keep], length_min[keep]
    advised = np.zeros(n, dtype=bool) if advised is None else np.asarray(advised, dtype=bool)
    beyond = np.zeros(n, dtype=bool) if beyond_horizon is None else np.asarray(beyond_horizon, dtype=bool)
    start_ns = t_ns[starts] if n else np.array([], dtype=np.int64)
    end_ns = t_ns[stops - 1] + step_ns if n else np.array([], dtype=np.int64)
    table = pd.DataFrame(
        {
            "start_utc": pd.DatetimeIndex(start_ns.astype("datetime64[ns]")).tz_localize("UTC"),
            "end_utc": pd.DatetimeIndex(np.asarray(end_ns).astype("datetime64[ns]")).tz_localize("UTC"),
            "length_min": length_min,
            "first_step": starts,
            "stop_step": stops,
            "max_wind_mean_ms": _segment_reduce(wind_mean_ms, starts, stops, "max"),
            "max_wind_gust_ms": _segment_reduce(wind_gust_ms, starts, stops, "max"),
            "min_dew_point_spread_c": _segment_reduce(dew_point_spread_c, starts, stops, "min"),
            "mean_ruze_efficiency": _segment_reduce(ruze_efficiency, starts, stops, "mean"),
            "advised_fraction": _segment_reduce(advised, starts, stops, "mean"),
            "beyond_horizon": _segment_reduce(beyond, starts, stops, "any").astype(bool),
            "open_end": stops == n,
        },
        columns=list(WINDOW_COLUMNS),
    )
    return table


def window_dict(row: pd.Series) -> dict:
    """One window as a JSON-ready dict (times ISO 8601 UTC with ``Z``)."""

    def num(v, nd):
        v = float(v)
        return None if not np.isfinite(v) else round(v, nd) + 0.0  # no "-0.0"

    return {
        "start_utc": row["start_utc"].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "end_utc": row["end_utc"].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "length_min": num(row["length_min"], 1),
        "max_wind_mean_ms": num(row["max_wind_mean_ms"], 2),
        "max_wind_gust_ms": num(row["max_wind_gust_ms"], 2),
        "min_dew_point_spread_c": num(row["min_dew_point_spread_c"], 2),
        "mean_ruze_efficiency": num(row["mean_ruze_efficiency"], 4),
        "advised_fraction": num(row["advised_fraction"], 3),
        "beyond_horizon": bool(row["beyond_horizon"]),
        "open_end": bool(row["open_end"]),
    }


def next_window(table: pd.DataFrame) -> dict | None:
    """The earliest window of ``table`` as a dict, or None when there is none."""
    if len(table) == 0:
        return None
    return window_dict(table.iloc[int(np.argmin(table["start_utc"].to_numpy()))])
