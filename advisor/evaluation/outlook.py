"""Outlook: the call at every forecast step, the windows for each method, and their views.

    frame = combine_frames(feed_frame, forecast_frame)     # one canonical frame; observed wins ties
    outlook = compute_outlook(frame, start_utc, hours, site, registry, rules, freq_ghz, odds=None,
                              min_duration_min=None)      # pure: arrays in, Outlook out
    nxt = next_windows_after(frame, at_utc, site, registry, rules, freq_ghz)   # for ``check``
    render_plain_outlook(outlook, ctx, width) / outlook_renderable(outlook, ctx, width)
    outlook_json(outlook, ctx) / outlook_csv_frame(outlook)

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

import math
from dataclasses import dataclass, field
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.catalogue import STEP_FEATURES
from advisor.physics.sun import SUNRISE_SUNSET_ALTITUDE_DEG
from advisor.vocabulary import DEMO_BANNER, LETTERS, METHOD_LABEL, METHODS, VERDICTS
from advisor.errors import FeedError
from advisor.physics.moisture import relative_humidity_pct
from advisor.evaluation.evaluate import OddsFunction, evaluate
from advisor.io.references import Registry
from advisor.rules.ruleset import RuleSet
from advisor.io.site import Site
from advisor.evaluation.windows import find_windows, next_window, window_dict

OUTLOOK_SCHEMA_VERSION = 1
#: How far ``check`` looks ahead for the next window when its feed carries future rows [h].
NEXT_WINDOW_LOOKAHEAD_H = 48.0
SUNRISE_SUNSET_ELEVATION_DEG = SUNRISE_SUNSET_ALTITUDE_DEG
#: One letter per verdict, so the strip reads without colour; ``?`` marks a gap.
VERDICT_LETTER = LETTERS
GAP_LETTER = "?"
VERDICT_WORDS = {"scan": "scan now", "astronomical": "astronomical method", "postpone": "postpone",
                 "undetermined": "undetermined (data bad)"}
STEP_COLUMNS = STEP_FEATURES


@dataclass(frozen=True)
class Outlook:
    """Everything an outlook found, ready to render (no computing left for the views)."""

    site: Site
    freq_ghz: float
    requested_from_utc: pd.Timestamp
    requested_hours: float
    step_min: float
    steps: pd.DataFrame                     # one row per step (see step_frame)
    windows: dict[str, pd.DataFrame]        # method -> advisor.evaluation.windows table
    min_window_min: dict[str, float]        # method -> shortest window offered [min]
    next_window: dict[str, dict | None]     # method -> first window or None
    sun_events: pd.DataFrame                # event (sunrise/sunset), time_utc, step
    spans: pd.DataFrame                     # runs of one verdict with the rules that blocked each method
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
def _ns(times) -> np.ndarray:
    index = pd.DatetimeIndex(times)
    if index.tz is not None:
        index = index.tz_convert("UTC").tz_localize(None)
    return index.as_unit("ns").asi8


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
        raise FeedError(f"no forecast rows after {start_utc:%Y-%m-%dT%H:%M:%SZ}{span}", source=source,
                        hint="pass --from inside the forecast, or a feed/--forecast file with future rows")
    forecast = np.unique(t_all[after & (frame["kind"] == "forecast").to_numpy()])
    base = forecast if len(forecast) >= 2 else future
    step_ns = int(np.median(np.diff(base)))
    step_ns = max(60_000_000_000, int(round(step_ns / 1e9)) * 1_000_000_000)  # whole seconds, >= 1 min
    anchor = int(base[0])
    limit = min(s + int(round(hours * 3.6e12)), int(future[-1]) + step_ns)
    k0 = -((anchor - s) // step_ns)          # ceil((s - anchor) / step)
    k1 = -((anchor - limit) // step_ns)      # ceil((limit - anchor) / step)
    grid = anchor + np.arange(k0, max(k0, k1), dtype=np.int64) * step_ns
    grid = grid[grid < limit]
    if len(grid) == 0:
        raise FeedError(f"no forecast steps between {start_utc:%Y-%m-%dT%H:%MZ} and the end of the forecast",
                        source=source, hint="pass a longer --hours or an earlier --from")
    return pd.DatetimeIndex(grid.astype("datetime64[ns]")).tz_localize("UTC"), step_ns / 6e10


def _sun_events(times: pd.DatetimeIndex, sun_el: np.ndarray, step_min: float) -> pd.DataFrame:
    """Sunrise/sunset between steps, by linear interpolation of the sun's elevation."""
    up = sun_el >= SUNRISE_SUNSET_ELEVATION_DEG
    i = np.flatnonzero(up[1:] != up[:-1]) + 1
    if len(i) == 0:
        return pd.DataFrame({"event": pd.Series([], dtype=object), "time_utc": pd.DatetimeIndex([], tz="UTC"),
                             "step": np.array([], dtype=np.int64)})
    e0, e1 = sun_el[i - 1], sun_el[i]
    frac = np.clip((SUNRISE_SUNSET_ELEVATION_DEG - e0) / (e1 - e0), 0.0, 1.0)
    t = _ns(times)
    when = t[i - 1] + np.round(frac * (t[i] - t[i - 1])).astype(np.int64)
    step = np.where(frac < 1.0, i - 1, i)  # the cell [t, t + step) that holds the event
    return pd.DataFrame({"event": np.where(up[i], "sunrise", "sunset").astype(object),
                         "time_utc": pd.DatetimeIndex(when.astype("datetime64[ns]")).tz_localize("UTC"),
                         "step": step})


def _spans(times: pd.DatetimeIndex, category: np.ndarray, blocked: dict[str, np.ndarray],
           step_min: float) -> pd.DataFrame:
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
            fired = np.add.reduceat(matrix, starts, axis=1) > 0           # rules x spans
            names = [tuple(ids[k] for k in np.flatnonzero(fired[:, j])) for j in range(len(starts))]
        else:
            names = [()] * len(starts)
        out[f"{method}_blocked_by"] = names
    return pd.DataFrame(out)


def compute_outlook(frame: pd.DataFrame, start_utc: pd.Timestamp, hours: float, site: Site, registry: Registry,
                    rules: RuleSet, freq_ghz: float, odds: OddsFunction | None = None,
                    min_duration_min: float | None = None, source: str = "<feed>") -> Outlook:
    """Evaluate every step from ``start_utc`` for ``hours`` and find each method's windows.

    ``frame`` is a canonical frame (``kind`` observed/forecast; optional ``issued_utc``).
    ``min_duration_min`` raises (never lowers) the shortest window offered.
    """
    start_utc = pd.Timestamp(start_utc).tz_convert("UTC")
    fs = site.forecast
    used, hindsight = select_rows(frame, start_utc)
    times, step_min = step_grid(used, start_utc, hours, source)
    used = apply_forecast_margins(used, fs.wind_margin_pct, fs.dew_point_margin_c)
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
    last_any = np.searchsorted(all_ns, t_ns, side="right") - 1      # any row, good or not: a bad row is no gap
    gap = (last_any < 0) | (t_ns - all_ns[np.clip(last_any, 0, None)] >= step_ns)
    kinds = used["kind"].to_numpy()
    src_kind = np.where(has_src, kinds[src_safe] if len(kinds) else "", "").astype(object)
    beyond = np.zeros(n, dtype=bool)
    issued_list: tuple[pd.Timestamp, ...] = ()
    fc_used = (used["kind"] == "forecast").to_numpy()
    if "issued_utc" in used and fc_used.any():
        issued = pd.DatetimeIndex(used["issued_utc"])
        issued_ns = np.where(issued.isna(), np.iinfo(np.int64).min, _ns(issued.fillna(pd.Timestamp(0, tz="UTC"))))
        known = ~issued.isna()
        issued_list = tuple(pd.DatetimeIndex(np.unique(issued_ns[known & fc_used]).astype("datetime64[ns]")).tz_localize("UTC"))
        row_ns = all_ns[src_safe] if len(all_ns) else np.zeros(n, dtype=np.int64)
        step_issued = issued_ns[src_safe] if len(issued_ns) else np.full(n, np.iinfo(np.int64).min)
        beyond = (has_src & (src_kind == "forecast") & (step_issued != np.iinfo(np.int64).min)
                  & ((row_ns - step_issued) > int(fs.horizon_h * 3.6e12)))

    beyond &= ~gap                                                  # a gap has no row to date
    verdict = decisions.verdict.copy()
    verdict[gap] = "undetermined"
    category = np.where(gap, "gap", verdict).astype(object)

    steps = pd.DataFrame({"time": times, "verdict": verdict, "gap": gap, "beyond_horizon": beyond,
                          "source": np.where(gap, "none", src_kind).astype(object)})
    for name in STEP_COLUMNS:
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
        table = find_windows(times, step_min, usable, min_window[method],
                             wind_mean_ms=f["wind_mean_ms"].to_numpy(), wind_gust_ms=f["wind_gust_ms"].to_numpy(),
                             dew_point_spread_c=f["dew_point_spread_c"].to_numpy(), ruze_efficiency=c.ruze_efficiency,
                             advised=verdict == method, beyond_horizon=beyond)
        windows[method] = table
        nxt[method] = next_window(table)
        in_window = np.zeros(n + 1, dtype=np.int64)
        np.add.at(in_window, table["first_step"].to_numpy(dtype=np.int64), 1)
        np.add.at(in_window, table["stop_step"].to_numpy(dtype=np.int64), -1)
        steps[f"in_{method}_window"] = np.cumsum(in_window)[:n] > 0

    margins = {"wind_pct": fs.wind_margin_pct, "dew_point_c": fs.dew_point_margin_c,
               "applied": bool(fc_used.any() and (fs.wind_margin_pct > 0 or fs.dew_point_margin_c > 0))}
    notes = []
    if margins["applied"]:
        notes.append(margin_text(margins))
    if hindsight:
        last_obs = used.loc[used["kind"] != "forecast", "time"].max()
        notes.append(f"Observed rows after {start_utc:%Y-%m-%d %H:%M} UTC (up to {last_obs:%Y-%m-%d %H:%M} UTC) are "
                     "used as they came (hindsight), forecast rows after them.")
    if fc_used.any() and not issued_list:
        notes.append(f"The forecast rows carry no issue time ('{fs.issue_time_column}' column): the "
                     f"{fs.horizon_h:g} h horizon could not be checked.")
    n_beyond = int(beyond.sum())
    if n_beyond:
        notes.append(f"{n_beyond} step(s) lie more than {fs.horizon_h:g} h after the forecast's issue time: "
                     "flagged (lower-case letters), less reliable.")
    n_gap = int(gap.sum())
    if n_gap:
        notes.append(f"{n_gap} step(s) have no forecast row (gaps): shown as '{GAP_LETTER}', counted as unknown, "
                     "never good; they split windows.")
    covered_h = n * step_min / 60.0
    if covered_h < hours - 1e-9:
        notes.append(f"The forecast ends at {times[-1] + pd.Timedelta(minutes=step_min):%Y-%m-%d %H:%M} UTC: "
                     f"the outlook covers {covered_h:.1f} h of the {hours:g} h asked for.")
    return Outlook(site=site, freq_ghz=float(freq_ghz), requested_from_utc=start_utc, requested_hours=float(hours),
                   step_min=float(step_min), steps=steps, windows=windows, min_window_min=min_window,
                   next_window=nxt, sun_events=_sun_events(times, f["sun_elevation_deg"].to_numpy(), step_min),
                   spans=_spans(times, category, blocked, step_min), margins=margins, horizon_h=fs.horizon_h,
                   issued_utc=issued_list, notes=tuple(notes))


def margin_text(margins: dict) -> str:
    """The sentence that says which forecast margins were applied."""
    bits = []
    if margins["wind_pct"] > 0:
        bits.append(f"wind and gusts +{margins['wind_pct']:g} %")
    if margins["dew_point_c"] > 0:
        bits.append(f"dew point +{margins['dew_point_c']:g} °C")
    return "Forecast margins applied before the rules: " + ", ".join(bits) + " (site forecast settings)."


def next_windows_after(frame: pd.DataFrame, at_utc: pd.Timestamp, site: Site, registry: Registry, rules: RuleSet,
                       freq_ghz: float, odds: OddsFunction | None = None,
                       lookahead_h: float = NEXT_WINDOW_LOOKAHEAD_H) -> dict | None:
    """The next window per method in the rows after ``at_utc``, or None when there are none."""
    t = _ns(frame["time"])
    at_ns = _ns(pd.DatetimeIndex([at_utc]))[0]
    if int((t > at_ns).sum()) < 2:
        return None
    return compute_outlook(frame, at_utc, lookahead_h, site, registry, rules, freq_ghz, odds).next_window


# --- views ---------------------------------------------------------------------------------
LABEL_W = 6
TICK_CHOICES_MIN = (10, 15, 20, 30, 60, 120, 180, 240, 360, 720, 1440)
MIN_TICK_CELLS = 7


def _style_of(verdict: str) -> str:
    from advisor.views.render import VERDICT_STYLE

    return VERDICT_STYLE[verdict][1]


GAP_STYLE = "bold white on grey35"


def _fmt_local(ts: pd.Timestamp, tz: str, with_date: bool = True) -> str:
    local = ts.tz_convert(ZoneInfo(tz))
    return f"{local.day} {local:%b %H:%M}" if with_date else f"{local:%H:%M}"


def _fmt_utc(ts: pd.Timestamp, with_date: bool = True) -> str:
    return f"{ts.day} {ts:%b %H:%M}" if with_date else f"{ts:%H:%M}"


def _tz_abbrev(ts: pd.Timestamp, tz: str) -> str:
    return ts.tz_convert(ZoneInfo(tz)).strftime("%Z")


def _length_text(minutes: float) -> str:
    minutes = int(round(minutes))
    h, m = divmod(minutes, 60)
    return f"{h} h {m:02d} min" if h else f"{m} min"


def _tick_minutes(step_min: float) -> int:
    for choice in TICK_CHOICES_MIN:
        if choice % step_min < 1e-9 and choice / step_min >= MIN_TICK_CELLS:
            return choice
    return int(math.ceil(MIN_TICK_CELLS * step_min / 60.0) * 60)


def strip_lines(outlook: Outlook, width: int) -> list[list[tuple[str, str | None]]]:
    """The timeline strip as lines of (text, style) segments, wrapped to ``width`` columns.

    Per block: the local-time axis, the cells (one letter per step), the UTC axis and the sun
    row (``·`` night, ``↑`` sunrise, ``↓`` sunset).
    """
    steps = outlook.steps
    tz = outlook.site.time_zone
    n = len(steps)
    times = pd.DatetimeIndex(steps["time"])
    local = times.tz_convert(ZoneInfo(tz))
    tick_min = _tick_minutes(outlook.step_min)
    tick_cells = max(1, int(round(tick_min / outlook.step_min)))
    minute_of_day = local.hour * 60 + local.minute
    is_tick = ((minute_of_day % tick_min) == 0) & (local.second == 0)
    avail = max(tick_cells, width - LABEL_W)
    per_row = max(tick_cells, (avail // tick_cells) * tick_cells)

    verdict = steps["verdict"].to_numpy()
    gap = steps["gap"].to_numpy(dtype=bool)
    beyond = steps["beyond_horizon"].to_numpy(dtype=bool)
    letter = pd.Series(verdict).map(VERDICT_LETTER).to_numpy(dtype=object)
    letter = np.where(gap, GAP_LETTER, letter)
    letter = np.where(beyond & ~gap, np.char.lower(letter.astype(str)), letter).astype(object)
    style_key = np.where(gap, "gap", verdict).astype(object)

    night = steps["sun_elevation_deg"].to_numpy() < SUNRISE_SUNSET_ELEVATION_DEG
    sun_row = np.where(night, "·", " ").astype("<U1")
    ev = outlook.sun_events
    sun_row[ev["step"].to_numpy(dtype=np.int64)] = np.where(ev["event"].to_numpy() == "sunrise", "↑", "↓")

    styles = {v: _style_of(v) for v in VERDICTS}
    styles["gap"] = GAP_STYLE
    lines: list[list[tuple[str, str | None]]] = []
    tz_label = _tz_abbrev(times[0], tz)[:LABEL_W - 1]
    for a in range(0, n, per_row):
        b = min(n, a + per_row)
        w = b - a
        loc_buf = [" "] * w
        utc_buf = [" "] * w
        last_end = -1
        ticks = np.flatnonzero(is_tick[a:b])
        if len(ticks) == 0 or ticks[0] >= 6:                # label the block's first cell too ("HH:MM ")
            ticks = np.concatenate(([0], ticks))
        for k in ticks:                                  # a few ticks per block
            ts_l, ts_u = local[a + k], times[a + k]
            label = f"{ts_l.day} {ts_l:%b}" if minute_of_day[a + k] == 0 else f"{ts_l:%H:%M}"
            if k <= last_end or k + len(label) > w:
                continue
            loc_buf[k:k + len(label)] = label
            utc_label = f"{ts_u:%H:%M}"
            utc_buf[k:k + len(utc_label)] = utc_label
            last_end = k + len(label)
        lines.append([(tz_label.ljust(LABEL_W), "dim"), ("".join(loc_buf), "bold")])
        cells: list[tuple[str, str | None]] = [("".ljust(LABEL_W), None)]
        keys = style_key[a:b]
        change = np.flatnonzero(np.concatenate(([True], keys[1:] != keys[:-1])))
        ends = np.append(change[1:], w)
        for s, e in zip(change, ends):                  # runs of one verdict, not steps
            cells.append(("".join(letter[a + s:a + e]), styles[keys[s]]))
        lines.append(cells)
        lines.append([("UTC".ljust(LABEL_W), "dim"), ("".join(utc_buf), None)])
        lines.append([("sun".ljust(LABEL_W), "dim"), ("".join(sun_row[a:b]), "yellow")])
        lines.append([("", None)])
    return lines


def legend_entries(outlook: Outlook) -> list[list[tuple[str, str | None]]]:
    """The legend as entries of (text, style) segments: letter key, gap, horizon flag, sun marks."""
    entries = [[(f" {VERDICT_LETTER[v]} ", _style_of(v)), (f" {VERDICT_WORDS[v]}", None)] for v in VERDICTS]
    entries.append([(f" {GAP_LETTER} ", GAP_STYLE), (" gap: no forecast row (undetermined)", None)])
    if outlook.steps["beyond_horizon"].any():
        entries.append([("s a p u", "bold"), (" lower case: beyond the forecast horizon", None)])
    entries.append([("↑ ↓ ·", "yellow"), (" sunrise, sunset, night", None)])
    return entries


def _wrap_entries(entries, width: int, plain: bool = True):
    """Legend entries packed into lines of at most ``width`` columns (an entry is never split)."""
    lines, current, used = [], [], 0
    for entry in entries:
        size = sum(len(t) for t, _ in entry)
        if current and used + 3 + size > width:
            lines.append(current)
            current, used = [], 0
        if current:
            current.append(("   ", None))
            used += 3
        current.extend(entry)
        used += size
    if current:
        lines.append(current)
    return ["".join(t for t, _ in line) for line in lines] if plain else lines


def _sun_text(outlook: Outlook) -> str:
    tz = outlook.site.time_zone
    ev = outlook.sun_events
    if len(ev) == 0:
        return ""
    tzname = _tz_abbrev(outlook.start_utc, tz)
    parts = [f"{e} {_fmt_local(t, tz)} {tzname} ({_fmt_utc(t, False)} UTC)"
             for e, t in zip(ev["event"], ev["time_utc"])]
    return "Sun: " + "; ".join(parts)


WINDOW_HEADERS = ("method", "from (local)", "to (local)", "from (UTC)", "length", "wind max", "gust max",
                  "spread min", "mean η", "advised", "note")


def window_rows(outlook: Outlook) -> list[tuple[str, ...]]:
    tz = outlook.site.time_zone
    rows = []
    for method in METHODS:
        table = outlook.windows[method]
        for w in table.itertuples(index=False):        # one row per window, not per step
            note = []
            if w.beyond_horizon:
                note.append("beyond horizon")
            if w.open_end:
                note.append("runs past the outlook")
            rows.append((METHOD_LABEL[method], _fmt_local(w.start_utc, tz), _fmt_local(w.end_utc, tz),
                         _fmt_utc(w.start_utc), _length_text(w.length_min),
                         _num(w.max_wind_mean_ms, "{:.1f} m/s"), _num(w.max_wind_gust_ms, "{:.1f} m/s"),
                         _num(w.min_dew_point_spread_c, "{:.1f} °C"), _num(w.mean_ruze_efficiency, "{:.2f}"),
                         f"{w.advised_fraction:.0%}", ", ".join(note)))
    return rows


WIDE_TABLE_MIN = 130


def windows_heading(outlook: Outlook) -> str:
    need = ", ".join(f"{METHOD_LABEL[m]} ≥ {_length_text(outlook.min_window_min[m])}" for m in METHODS)
    tzname = _tz_abbrev(outlook.start_utc, outlook.site.time_zone)
    return f"Windows, local time {tzname} (each ≥ the method's duration + settling: {need})"


def window_list_lines(outlook: Outlook) -> list[str]:
    """Each window on two lines (fits 80 columns): when, then its worst conditions and figures."""
    tz = outlook.site.time_zone
    lines = []
    for method in METHODS:
        for w in outlook.windows[method].itertuples(index=False):   # one entry per window
            notes = (["beyond the forecast horizon"] if w.beyond_horizon else []) + (
                ["may run past the outlook"] if w.open_end else [])
            lines.append(f"  {METHOD_LABEL[method]:<13}{_when(w.start_utc, w.end_utc, tz)}, {_length_text(w.length_min)}")
            lines.append(f"      wind ≤ {_num(w.max_wind_mean_ms, '{:.1f}')} m/s (gusts "
                         f"{_num(w.max_wind_gust_ms, '{:.1f}')}), spread ≥ {_num(w.min_dew_point_spread_c, '{:.1f}')} °C, "
                         f"η {_num(w.mean_ruze_efficiency, '{:.2f}')}, advised {w.advised_fraction:.0%}")
            if notes:
                lines.append(f"      {'; '.join(notes)}")
    return lines


def _when(start: pd.Timestamp, end: pd.Timestamp, tz: str) -> str:
    """``30 Nov 20:00 → 1 Dec 00:20 (03:00–07:20 UTC)``: local times with dates, then UTC."""
    return f"{_fmt_local(start, tz)} → {_fmt_local(end, tz)} ({start:%H:%M}–{end:%H:%M} UTC)"


def _num(value, fmt: str) -> str:
    return "n/a" if value is None or not np.isfinite(value) else fmt.format(value)


def next_window_lines(outlook: Outlook) -> list[str]:
    tz = outlook.site.time_zone
    lines = []
    for method in METHODS:
        w = outlook.next_window[method]
        need = _length_text(outlook.min_window_min[method])
        if w is None:
            lines.append(f"  {METHOD_LABEL[method]:<13}none of at least {need} in this outlook")
            continue
        s, e = pd.Timestamp(w["start_utc"]), pd.Timestamp(w["end_utc"])
        flags = "".join(["; beyond the forecast horizon" if w["beyond_horizon"] else "",
                         "; may run past the outlook" if w["open_end"] else ""])
        lines.append(f"  {METHOD_LABEL[method]:<13}{_when(s, e, tz)}, {_length_text(w['length_min'])}{flags}")
    return lines


def span_lines(outlook: Outlook, limit: int = 12) -> list[str]:
    tz = outlook.site.time_zone
    sp = outlook.spans
    out = []
    for row in sp.head(limit).itertuples(index=False):   # one line per span of one verdict
        what = "no forecast (gap)" if row.category == "gap" else VERDICT_WORDS[row.category]
        why = []
        if row.category != "gap":
            for method in METHODS:
                ids = getattr(row, f"{method}_blocked_by")
                if ids:
                    why.append(f"{METHOD_LABEL[method]} blocked by {', '.join(ids)}")
        same_day = row.start_utc.tz_convert(ZoneInfo(tz)).date() == row.end_utc.tz_convert(ZoneInfo(tz)).date()
        out.append(f"  {_fmt_local(row.start_utc, tz)} → {_fmt_local(row.end_utc, tz, with_date=not same_day)}  "
                   f"{VERDICT_LETTER.get(row.category, GAP_LETTER)} {what}" + (f" — {'; '.join(why)}" if why else ""))
    if len(sp) > limit:
        out.append(f"  … {len(sp) - limit} more spans (see --json)")
    return out


def _header(outlook: Outlook, ctx) -> list[str]:
    tz = outlook.site.time_zone
    tzname = _tz_abbrev(outlook.start_utc, tz)
    s, e = outlook.start_utc, outlook.end_utc
    lines = [f"advisor outlook · {ctx.site_name} · {outlook.freq_ghz:g} GHz",
             f"{_fmt_local(s, tz)} → {_fmt_local(e, tz)} {tzname} ({_fmt_utc(s)} → {_fmt_utc(e)} UTC), "
             f"{len(outlook.steps)} steps of {outlook.step_min:g} min"]
    if outlook.issued_utc:
        issued = ", ".join(f"{t:%Y-%m-%d %H:%M} UTC" for t in outlook.issued_utc[-3:])
        lines.append(f"Forecast issued {issued}; horizon {outlook.horizon_h:g} h.")
    return lines


def _plain_segments(segs) -> str:
    return "".join(text for text, _ in segs).rstrip()


def _wrap(text: str, width: int, indent: str = "") -> list[str]:
    """``text`` folded at word boundaries to ``width`` columns; continuation lines get ``indent``."""
    import textwrap

    if len(text) <= width:
        return [text]
    lead = text[:len(text) - len(text.lstrip())]
    return textwrap.wrap(text, width=max(40, width), subsequent_indent=lead + indent,
                         break_long_words=False, break_on_hyphens=False) or [""]


def render_plain_outlook(outlook: Outlook, ctx, width: int = 100) -> str:
    """Plain text for pipes and logs: letters carry the verdicts, no colour needed; folded to ``width``."""
    from advisor.views.render import CAUTIONS

    tzname = _tz_abbrev(outlook.start_utc, outlook.site.time_zone)
    lines: list[str] = []

    def add(text: str, indent: str = "") -> None:
        lines.extend(_wrap(text, width, indent))

    for text in _header(outlook, ctx):
        add(text)
    if ctx.is_demo:
        add(DEMO_BANNER)
    for note in (*ctx.notes, *outlook.notes):
        add(note, "  ")
    lines.append("")
    lines.extend(_plain_segments(segs) for segs in strip_lines(outlook, width))
    lines.extend(_wrap_entries(legend_entries(outlook), width))
    sun = _sun_text(outlook)
    if sun:
        add(sun, "  ")
    lines.append("")
    add(windows_heading(outlook) + ":", "  ")
    rows = window_rows(outlook)
    if rows and width < WIDE_TABLE_MIN:
        for line in window_list_lines(outlook):
            add(line, "  ")
    elif rows:
        table = [WINDOW_HEADERS, *rows]
        widths = [max(len(r[k]) for r in table) for k in range(len(WINDOW_HEADERS))]
        lines.extend("  " + "  ".join(v.ljust(wd) for v, wd in zip(r, widths)).rstrip() for r in table)
    else:
        lines.append("  none")
    lines.append("")
    lines.append(f"Next window (local time {tzname}):")
    for line in next_window_lines(outlook):
        add(line, "  ")
    lines.append("")
    lines.append(f"Verdict spans (local time {tzname}):")
    for line in span_lines(outlook):
        add(line, "    ")
    lines.append("")
    add(f"feed: {ctx.feed_source}", "  ")
    add("Cautions: " + " ".join(CAUTIONS), "  ")
    return "\n".join(lines) + "\n"


def outlook_renderable(outlook: Outlook, ctx, width: int = 100):
    """The rich view: a panel with the coloured strip, the windows table and the next windows."""
    from rich import box
    from rich.console import Group
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    from advisor.views.render import CAUTIONS

    head = _header(outlook, ctx)
    parts = [Text(ctx.site_name, style="bold")] + [Text(line) for line in head[1:]]
    if ctx.is_demo:
        parts.append(Text(DEMO_BANNER, style="bold magenta"))
    for note in (*ctx.notes, *outlook.notes):
        parts.append(Text(note, style="italic"))
    parts.append(Text(""))
    inner = max(40, width - 4)
    for segs in strip_lines(outlook, inner):
        parts.append(Text.assemble(*[(t, s) if s else t for t, s in segs], no_wrap=True, overflow="crop"))
    for segs in _wrap_entries(legend_entries(outlook), inner, plain=False):
        parts.append(Text.assemble(*[(t, s) if s else t for t, s in segs]))
    sun = _sun_text(outlook)
    if sun:
        parts.append(Text(sun, style="dim"))
    parts.append(Text(""))
    parts.append(Text(windows_heading(outlook), style="bold underline"))
    rows = window_rows(outlook)
    if rows and width < WIDE_TABLE_MIN:
        for line in window_list_lines(outlook):
            head = line.lstrip()
            parts.append(Text(line, style="green" if head.startswith("laser") else
                              "cyan" if head.startswith("astronomical") else "dim"))
    elif rows:
        table = Table(box=box.SIMPLE_HEAD, pad_edge=False, expand=False)
        for h in WINDOW_HEADERS:
            table.add_column(h, justify="right" if h in ("length", "wind max", "gust max", "spread min", "mean η",
                                                         "advised") else "left")
        for r in rows:
            table.add_row(*r, style="green" if r[0] == METHOD_LABEL["scan"] else "cyan")
        parts.append(table)
    else:
        parts.append(Text("  none"))
    if not (rows and width >= WIDE_TABLE_MIN):
        parts.append(Text(""))
    parts.append(Text(f"Next window (local time {_tz_abbrev(outlook.start_utc, outlook.site.time_zone)})",
                      style="bold underline"))
    for line in next_window_lines(outlook):
        parts.append(Text(line, style="bold"))
    parts.append(Text(""))
    parts.append(Text(f"Verdict spans (local time {_tz_abbrev(outlook.start_utc, outlook.site.time_zone)})",
                      style="bold underline"))
    for line in span_lines(outlook):
        parts.append(Text(line))
    parts.append(Text(""))
    parts.append(Text(" ".join(CAUTIONS), style="dim italic"))
    return Panel(Group(*parts), title=f"advisor outlook · {outlook.freq_ghz:g} GHz", title_align="left",
                 border_style="blue",
                 subtitle=f"feed: {ctx.feed_source}", subtitle_align="left", width=width)


def _json_num(value, nd: int = 4):
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    value = float(value)
    return None if not math.isfinite(value) else round(value, nd)


def _iso_local(times: pd.DatetimeIndex, tz: str) -> np.ndarray:
    """ISO 8601 local times with a ``±HH:MM`` offset (vectorised string work)."""
    text = pd.Series(times.tz_convert(ZoneInfo(tz)).strftime("%Y-%m-%dT%H:%M:%S%z"))
    return (text.str[:-2] + ":" + text.str[-2:]).to_numpy(dtype=object)


def outlook_csv_frame(outlook: Outlook) -> pd.DataFrame:
    """One row per step: ``time`` (ISO 8601 UTC), ``verdict``, flags, conditions, per-method figures."""
    steps = outlook.steps
    out = pd.DataFrame({"time": pd.DatetimeIndex(steps["time"]).strftime("%Y-%m-%dT%H:%M:%SZ"),
                        "verdict": steps["verdict"].to_numpy(),
                        "local_time": _iso_local(pd.DatetimeIndex(steps["time"]), outlook.site.time_zone)})
    for name in ("gap", "beyond_horizon", "source", *STEP_COLUMNS):
        out[name] = steps[name].to_numpy()
    for method in METHODS:
        for suffix in ("feasible", "surface_rms_um", "ruze_efficiency", "p_usable"):
            out[f"{method}_{suffix}"] = steps[f"{method}_{suffix}"].to_numpy()
        out[f"in_{method}_window"] = steps[f"in_{method}_window"].to_numpy()
    return out.round(4)


def outlook_json(outlook: Outlook, ctx) -> dict:
    """The ``outlook --json`` object: per-step verdicts, windows, next windows, spans and notes."""
    from advisor.views.render import CAUTIONS

    csv = outlook_csv_frame(outlook)
    step_records = []
    columns = list(csv.columns)
    values = csv.to_numpy(dtype=object)
    for row in values:                               # JSON records need Python objects
        rec = {}
        for k, v in zip(columns, row):
            rec["time_utc" if k == "time" else k] = v if isinstance(v, str) else _json_num(v)
        step_records.append(rec)
    windows = []
    for method in METHODS:
        for _, w in outlook.windows[method].iterrows():
            windows.append({"method": method, **window_dict(w)})
    spans = [{"verdict": "undetermined" if r.category == "gap" else r.category, "gap": r.category == "gap",
              "start_utc": r.start_utc.strftime("%Y-%m-%dT%H:%M:%SZ"), "end_utc": r.end_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
              "steps": int(r.steps), **{f"{m}_blocked_by": list(getattr(r, f"{m}_blocked_by")) for m in METHODS}}
             for r in outlook.spans.itertuples(index=False)]
    counts = {v: int((outlook.steps["verdict"] == v).sum()) for v in VERDICTS}
    counts["gap"] = int(outlook.steps["gap"].sum())
    return {
        "schema_version": OUTLOOK_SCHEMA_VERSION,
        "command": "outlook",
        "site": ctx.site_name,
        "demo_data": ctx.is_demo,
        "target_freq_ghz": outlook.freq_ghz,
        "from_utc": outlook.start_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "to_utc": outlook.end_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "step_min": outlook.step_min,
        "time_zone": outlook.site.time_zone,
        "forecast": {"issued_utc": [t.strftime("%Y-%m-%dT%H:%M:%SZ") for t in outlook.issued_utc],
                     "horizon_h": outlook.horizon_h, "margins": outlook.margins,
                     "steps_beyond_horizon": int(outlook.steps["beyond_horizon"].sum())},
        "counts": counts,
        "min_window_min": outlook.min_window_min,
        "next_window": outlook.next_window,
        "windows": windows,
        "spans": spans,
        "sun_events": [{"event": e, "time_utc": t.strftime("%Y-%m-%dT%H:%M:%SZ")}
                       for e, t in zip(outlook.sun_events["event"], outlook.sun_events["time_utc"])],
        "steps": step_records,
        "data_quality": ctx.data_quality,
        "notes": [*ctx.notes, *outlook.notes],
        "cautions": list(CAUTIONS),
    }
