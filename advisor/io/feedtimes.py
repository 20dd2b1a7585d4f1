"""A feed's time column(s) → UTC times, as the site file describes them.

    times = feed_times(table, layout, source, line_offset)

* one column, or a date and a time column joined with one space (``feed.time_column: [D, T]``);
* ISO 8601 (strict, :mod:`advisor.io.times`), epoch numbers (``feed.time_unit``), or any
  strftime layout (``feed.time_format: "%m/%d/%Y %H:%M"``);
* ``feed.time_label: end`` for stamps that end the period their values cover, where ``24:00``
  means midnight at the end of the day; ``start`` moves each stamp to the end of its period
  (one cadence later), so a value is never used before its period was over;
* stamps without an offset are read in ``feed.time_zone`` (an IANA name, ``Etc/GMT+5`` or a
  fixed offset ``UTC-05:00`` / ``UTC+05:30``).

Every error names the column(s), the line and the text as written, and how to fix it.

The usual column, every text written the same way with its UTC offset
(``2026-01-15T09:00:00-07:00``), is read at once from its bytes (:func:`uniform_iso_ns`); any
other column, and every error, goes through the strict reader (:mod:`advisor.io.times`).
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import replace

import numpy as np
import pandas as pd

from advisor.errors import FeedError
from advisor.io.feedlayout import FeedLayout, fixed_offset_minutes
from advisor.io.times import EPOCH_UNITS, TIME_RANGE_UTC, check_time_range, epoch_times, parse_time_column

__all__ = ["MIDNIGHT_24", "feed_times", "zone_object", "start_label_shift", "uniform_iso_ns"]

#: An hour of 24 (24:00 or 24:00:00) where a time of day starts: after the date's space or T.
MIDNIGHT_24 = re.compile(r"(?:^|(?<=[\sTt]))24:00(?::00)?(?![\d:])")

_ISO_WITH_OFFSET = re.compile(r"\d{4}-\d\d-\d\d[Tt ]\d\d:\d\d(?::\d\d(?:\.(\d{1,9}))?)?(Z|z|[+-]\d\d(?::?\d\d)?)\Z")
_DAYS_BEFORE_MONTH = np.array([0, 0, 31, 59, 90, 120, 151, 181, 212, 243, 273, 304, 334], dtype=np.int32)
_DAYS_IN_MONTH = np.array([0, 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31], dtype=np.int32)
_YEARS = np.arange(10_000, dtype=np.int64)  # every year four digits can write
#: Per year: is it a leap year; days from 1970-01-01 to its 1 January (proleptic Gregorian).
_LEAP = ((_YEARS % 4 == 0) & (_YEARS % 100 != 0)) | (_YEARS % 400 == 0)
_YEAR_START_DAYS = 365 * (_YEARS - 1) + (_YEARS - 1) // 4 - (_YEARS - 1) // 100 + (_YEARS - 1) // 400 - 719162
#: TIME_RANGE_UTC of advisor.io.times, [1900-01-01, 2200-01-01) UTC, in seconds since 1970.
_RANGE_S = (int(TIME_RANGE_UTC[0].value // 1_000_000_000), int(TIME_RANGE_UTC[1].value // 1_000_000_000))


def uniform_iso_ns(values: pd.Series) -> np.ndarray | None:
    """UTC times [ns since 1970] of ISO 8601 texts that all share the first one's shape, else None.

    The fast path for a logger's column: every cell a ``str`` with exactly the first one's
    shape (the same length, digits where it has digits, the same separators, a sign where it has
    one) and a UTC offset; every field range-checked (month, day of that month, hour, minute,
    second, offset) and every time within :data:`advisor.io.times.TIME_RANGE_UTC`.  Anything
    else (no offset, spaces, a cut-short line, a leap second, 24:00, mixed shapes, non-ASCII)
    returns ``None``: the strict reader (:func:`advisor.io.times.parse_time_column`) then reads
    or refuses the column with its line-numbered message.  So this never accepts what the
    strict reader refuses, and gives the same instants (tests/test_feedtimes_fast.py).
    """
    n = len(values)
    if n == 0:
        return None
    first = values.iloc[0]
    if not isinstance(first, str) or _ISO_WITH_OFFSET.match(first) is None:
        return None
    if not isinstance(values.dtype, pd.StringDtype) and pd.api.types.infer_dtype(values, skipna=False) != "string":
        return None  # a cell that is not a str is written out by the strict reader
    try:
        buf = values.to_numpy(dtype=object).astype("S")  # ASCII bytes, one row per text
    except (UnicodeEncodeError, ValueError, TypeError):
        return None
    width = buf.dtype.itemsize
    if width != len(first):  # a longer text; a shorter one ends in zero bytes, refused below
        return None
    return _matrix_ns(buf.view(np.uint8).reshape(n, width), first)


def _matrix_ns(buf: np.ndarray, template_text: str) -> np.ndarray | None:
    """:func:`uniform_iso_ns` of an ``(n, width)`` ``uint8`` matrix of texts shaped like ``template_text``."""
    n, width = buf.shape
    m = _ISO_WITH_OFFSET.match(template_text)
    if m is None or len(template_text) != width:
        return None
    template = np.frombuffer(template_text.encode("ascii"), dtype=np.uint8)
    offset = m.group(2)
    off_at = width - len(offset)
    sign_col = off_at if offset[0] in "+-" else None
    # every column holds a digit where the template has one and the template's character elsewhere
    is_digit = (template >= 48) & (template <= 57)
    lo = np.where(is_digit, 48, template).astype(np.uint8)
    hi = np.where(is_digit, 57, template).astype(np.uint8)
    if sign_col is not None:
        lo[sign_col], hi[sign_col] = ord("+"), ord("-")  # '+' 43, ',' 44, '-' 45
    rel = buf - lo  # a digit's value in a digit column; wraps to >= 128 below lo
    if not (rel <= hi - lo).all():  # lo <= c <= hi in one comparison
        return None
    if sign_col is not None and (rel[:, sign_col] == 1).any():  # a ',' between '+' and '-'
        return None

    def number(start: int, stop: int) -> np.ndarray:  # the digits in columns [start, stop), as int32
        out = rel[:, start].astype(np.int32)
        for col in range(start + 1, stop):
            out *= 10
            out += rel[:, col]
        return out

    year, month, day = number(0, 4), number(5, 7), number(8, 10)
    hour, minute = number(11, 13), number(14, 16)
    has_seconds = width > 16 and template[16] == ord(":")
    second = number(17, 19) if has_seconds else np.zeros(n, dtype=np.int32)
    if not ((month >= 1) & (month <= 12)).all():
        return None
    leap = _LEAP[year]
    ok = (day >= 1) & (day <= _DAYS_IN_MONTH[month] + ((month == 2) & leap))
    ok &= (hour <= 23) & (minute <= 59) & (second <= 59)
    clock_s = hour * 3600 + minute * 60 + second  # int32: within a day and an offset
    if sign_col is not None:
        off_h = number(off_at + 1, off_at + 3)
        off_m = number(width - 2, width) if len(offset) > 3 else np.zeros(n, dtype=np.int32)
        ok &= (off_h <= 23) & (off_m <= 59)
        offset_s = off_h * 3600 + off_m * 60
        clock_s -= np.where(rel[:, sign_col] == 2, -offset_s, offset_s)  # '-' is 2 past '+'
    if not ok.all():
        return None
    days = _YEAR_START_DAYS[year] + (_DAYS_BEFORE_MONTH[month] + ((month > 2) & leap) + day - 1)
    seconds = days * 86400 + clock_s
    if not ((seconds >= _RANGE_S[0]) & (seconds < _RANGE_S[1])).all():
        return None
    ns = seconds * 1_000_000_000
    fraction = m.group(1)
    if fraction:
        ns += number(20, 20 + len(fraction)).astype(np.int64) * 10 ** (9 - len(fraction))
    return ns


def zone_object(name: str | None):
    """A zone name of the site file → what pandas localises with (a fixed offset for ``UTC+05:30``)."""
    if name is None:
        return None
    minutes = fixed_offset_minutes(name)
    if minutes is not None:
        return dt.timezone(dt.timedelta(minutes=minutes))
    return name


def _is_number(text) -> bool:
    if isinstance(text, bool):
        return False
    try:
        float(text)
    except (TypeError, ValueError, OverflowError):
        return False
    return True


def _raw_time_text(table: pd.DataFrame, layout: FeedLayout, source: str, line_offset: int) -> tuple[pd.Series, str]:
    """The time column, or the date and time columns joined with one space; and its name for messages."""
    names = layout.time_columns
    if len(names) == 1:
        name = names[0] if names[0] in table.columns else ("time" if "time" in table.columns else None)
        if name is None:
            hint = f"map it with feed.time_column in the site file; columns found: {', '.join(map(str, table.columns[:8]))}"
            if len(table.columns) == 1 and any(ch in str(table.columns[0]) for ch in ";\t|"):
                hint = "the file seems to use another delimiter than ','; save it as comma-separated"
            raise FeedError(f"no time column '{names[0]}'", source=source, line=max(1, line_offset - 1), hint=hint)
        return table[name], name
    absent = [n for n in names if n not in table.columns]
    if absent:
        raise FeedError(
            f"no time column '{absent[0]}'",
            source=source,
            line=max(1, line_offset - 1),
            hint=f"feed.time_column names [date, time]; columns found: {', '.join(map(str, table.columns[:8]))}",
        )
    parts = [table[n].astype(object).where(table[n].notna(), "").astype(str).str.strip() for n in names]
    joined = (parts[0] + " " + parts[1]).str.strip()
    return joined.where((parts[0] != "") & (parts[1] != ""), ""), layout.time_field


def _localise(
    naive: pd.Series, texts: pd.Series, layout: FeedLayout, source: str, field: str, line_offset: int
) -> pd.Series:
    zone = zone_object(layout.time_zone)
    local = naive.dt.tz_localize(zone, ambiguous="NaT", nonexistent="NaT")
    lost = (local.isna() & naive.notna()).to_numpy()
    if lost.any():
        i = int(np.flatnonzero(lost)[0])
        raise FeedError(
            f"local time {texts.iloc[i]!r} is ambiguous or does not exist in {layout.time_zone}",
            source=source,
            line=i + line_offset,
            field=field,
            hint="a logger that keeps standard time all year needs its fixed offset as "
            "feed.time_zone (e.g. UTC-05:00); else log in UTC",
        )
    return pd.Series(pd.DatetimeIndex(local.dt.tz_convert("UTC")).as_unit("ns"))


def _formatted_times(raw: pd.Series, layout: FeedLayout, source: str, field: str, line_offset: int) -> pd.Series:
    """Times written in ``layout.time_format`` (strftime), in ``layout.time_zone``."""
    fmt = layout.time_format
    texts = raw.reset_index(drop=True).astype(object).where(raw.reset_index(drop=True).notna(), "")
    texts = texts.astype(str).str.strip()
    empty = (texts == "").to_numpy()
    if empty.any():
        i = int(np.flatnonzero(empty)[0])
        raise FeedError(
            "empty timestamp", source=source, line=i + line_offset, field=field, hint="every row needs a time"
        )
    if layout.time_zone is None:
        raise FeedError(
            f"times written as {fmt!r} carry no UTC offset and no time zone is declared",
            source=source,
            line=line_offset,
            field=field,
            hint="set feed.time_zone in the site file (e.g. UTC, UTC-05:00 or America/Chicago)",
        )
    midnight = texts.str.contains(MIDNIGHT_24).to_numpy()
    if midnight.any() and layout.time_label != "end":
        i = int(np.flatnonzero(midnight)[0])
        raise FeedError(
            f"timestamp {texts.iloc[i]!r} says 24:00",
            source=source,
            line=i + line_offset,
            field=field,
            hint="a stamp of 24:00 ends a period: set feed.time_label: end in the site file",
        )
    readable = texts.str.replace(MIDNIGHT_24, "00:00", regex=True) if midnight.any() else texts
    parsed = pd.to_datetime(readable, format=fmt, errors="coerce")
    bad = parsed.isna().to_numpy()
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise FeedError(
            f"timestamp {texts.iloc[i]!r} does not match time_format {fmt!r}",
            source=source,
            line=i + line_offset,
            field=field,
            hint="check feed.time_format (strftime codes, e.g. %m/%d/%Y %H:%M) against the file",
        )
    if midnight.any():
        parsed = parsed + pd.to_timedelta(midnight.astype(np.int64), unit="D")
    check_time_range(parsed, texts, source=source, field=field, line_offset=line_offset, error_type=FeedError)
    return _localise(parsed.astype("datetime64[ns]"), texts, layout, source, field, line_offset)


def _standard_times(raw: pd.Series, layout: FeedLayout, source: str, field: str, line_offset: int) -> pd.Series:
    """ISO 8601 (with an offset, or naive in ``layout.time_zone``) or epoch numbers.

    ``layout.time_unit`` says which; unset, numbers are read as epoch seconds and a value that
    cannot be one (e.g. epoch milliseconds) is refused with a message naming the setting.
    """
    if isinstance(raw.dtype, pd.DatetimeTZDtype):  # an in-memory table with real times
        times = raw.dt.tz_convert("UTC").reset_index(drop=True)
        if times.isna().any():
            i = int(np.flatnonzero(times.isna().to_numpy())[0])
            raise FeedError("empty timestamp", source=source, line=i + line_offset, field=field)
        check_time_range(times, source=source, field=field, line_offset=line_offset, error_type=FeedError)
        return pd.Series(pd.DatetimeIndex(times).as_unit("ns"))
    if pd.api.types.is_datetime64_dtype(raw):  # naive in-memory times: local wall clock
        raw = raw.dt.strftime("%Y-%m-%dT%H:%M:%S.%f").where(raw.notna(), None)
    values = raw.reset_index(drop=True).astype(object)
    if layout.time_unit not in EPOCH_UNITS:
        # The usual column (every cell a str of one ISO 8601 shape with its offset: none empty,
        # none a number) at once; anything else below, as the strict reader reads or refuses it.
        fast = uniform_iso_ns(values)
        if fast is not None:
            # named as the strict reader names it: after the column, unless it upper-cased a t or z
            name = None if {"t", "z"} & set(str(values.iloc[0])) else values.name
            return pd.Series(pd.DatetimeIndex(fast.view("datetime64[ns]")).tz_localize("UTC"), name=name)
    empty = values.isna().to_numpy()
    if empty.any():
        i = int(np.flatnonzero(empty)[0])
        raise FeedError(
            "empty timestamp", source=source, line=i + line_offset, field=field, hint="every row needs a time"
        )
    unit = layout.time_unit
    looks_numeric = (pd.api.types.is_numeric_dtype(raw) and not pd.api.types.is_bool_dtype(raw)) or _is_number(
        values.iloc[0]
    )
    if unit in EPOCH_UNITS or (unit is None and looks_numeric):
        unit_name = unit or "epoch_s"
        numbers = pd.to_numeric(values.astype(str).str.strip(), errors="coerce").to_numpy(dtype=float)
        bad = np.isnan(numbers)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise FeedError(
                f"cannot read timestamp {values.iloc[i]!r} as "
                f"{'epoch seconds' if unit_name == 'epoch_s' else 'epoch milliseconds'}",
                source=source,
                line=i + line_offset,
                field=field,
                hint="write every time the same way, and set feed.time_unit (iso, epoch_s or epoch_ms) "
                "in the site file to match",
            )
        return epoch_times(
            numbers,
            unit_name,
            guessed=unit is None,
            texts=values.astype(str).to_numpy(),
            source=source,
            field=field,
            line_offset=line_offset,
            error_type=FeedError,
        )
    if looks_numeric:  # unit == "iso"
        raise FeedError(
            f"numeric timestamp {values.iloc[0]!r} where feed.time_unit is iso",
            source=source,
            line=line_offset,
            field=field,
            hint="set feed.time_unit: epoch_s or epoch_ms in the site file, or write ISO 8601 times",
        )
    try:
        return parse_time_column(
            values,
            source=source,
            field=field,
            line_offset=line_offset,
            error_type=FeedError,
            time_zone=zone_object(layout.time_zone),
            require_offset=False,
            no_zone_hint="write times like 2026-01-15T09:00:00Z, or set feed.time_zone in the site file",
        )
    except FeedError as exc:
        i = (exc.line - line_offset) if exc.line is not None else -1
        if 0 <= i < len(values) and MIDNIGHT_24.search(str(values.iloc[i])):
            exc.hint = (
                "ISO 8601 times here use 00:00 of the next day; for an export that writes 24:00, "
                "set feed.time_format and feed.time_label: end"
            )
        raise


def start_label_shift(times: pd.Series) -> pd.Timedelta:
    """How far period-start stamps move to their period's end: the median interval between times."""
    t = np.unique(pd.DatetimeIndex(times).as_unit("ns").asi8)
    if len(t) < 2:
        return pd.Timedelta(0)
    return pd.Timedelta(int(np.median(np.diff(t))), unit="ns")


def feed_times(table: pd.DataFrame, layout: FeedLayout, source: str, line_offset: int) -> tuple[pd.Series, str]:
    """The UTC time of every row of ``table`` and the name of the time column(s) it came from."""
    raw, field = _raw_time_text(table, layout, source, line_offset)
    if layout.time_format is not None and not isinstance(raw.dtype, pd.DatetimeTZDtype):
        times = _formatted_times(raw, layout, source, field, line_offset)
    else:
        times = _standard_times(raw, replace(layout, time_column=field), source, field, line_offset)
    if layout.time_label == "start":
        times = times + start_label_shift(times)
    return times, field
