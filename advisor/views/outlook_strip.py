"""The outlook's timeline strip: one letter per step, coloured by verdict, with time and sun rows.

    strip_lines(outlook, width)     lines of (text, style) segments, wrapped to ``width`` columns
    legend_entries(outlook)         the key to the letters, colours and sun marks
    wrap_entries(entries, width)    legend entries packed into lines (plain text or segments)

Letters and colours are the vocabulary's (:data:`advisor.vocabulary.VERDICT`); ``?`` marks a gap.
"""

from __future__ import annotations

import math
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.evaluation.outlook import GAP_LETTER, Outlook
from advisor.physics.sun import SUNRISE_SUNSET_ALTITUDE_DEG
from advisor.views.outlook_parts import tz_abbrev
from advisor.vocabulary import LETTERS, VERDICT, VERDICTS

#: Columns taken by the row labels left of the strip (``MST``, ``UTC``, ``sun``).
LABEL_W = 6
TICK_CHOICES_MIN = (10, 15, 20, 30, 60, 120, 180, 240, 360, 720, 1440)
MIN_TICK_CELLS = 7
GAP_STYLE = "bold white on grey35"


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
    letter = pd.Series(verdict).map(LETTERS).to_numpy(dtype=object)
    letter = np.where(gap, GAP_LETTER, letter)
    letter = np.where(beyond & ~gap, np.char.lower(letter.astype(str)), letter).astype(object)
    style_key = np.where(gap, "gap", verdict).astype(object)

    night = steps["sun_elevation_deg"].to_numpy() < SUNRISE_SUNSET_ALTITUDE_DEG
    sun_row = np.where(night, "·", " ").astype("<U1")
    ev = outlook.sun_events
    sun_row[ev["step"].to_numpy(dtype=np.int64)] = np.where(ev["event"].to_numpy() == "sunrise", "↑", "↓")

    styles = {v: VERDICT[v].style for v in VERDICTS}
    styles["gap"] = GAP_STYLE
    lines: list[list[tuple[str, str | None]]] = []
    tz_label = tz_abbrev(times[0], tz)[: LABEL_W - 1]
    for a in range(0, n, per_row):
        b = min(n, a + per_row)
        w = b - a
        loc_buf = [" "] * w
        utc_buf = [" "] * w
        last_end = -1
        ticks = np.flatnonzero(is_tick[a:b])
        if len(ticks) == 0 or ticks[0] >= 6:  # label the block's first cell too ("HH:MM ")
            ticks = np.concatenate(([0], ticks))
        for k in (int(t) for t in ticks):  # a few ticks per block
            ts_l, ts_u = local[a + k], times[a + k]
            label = f"{ts_l.day} {ts_l:%b}" if minute_of_day[a + k] == 0 else f"{ts_l:%H:%M}"
            if k <= last_end or k + len(label) > w:
                continue
            loc_buf[k : k + len(label)] = label
            utc_label = f"{ts_u:%H:%M}"
            utc_buf[k : k + len(utc_label)] = utc_label
            last_end = k + len(label)
        lines.append([(tz_label.ljust(LABEL_W), "dim"), ("".join(loc_buf), "bold")])
        cells: list[tuple[str, str | None]] = [("".ljust(LABEL_W), None)]
        keys = style_key[a:b]
        change = np.flatnonzero(np.concatenate(([True], keys[1:] != keys[:-1])))
        ends = np.append(change[1:], w)
        for s, e in zip(change, ends):  # runs of one verdict, not steps
            cells.append(("".join(letter[a + s : a + e]), styles[keys[s]]))
        lines.append(cells)
        lines.append([("UTC".ljust(LABEL_W), "dim"), ("".join(utc_buf), None)])
        lines.append([("sun".ljust(LABEL_W), "dim"), ("".join(sun_row[a:b]), "yellow")])
        lines.append([("", None)])
    return lines


def legend_entries(outlook: Outlook) -> list[list[tuple[str, str | None]]]:
    """The legend as entries of (text, style) segments: letter key, gap, horizon flag, sun marks."""
    entries = [[(f" {VERDICT[v].letter} ", VERDICT[v].style), (f" {VERDICT[v].words}", None)] for v in VERDICTS]
    entries.append([(f" {GAP_LETTER} ", GAP_STYLE), (" gap: no forecast row (undetermined)", None)])
    if outlook.steps["beyond_horizon"].any():
        entries.append([("s a p u", "bold"), (" lower case: beyond the forecast horizon", None)])
    entries.append([("↑ ↓ ·", "yellow"), (" sunrise, sunset, night", None)])
    return entries


def wrap_entries(entries, width: int, plain: bool = True):
    """Legend entries packed into lines of at most ``width`` columns (an entry is never split)."""
    lines: list[list[tuple[str, str | None]]] = []
    current: list[tuple[str, str | None]] = []
    used = 0
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
