"""Outlook: the call at every forecast step and the windows for each method.

    frame = combine_frames(feed_frame, forecast_frame)     # one canonical frame; observed wins ties
    outlook = compute_outlook(frame, start_utc, hours, site, registry, rules, freq_ghz, odds=None,
                              min_duration_min=None)      # pure: arrays in, Outlook out
    nxt = next_windows_after(frame, at_utc, site, registry, rules, freq_ghz)   # for ``check``

Its views (plain text, rich panel, SVG, JSON, CSV) are in :mod:`advisor.views` (``outlook_*``).

The steps are a regular grid at the forecast's own spacing (its median row interval), from
``start_utc`` for ``hours``.  Every step goes through the same vectorised path as ``check``
(:func:`advisor.evaluation.evaluate.evaluate`), after the site's forecast margins are applied to the
forecast rows (``forecast.wind_margin_pct``, ``forecast.dew_point_margin_c``).  A step with no
forecast row of its own (the last row at or before it is a whole step old or more) is a **gap**:
its verdict is ``undetermined`` and it ends any window.  A step whose forecast row lies further
than ``forecast.horizon_h`` past its issue time is flagged ``beyond_horizon``.

Windows (:mod:`advisor.evaluation.windows`) are runs of steps in which a method is feasible on good data,
at least the method's duration plus ``forecast.settling_min`` long.  A step at ``t`` stands for
``[t, t + step)``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from advisor.catalogue import STEP_FEATURES
from advisor.errors import FeedError
from advisor.evaluation.evaluate import OddsFunction, evaluate
from advisor.evaluation.forecastcheck import compare_with_forecast, trust_observation
from advisor.evaluation.stability import changes_at_once, stabilise
from advisor.evaluation.windows import find_windows, next_window
from advisor.fmt import hours_text, plural
from advisor.io.references import Registry
from advisor.io.site import Site
from advisor.io.times import utc_ns as _ns
from advisor.physics.moisture import relative_humidity_pct
from advisor.physics.sun import SUNRISE_SUNSET_ALTITUDE_DEG
from advisor.rules.ruleset import RuleSet
from advisor.vocabulary import METHODS

#: How far ``check`` looks ahead for the next window when its feed carries future rows [h].
NEXT_WINDOW_LOOKAHEAD_H = 48.0
SUNRISE_SUNSET_ELEVATION_DEG = SUNRISE_SUNSET_ALTITUDE_DEG
#: How a gap (a step without a forecast row) is shown in the strip; the notes name it.
GAP_LETTER = "?"


@dataclass(frozen=True)
class Outlook:
    """Everything an outlook found, ready to render (no computing left for the views)."""

    site: Site
    freq_ghz: float
    requested_from_utc: pd.Timestamp
    requested_hours: float
    step_min: float
    steps: pd.DataFrame  # one row per step (see step_frame)
    windows: dict[str, pd.DataFrame]  # method -> advisor.evaluation.windows table
    min_window_min: dict[str, float]  # method -> shortest window offered [min]
    next_window: dict[str, dict | None]  # method -> first window or None
    sun_events: pd.DataFrame  # event (sunrise/sunset), time_utc, step
    spans: pd.DataFrame  # runs of one verdict with the rules that blocked each method
    margins: dict
    horizon_h: float
    issued_utc: tuple[pd.Timestamp, ...]
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def start_utc(self) -> pd.Timestamp:
        return self.steps["time"].iloc[0]

    @property
    def end_utc(self) -> pd.Timestamp:
        return self.steps["time"].iloc[-1] + pd.Timedelta(minutes=self.step_min)


# --- the pure core -------------------------------------------------------------------------


def combine_frames(feed_frame: pd.DataFrame, forecast_frame: pd.DataFrame | None) -> pd.DataFrame:
    """One canonical frame from the site's feed and a forecast file (all its rows ``forecast``).

    On equal times the feed's row is kept (an observation beats a forecast for the same minute).
    """
    if forecast_frame is None:
        return feed_frame
    fc = forecast_frame.copy()
    fc["kind"] = "forecast"
    both = pd.concat([feed_frame, fc], ignore_index=True, sort=False)
    both = both.sort_values("time", kind="stable")
    both = both[~both["time"].duplicated(keep="first").to_numpy()].reset_index(drop=True)
    for flag in ("good", "q_implausible", "q_missing", "q_gap_before"):
        if flag in both:
            both[flag] = both[flag].fillna(False).astype(bool)
    return both


def apply_forecast_margins(frame: pd.DataFrame, wind_margin_pct: float, dew_point_margin_c: float) -> pd.DataFrame:
    """Forecast rows made more pessimistic before the rules see them (a copy; observed rows untouched).

    Wind and gusts are multiplied by ``1 + wind_margin_pct / 100``; the dew point is raised by
    ``dew_point_margin_c`` (never above the air temperature) and the relative humidity follows
    it, RH = 100 e_s(T_d) / e_s(T) (Magnus form, Alduchov & Eskridge 1996).
    """
    fc = (frame["kind"] == "forecast").to_numpy()
    if not fc.any() or (wind_margin_pct <= 0 and dew_point_margin_c <= 0):
        return frame
    out = frame.copy()
    if wind_margin_pct > 0:
        factor = 1.0 + wind_margin_pct / 100.0
        for name in ("wind_mean_ms", "wind_gust_ms"):
            col = out[name].to_numpy(dtype=float).copy()
            col[fc] *= factor
            out[name] = col
    if dew_point_margin_c > 0:
        temp = out["air_temp_c"].to_numpy(dtype=float)
        dew = out["dew_point_c"].to_numpy(dtype=float).copy()
        dew[fc] = np.minimum(dew[fc] + dew_point_margin_c, temp[fc])
        rh = out["rel_humidity_pct"].to_numpy(dtype=float).copy()
        rh[fc] = np.minimum(relative_humidity_pct(temp[fc], dew[fc]), 100.0)
        out["dew_point_c"] = dew
        out["rel_humidity_pct"] = rh
    return out


def select_rows(frame: pd.DataFrame, start_utc: pd.Timestamp) -> tuple[pd.DataFrame, bool]:
    """Rows an outlook may use, and whether observed rows after ``start_utc`` are among them.

    Observations supersede forecasts: every observed row, and the forecast rows after the last
    observed one.  Observed rows after ``start_utc`` (an outlook from a past time, or an archive
    without forecast rows) are hindsight, and the outlook says so.
    """
    t = _ns(frame["time"])
    s = _ns(pd.DatetimeIndex([start_utc]))[0]
    is_fc = (frame["kind"] == "forecast").to_numpy()
    last_observed = t[~is_fc].max() if (~is_fc).any() else np.iinfo(np.int64).min
    use = ~is_fc | (t > last_observed)
    return frame[use].reset_index(drop=True), bool((~is_fc & (t > s)).any())


def step_grid(frame: pd.DataFrame, start_utc: pd.Timestamp, hours: float, source: str = "<feed>"):
    """Regular step times from ``start_utc`` for ``hours``.

    The step is the median spacing of the forecast rows after ``start_utc`` (of all rows after it
    when there are fewer than two forecast rows); the grid is aligned on the first of those rows.
    Returns ``(times DatetimeIndex UTC, step_min)``.  Raises FeedError when the frame has fewer
    than two rows after ``start_utc``.
    """
    t_all = _ns(frame["time"])
    s = int(_ns(pd.DatetimeIndex([start_utc]))[0])
    after = t_all >= s
    future = np.unique(t_all[after])
    if len(future) < 2:
        t = np.unique(t_all)
        first, last = (pd.Timestamp(t[0], tz="UTC"), pd.Timestamp(t[-1], tz="UTC")) if len(t) else (None, None)
        span = f"; the feed runs from {first:%Y-%m-%dT%H:%MZ} to {last:%Y-%m-%dT%H:%MZ}" if first is not None else ""
        raise FeedError(
            f"no forecast rows after {start_utc:%Y-%m-%dT%H:%M:%SZ}{span}",
            source=source,
            hint="pass --from inside the forecast, or a feed/--forecast file with future rows",
        )
    forecast = np.unique(t_all[after & (frame["kind"] == "forecast").to_numpy()])
    base = forecast if len(forecast) >= 2 else future
    step_ns = int(np.median(np.diff(base)))
    step_ns = max(60_000_000_000, int(round(step_ns / 1e9)) * 1_000_000_000)  # whole seconds, >= 1 min
    anchor = int(base[0])
    limit = min(s + int(round(hours * 3.6e12)), int(future[-1]) + step_ns)
    k0 = -((anchor - s) // step_ns)  # ceil((s - anchor) / step)
    k1 = -((anchor - limit) // step_ns)  # ceil((limit - anchor) / step)
    grid = anchor + np.arange(k0, max(k0, k1), dtype=np.int64) * step_ns
    grid = grid[grid < limit]
    if len(grid) == 0:
        raise FeedError(
            f"no forecast steps between {start_utc:%Y-%m-%dT%H:%MZ} and the end of the forecast",
            source=source,
            hint="pass a longer --hours or an earlier --from",
        )
    return pd.DatetimeIndex(grid.astype("datetime64[ns]")).tz_localize("UTC"), step_ns / 6e10


def _sun_events(times: pd.DatetimeIndex, sun_el: np.ndarray, step_min: float) -> pd.DataFrame:
    """Sunrise/sunset between steps, by linear interpolation of the sun's elevation."""
    up = sun_el >= SUNRISE_SUNSET_ELEVATION_DEG
    i = np.flatnonzero(up[1:] != up[:-1]) + 1
    if len(i) == 0:
        return pd.DataFrame(
            {
                "event": pd.Series([], dtype=object),
                "time_utc": pd.DatetimeIndex([], tz="UTC"),
                "step": np.array([], dtype=np.int64),
            }
        )
    e0, e1 = sun_el[i - 1], sun_el[i]
    frac = np.clip((SUNRISE_SUNSET_ELEVATION_DEG - e0) / (e1 - e0), 0.0, 1.0)
    t = _ns(times)
    when = t[i - 1] + np.round(frac * (t[i] - t[i - 1])).astype(np.int64)
    step = np.where(frac < 1.0, i - 1, i)  # the cell [t, t + step) that holds the event
    return pd.DataFrame(
        {
            "event": np.where(up[i], "sunrise", "sunset").astype(object),
            "time_utc": pd.DatetimeIndex(when.astype("datetime64[ns]")).tz_localize("UTC"),
            "step": step,
        }
    )


def _spans(
    times: pd.DatetimeIndex, category: np.ndarray, blocked: dict[str, dict[str, np.ndarray]], step_min: float
) -> pd.DataFrame:
    """Runs of one category (a verdict, or ``gap``) with the blocking rules that fired in each."""
    n = len(category)
    change = np.concatenate(([True], category[1:] != category[:-1]))
    starts = np.flatnonzero(change)
    stops = np.append(starts[1:], n)
    t = _ns(times)
    out = {
        "category": category[starts],
        "start_utc": pd.DatetimeIndex(t[starts].astype("datetime64[ns]")).tz_localize("UTC"),
        "end_utc": pd.DatetimeIndex((t[stops - 1] + int(step_min * 6e10)).astype("datetime64[ns]")).tz_localize("UTC"),
        "steps": stops - starts,
    }
    for method in METHODS:
        names = []
        ids = list(blocked[method])
        if ids:
            matrix = np.vstack([blocked[method][r] for r in ids]).astype(np.int8)
            fired = np.add.reduceat(matrix, starts, axis=1) > 0  # rules x spans
            names = [tuple(ids[k] for k in np.flatnonzero(fired[:, j])) for j in range(len(starts))]
        else:
            names = [()] * len(starts)
        out[f"{method}_blocked_by"] = names
    return pd.DataFrame(out)


def compute_outlook(
    frame: pd.DataFrame,
    start_utc: pd.Timestamp,
    hours: float,
    site: Site,
    registry: Registry,
    rules: RuleSet,
    freq_ghz: float,
    odds: OddsFunction | None = None,
    min_duration_min: float | None = None,
    source: str = "<feed>",
) -> Outlook:
    """Evaluate every step from ``start_utc`` for ``hours`` and find each method's windows.

    ``frame`` is a canonical frame (``kind`` observed/forecast; optional ``issued_utc``).
    ``min_duration_min`` raises (never lowers) the shortest window offered.
    """
    start_utc = pd.Timestamp(start_utc).tz_convert("UTC")
    fs = site.forecast
    disagreement = compare_with_forecast(frame, site)  # before observations supersede forecast rows
    used, hindsight = select_rows(frame, start_utc)
    times, step_min = step_grid(used, start_utc, hours, source)
    used = apply_forecast_margins(trust_observation(used, disagreement), fs.wind_margin_pct, fs.dew_point_margin_c)
    decisions = evaluate(used, times, site, registry, rules, freq_ghz, odds)
    f = decisions.features
    n = len(times)
    t_ns = _ns(times)
    step_ns = int(round(step_min * 6e10))

    # the row each step reads (the last good one at or before it, from the features), its kind and issue time
    src = f["source_row"].to_numpy()
    has_src = src >= 0
    src_safe = np.clip(src, 0, None)
    all_ns = _ns(used["time"])
    last_any = np.searchsorted(all_ns, t_ns, side="right") - 1  # any row, good or not: a bad row is no gap
    gap = (last_any < 0) | (t_ns - all_ns[np.clip(last_any, 0, None)] >= step_ns)
    kinds = used["kind"].to_numpy()
    src_kind = np.where(has_src, kinds[src_safe] if len(kinds) else "", "").astype(object)
    beyond = np.zeros(n, dtype=bool)
    issued_list: tuple[pd.Timestamp, ...] = ()
    fc_used = (used["kind"] == "forecast").to_numpy()
    if "issued_utc" in used and fc_used.any():
        issued = pd.DatetimeIndex(used["issued_utc"])
        issued_ns = np.where(issued.isna(), np.iinfo(np.int64).min, _ns(issued.fillna(pd.Timestamp(0, tz="UTC"))))
        known = ~np.asarray(issued.isna())
        issued_list = tuple(
            pd.DatetimeIndex(np.unique(issued_ns[known & fc_used]).astype("datetime64[ns]")).tz_localize("UTC")
        )
        row_ns = all_ns[src_safe] if len(all_ns) else np.zeros(n, dtype=np.int64)
        step_issued = issued_ns[src_safe] if len(issued_ns) else np.full(n, np.iinfo(np.int64).min)
        beyond = (
            has_src
            & (src_kind == "forecast")
            & (step_issued != np.iinfo(np.int64).min)
            & ((row_ns - step_issued) > int(fs.horizon_h * 3.6e12))
        )

    beyond &= ~gap  # a gap has no row to date
    verdict = decisions.verdict.copy()
    verdict[gap] = "undetermined"
    # Spans: a change of preference must hold for the site's confirmation time (as tick announces
    # it); a change forced by a block or by bad data shows at once.
    hard = {
        m: np.logical_or.reduce(
            [
                mask
                for rid, mask in decisions.blocking(m).items()
                if rid != "efficiency.min" and not rid.startswith("model.")
            ]
            or [np.zeros(n, dtype=bool)]
        )
        for m in METHODS
    }
    stable = stabilise(times, verdict, changes_at_once(verdict, hard) | gap, site.tick.confirm_min)
    category = np.where(gap, "gap", stable).astype(object)

    steps = pd.DataFrame(
        {
            "time": times,
            "verdict": verdict,
            "gap": gap,
            "beyond_horizon": beyond,
            "source": np.where(gap, "none", src_kind).astype(object),
        }
    )
    for name in STEP_FEATURES:
        steps[name] = f[name].to_numpy(dtype=float)
    data_good = verdict != "undetermined"
    windows, min_window, nxt = {}, {}, {}
    blocked = {m: decisions.blocking(m) for m in METHODS}
    for method in METHODS:
        c = decisions.candidates[method]
        usable = c.feasible & data_good
        steps[f"{method}_feasible"] = usable
        steps[f"{method}_surface_rms_um"] = c.surface_rms_um
        steps[f"{method}_ruze_efficiency"] = c.ruze_efficiency
        steps[f"{method}_p_usable"] = c.p_usable
        need = c.duration_min + fs.settling_min
        min_window[method] = max(need, float(min_duration_min or 0.0))
        table = find_windows(
            times,
            step_min,
            usable,
            min_window[method],
            wind_mean_ms=f["wind_mean_ms"].to_numpy(),
            wind_gust_ms=f["wind_gust_ms"].to_numpy(),
            dew_point_spread_c=f["dew_point_spread_c"].to_numpy(),
            ruze_efficiency=c.ruze_efficiency,
            advised=verdict == method,
            beyond_horizon=beyond,
        )
        windows[method] = table
        nxt[method] = next_window(table)
        in_window = np.zeros(n + 1, dtype=np.int64)
        np.add.at(in_window, table["first_step"].to_numpy(dtype=np.int64), 1)
        np.add.at(in_window, table["stop_step"].to_numpy(dtype=np.int64), -1)
        steps[f"in_{method}_window"] = np.cumsum(in_window)[:n] > 0

    margins = {
        "wind_pct": fs.wind_margin_pct,
        "dew_point_c": fs.dew_point_margin_c,
        "applied": bool(fc_used.any() and (fs.wind_margin_pct > 0 or fs.dew_point_margin_c > 0)),
    }
    notes = []
    if disagreement is not None:
        notes.append(disagreement.text())
    if margins["applied"]:
        notes.append(margin_text(margins))
    if hindsight:
        last_obs = used.loc[used["kind"] != "forecast", "time"].max()
        notes.append(
            f"Observed rows after {start_utc:%Y-%m-%d %H:%M} UTC (up to {last_obs:%Y-%m-%d %H:%M} UTC) are "
            "used as they came (hindsight), forecast rows after them."
        )
    if fc_used.any() and not issued_list:
        notes.append(
            f"The forecast rows carry no issue time ('{fs.issue_time_column}' column): the "
            f"{fs.horizon_h:g} h horizon could not be checked."
        )
    n_beyond = int(beyond.sum())
    if n_beyond:
        notes.append(
            f"{plural(n_beyond, 'step')} {'lies' if n_beyond == 1 else 'lie'} more than "
            f"{fs.horizon_h:g} h after the forecast's issue time: flagged (lower-case letters), less reliable."
        )
    if all("target.unreachable" in decisions.candidates[m].blocks for m in METHODS):
        notes.append(
            f"Not reachable at {freq_ghz:g} GHz whatever the weather: neither method can bring the surface "
            "to the site's minimum efficiency, so no window will open; the postpones below are not a wait."
        )
    n_gap = int(gap.sum())
    if n_gap:
        notes.append(
            f"{plural(n_gap, 'step')} {'has' if n_gap == 1 else 'have'} no forecast row (gaps): shown as "
            f"'{GAP_LETTER}', counted as unknown, never good; they split windows."
        )
    covered_h = n * step_min / 60.0
    if covered_h < hours - 1e-9:
        notes.append(
            f"The forecast ends at {times[-1] + pd.Timedelta(minutes=step_min):%Y-%m-%d %H:%M} UTC: "
            f"the outlook covers {hours_text(covered_h)} of the {hours_text(hours)} asked for."
        )
    return Outlook(
        site=site,
        freq_ghz=float(freq_ghz),
        requested_from_utc=start_utc,
        requested_hours=float(hours),
        step_min=float(step_min),
        steps=steps,
        windows=windows,
        min_window_min=min_window,
        next_window=nxt,
        sun_events=_sun_events(times, f["sun_elevation_deg"].to_numpy(), step_min),
        spans=_spans(times, category, blocked, step_min),
        margins=margins,
        horizon_h=fs.horizon_h,
        issued_utc=issued_list,
        notes=tuple(notes),
    )


def margin_text(margins: dict) -> str:
    """The sentence that says which forecast margins were applied."""
    bits = []
    if margins["wind_pct"] > 0:
        bits.append(f"wind and gusts +{margins['wind_pct']:g} %")
    if margins["dew_point_c"] > 0:
        bits.append(f"dew point +{margins['dew_point_c']:g} °C")
    return "Forecast margins applied before the rules: " + ", ".join(bits) + " (site forecast settings)."


def next_windows_after(
    frame: pd.DataFrame,
    at_utc: pd.Timestamp,
    site: Site,
    registry: Registry,
    rules: RuleSet,
    freq_ghz: float,
    odds: OddsFunction | None = None,
    lookahead_h: float = NEXT_WINDOW_LOOKAHEAD_H,
) -> dict | None:
    """The next window per method in the rows after ``at_utc``, or None when there are none."""
    t = _ns(frame["time"])
    at_ns = _ns(pd.DatetimeIndex([at_utc]))[0]
    if int((t > at_ns).sum()) < 2:
        return None
    return compute_outlook(frame, at_utc, lookahead_h, site, registry, rules, freq_ghz, odds).next_window
