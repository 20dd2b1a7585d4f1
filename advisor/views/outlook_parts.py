"""Text pieces of an :class:`advisor.evaluation.outlook.Outlook` that the plain and rich views share.

    fmt_local / fmt_utc / tz_abbrev / length_text / when_text      times and durations (advisor.fmt)
    header_lines(outlook, ctx)       title, period and forecast issue
    windows_heading / window_rows / window_list_lines              the windows, as a table or a list
    next_window_lines(outlook)       the first window of each method
    span_lines(outlook)              runs of one verdict and the rules that blocked each method
    sun_text(outlook)                sunrise and sunset times

Nothing is computed here beyond formatting: the outlook is finished before it is shown.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor import fmt
from advisor.evaluation.outlook import GAP_LETTER, Outlook
from advisor.views.callparts import reason_name
from advisor.views.context import Context
from advisor.vocabulary import METHOD_LABEL, METHODS, VERDICT

#: From this width [columns] the windows are shown as a table; narrower, as a two-line list.
WIDE_TABLE_MIN = 130
WINDOW_HEADERS = (
    "method",
    "from (local)",
    "to (local)",
    "from (UTC)",
    "length",
    "wind max",
    "gust max",
    "spread min",
    "mean η",
    "advised",
    "note",
)


def rows_of(table: pd.DataFrame) -> Iterator[Any]:
    """The rows of a table as named tuples (one attribute per column)."""
    return table.itertuples(index=False)


def fmt_local(ts: pd.Timestamp, tz: str, with_date: bool = True) -> str:
    """``30 Nov 20:00`` in the site's time zone (``20:00`` without the date)."""
    local = ts.tz_convert(ZoneInfo(tz))
    return f"{local.day} {local:%b %H:%M}" if with_date else f"{local:%H:%M}"


def fmt_utc(ts: pd.Timestamp, with_date: bool = True) -> str:
    """``1 Dec 03:00`` in UTC (``03:00`` without the date)."""
    return f"{ts.day} {ts:%b %H:%M}" if with_date else f"{ts:%H:%M}"


tz_abbrev = fmt.tz_abbrev


def length_text(minutes: float) -> str:
    """``1 h 15 min``, ``1 h`` or ``45 min`` (:func:`advisor.fmt.duration_text`)."""
    return fmt.duration_text(minutes)


def sun_text(outlook: Outlook) -> str:
    """``Sun: sunrise 1 Dec 07:02 MST (14:02 UTC); ...``, or empty when the sun neither rises nor sets."""
    tz = outlook.site.time_zone
    ev = outlook.sun_events
    if len(ev) == 0:
        return ""
    tzname = tz_abbrev(outlook.start_utc, tz)
    parts = [f"{e} {fmt_local(t, tz)} {tzname} ({fmt_utc(t, False)} UTC)" for e, t in zip(ev["event"], ev["time_utc"])]
    return "Sun: " + "; ".join(parts)


def window_rows(outlook: Outlook) -> list[tuple[str, ...]]:
    """One row of text per window (columns: :data:`WINDOW_HEADERS`)."""
    tz = outlook.site.time_zone
    rows: list[tuple[str, ...]] = []
    for method in METHODS:
        table = outlook.windows[method]
        for w in rows_of(table):  # one row per window, not per step
            note = []
            if w.beyond_horizon:
                note.append("beyond horizon")
            if w.open_end:
                note.append("runs past the outlook")
            rows.append(
                (
                    METHOD_LABEL[method],
                    fmt_local(w.start_utc, tz),
                    fmt_local(w.end_utc, tz),
                    fmt_utc(w.start_utc),
                    length_text(w.length_min),
                    _num(w.max_wind_mean_ms, "{:.1f} m/s"),
                    _num(w.max_wind_gust_ms, "{:.1f} m/s"),
                    _num(w.min_dew_point_spread_c, "{:.1f} °C"),
                    _num(w.mean_ruze_efficiency, "{:.2f}"),
                    f"{w.advised_fraction:.0%}",
                    ", ".join(note),
                )
            )
    return rows


def windows_heading(outlook: Outlook) -> str:
    """The heading over the windows, with the shortest window offered per method."""
    need = ", ".join(f"{METHOD_LABEL[m]} ≥ {length_text(outlook.min_window_min[m])}" for m in METHODS)
    tzname = tz_abbrev(outlook.start_utc, outlook.site.time_zone)
    return f"Windows, local time {tzname} (each ≥ the method's duration + settling: {need})"


def window_list_lines(outlook: Outlook) -> list[str]:
    """Each window on two lines (fits 80 columns): when, then its worst conditions and figures."""
    tz = outlook.site.time_zone
    lines = []
    for method in METHODS:
        for w in rows_of(outlook.windows[method]):  # one entry per window
            notes = (["beyond the forecast horizon"] if w.beyond_horizon else []) + (
                ["may run past the outlook"] if w.open_end else []
            )
            lines.append(
                f"  {METHOD_LABEL[method]:<13}{when_text(w.start_utc, w.end_utc, tz)}, {length_text(w.length_min)}"
            )
            lines.append(
                f"      wind ≤ {_num(w.max_wind_mean_ms, '{:.1f}')} m/s (gusts "
                f"{_num(w.max_wind_gust_ms, '{:.1f}')}), spread ≥ {_num(w.min_dew_point_spread_c, '{:.1f}')} °C, "
                f"η {_num(w.mean_ruze_efficiency, '{:.2f}')}, advised {w.advised_fraction:.0%}"
            )
            if notes:
                lines.append(f"      {'; '.join(notes)}")
    return lines


def when_text(start: pd.Timestamp, end: pd.Timestamp, tz: str) -> str:
    """``30 Nov 20:00 → 1 Dec 00:20 MST (1 Dec 03:00 → 07:20 UTC)`` (:func:`advisor.fmt.span_text`)."""
    return fmt.span_text(start, end, tz)


def _num(value, pattern: str) -> str:
    """``pattern`` of a finite number (never ``-0.0``), ``n/a`` otherwise."""
    return "n/a" if value is None or not np.isfinite(value) else fmt.no_minus_zero(pattern.format(value))


def next_window_lines(outlook: Outlook) -> list[str]:
    """The first window of each method, or that there is none long enough."""
    tz = outlook.site.time_zone
    lines = []
    for method in METHODS:
        w = outlook.next_window[method]
        need = length_text(outlook.min_window_min[method])
        if w is None:
            lines.append(f"  {METHOD_LABEL[method]:<13}none of at least {need} in this outlook")
            continue
        s, e = pd.Timestamp(w["start_utc"]), pd.Timestamp(w["end_utc"])
        flags = "".join(
            [
                "; beyond the forecast horizon" if w["beyond_horizon"] else "",
                "; may run past the outlook" if w["open_end"] else "",
            ]
        )
        lines.append(f"  {METHOD_LABEL[method]:<13}{when_text(s, e, tz)}, {length_text(w['length_min'])}{flags}")
    return lines


def span_lines(outlook: Outlook, limit: int = 12) -> list[str]:
    """The first ``limit`` runs of one verdict, each with the rules that blocked each method."""
    tz = outlook.site.time_zone
    sp = outlook.spans
    out = []
    for row in rows_of(sp.head(limit)):  # one line per span of one verdict
        gap = row.category == "gap"
        what = "no forecast (gap)" if gap else VERDICT[row.category].words
        letter = GAP_LETTER if gap else VERDICT[row.category].letter
        why = []
        if not gap:
            for method in METHODS:
                ids = getattr(row, f"{method}_blocked_by")
                if ids:
                    why.append(f"{METHOD_LABEL[method]} blocked by {', '.join(reason_name(i) for i in ids)}")
        same_day = row.start_utc.tz_convert(ZoneInfo(tz)).date() == row.end_utc.tz_convert(ZoneInfo(tz)).date()
        out.append(
            f"  {fmt_local(row.start_utc, tz)} → {fmt_local(row.end_utc, tz, with_date=not same_day)}  "
            f"{letter} {what}" + (f" — {'; '.join(why)}" if why else "")
        )
    if len(sp) > limit:
        out.append(f"  … {fmt.plural(len(sp) - limit, 'more span')} (see --json)")
    return out


def header_lines(outlook: Outlook, ctx: Context) -> list[str]:
    """Title, period and step, and the forecast's issue times when known."""
    tz = outlook.site.time_zone
    tzname = tz_abbrev(outlook.start_utc, tz)
    s, e = outlook.start_utc, outlook.end_utc
    lines = [
        f"advisor outlook · {ctx.site_name} · {fmt.freq_wave_text(outlook.freq_ghz)}",
        f"{fmt_local(s, tz)} → {fmt_local(e, tz)} {tzname} ({fmt_utc(s)} → {fmt_utc(e)} UTC), "
        f"{len(outlook.steps)} steps of {outlook.step_min:g} min",
    ]
    if outlook.issued_utc:
        issued = ", ".join(f"{t:%Y-%m-%d %H:%M} UTC" for t in outlook.issued_utc[-3:])
        lines.append(f"Forecast issued {issued}; horizon {outlook.horizon_h:g} h.")
    return lines
