"""Times read from files and arguments: strict ISO 8601 shape, known range, then pandas.

    parse_time_text("2026-01-15T09:00:00Z", field="--at")   # one time, offset required
    parse_time_column(texts, source=..., field="time", line_offset=2, error_type=FeedError)
    epoch_times(values, "s", source=..., ...)                # epoch seconds / milliseconds
    check_time_range(times, texts, ...)                      # within TIME_RANGE_UTC

A time is read only in the shape ``YYYY-MM-DD[T ]HH:MM[:SS[.fff]]`` with an optional UTC offset
``Z``, ``±HH``, ``±HHMM`` or ``±HH:MM`` (lower-case ``t`` and ``z`` are accepted, as RFC 3339
allows).  A cut-short timestamp (``2026-01-16T03:3`` from a logger's half-written line) is
refused as incomplete instead of being read as 03:03, a date without a time of day is refused,
and every time must lie within :data:`TIME_RANGE_UTC` before pandas sees it, so no time can
overflow pandas' nanosecond range (year 2262).  Errors name the line and say what to fix.
"""

from __future__ import annotations

import re
from typing import Literal

import numpy as np
import pandas as pd

from advisor.errors import AdvisorError, UsageError

#: Times the advisor reads: [start, end) in UTC.  Wide enough for any archive or forecast and
#: well inside pandas' nanosecond range (1677..2262).
TIME_RANGE_UTC = (pd.Timestamp("1900-01-01", tz="UTC"), pd.Timestamp("2200-01-01", tz="UTC"))
RANGE_TEXT = "1900..2199"
ISO_HINT = "write ISO 8601 with Z or an offset, e.g. 2026-01-15T09:00:00Z"
MAX_TIME_CHARS = 40

_WIDTH = MAX_TIME_CHARS
_SPACES = np.array([ord(c) for c in " \t\r\n\v\f\xa0"], dtype=np.uint32)
_FULL = re.compile(r"\d{4}-\d\d-\d\d[Tt ]\d\d:\d\d(?::\d\d(?:\.\d+)?)?")
_SHAPE = "dddd-dd-ddTdd:dd:dd"
_OFFSET_SHAPE = "+dd:dd"


def _digit(codes: np.ndarray) -> np.ndarray:
    return (codes >= 48) & (codes <= 57)


def _text_array(texts) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """``(texts as a str Series, its stripped numpy unicode array, empty mask)``.

    No cell may blow up the array's width: cells longer than :data:`MAX_TIME_CHARS` + 24 are
    replaced there by a placeholder that is never a valid time.
    """
    series = pd.Series(texts, dtype=object).reset_index(drop=True)
    missing = series.isna().to_numpy()
    if missing.any():
        series = series.where(~missing, "")
    if pd.api.types.infer_dtype(series, skipna=False) != "string":
        series = series.astype(str)
    values = series.to_numpy(dtype=object)
    lengths = np.fromiter(map(len, values), dtype=np.int64, count=len(values))
    long = lengths > MAX_TIME_CHARS + 24
    if long.any():
        values = np.where(long, "x" * (MAX_TIME_CHARS + 1), values)
    arr = values.astype("U") if len(values) else np.zeros(0, dtype="U1")
    if len(arr):
        wide = arr.view(np.uint32).reshape(len(arr), max(arr.dtype.itemsize // 4, 1))
        ends = np.stack([wide[:, 0], wide[np.arange(len(arr)), np.maximum(np.strings.str_len(arr) - 1, 0)]])
        if np.isin(ends, _SPACES).any():
            arr = np.strings.strip(arr)
    return series, arr, np.strings.str_len(arr) == 0


def iso_shape(stripped: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised shape check of ISO 8601 times: ``(ok, has_offset)`` boolean arrays.

    ``stripped`` is a numpy unicode array of stripped texts.  ``ok`` means the full shape (date,
    hours and minutes, optional seconds and fraction) followed by nothing or a complete UTC
    offset; ``has_offset`` that it carries ``Z``/``z``, ``±HH``, ``±HHMM`` or ``±HH:MM``.  Field
    values (month 13) are left to pandas.
    """
    n = len(stripped)
    if n == 0:
        return np.zeros(0, dtype=bool), np.zeros(0, dtype=bool)
    length = np.strings.str_len(stripped)
    usable = (length >= 16) & (length <= _WIDTH)
    length = np.where(usable, length, 0)
    width = int(length.max()) if usable.any() else 16
    itemsize = max(stripped.dtype.itemsize // 4, 1)
    wide = stripped.view(np.uint32).reshape(n, itemsize)
    codes = np.zeros((n, max(width, 16) + 1), dtype=np.uint8)  # one spare zero column past the end
    take = min(itemsize, width)
    codes[:, :take] = np.minimum(wide[:, :take], 255)  # non-ASCII: 255, never a digit or separator
    codes[~usable] = 0
    digit = (codes >= 48) & (codes <= 57)
    rows = np.arange(n)
    last = codes.shape[1] - 1

    def at(pos: np.ndarray) -> np.ndarray:
        return np.where(pos < length, codes[rows, np.minimum(pos, last)], 0)

    base = digit[:, [0, 1, 2, 3, 5, 6, 8, 9, 11, 12, 14, 15]].all(axis=1)
    base &= (codes[:, 4] == ord("-")) & (codes[:, 7] == ord("-")) & (codes[:, 13] == ord(":"))
    base &= np.isin(codes[:, 10], (ord("T"), ord("t"), ord(" ")))
    pos = np.full(n, 16)
    has_sec = (length > 16) & (at(pos) == ord(":"))
    sec_ok = (length >= 19) & _digit(at(pos + 1)) & _digit(at(pos + 2))
    pos = np.where(has_sec, 19, 16)
    has_frac = has_sec & (length > 19) & (at(pos) == ord("."))
    run = np.zeros(n, dtype=np.int64)
    if has_frac.any() and codes.shape[1] > 20:
        not_digit = ~digit[:, 20:]
        run = np.where(not_digit.any(axis=1), not_digit.argmax(axis=1), codes.shape[1] - 20)
    pos = np.where(has_frac, 20 + run, pos)
    rest = length - pos
    c0 = at(pos)
    sign = (c0 == ord("+")) | (c0 == ord("-"))
    hh = sign & _digit(at(pos + 1)) & _digit(at(pos + 2))
    zulu = (rest == 1) & ((c0 == ord("Z")) | (c0 == ord("z")))
    has_offset = zulu | ((rest == 3) & hh) | ((rest == 5) & hh & _digit(at(pos + 3)) & _digit(at(pos + 4)))
    has_offset |= (rest == 6) & hh & (at(pos + 3) == ord(":")) & _digit(at(pos + 4)) & _digit(at(pos + 5))
    ok = usable & base & (~has_sec | sec_ok) & (~has_frac | (run >= 1)) & ((rest == 0) | has_offset)
    return ok, ok & has_offset


def _fits(text: str, shape: str) -> bool:
    """Does ``text`` match the start of ``shape`` (``d`` = digit, ``T`` = T/t/space, else literal)?"""
    if len(text) > len(shape):
        return False
    for ch, want in zip(text, shape):
        if want == "d":
            if not ch.isdigit() or not ch.isascii():
                return False
        elif want == "T":
            if ch not in "Tt ":
                return False
        elif want == "+":
            if ch not in "+-":
                return False
        elif ch != want:
            return False
    return True


def describe_bad_time(text: object) -> tuple[str, str]:
    """``(what, how to fix)`` for a time text that :func:`iso_shape` refused."""
    t = "" if text is None or (isinstance(text, float) and np.isnan(text)) else str(text).strip()
    shown = repr(t) if len(t) <= 60 else repr(t[:40] + "…")
    cut_hint = "the line may have been cut short while it was written; " + ISO_HINT
    if not t:
        return "empty timestamp", "every row needs a time"
    if len(t) > MAX_TIME_CHARS:
        return f"timestamp {shown} is {len(t)} characters long, not a time", ISO_HINT
    if re.fullmatch(r"\d{4}-\d\d-\d\d(?:[Zz]|[+-]\d\d(?::?\d\d)?)?", t):
        return f"timestamp {shown} has a date but no time of day", ISO_HINT
    if _fits(t, _SHAPE[:16]) or (len(t) > 10 and _fits(re.sub(r"(?:[Zz]|[+-]\d\d(?::?\d\d)?)$", "", t), _SHAPE)):
        return f"timestamp {shown} is incomplete", cut_hint
    m = _FULL.match(t)
    if m:
        rest = t[m.end() :]
        if rest[:1] == ":" or rest == "." or (rest[:1] == "." and m.group(0).count(":") == 1):
            return f"timestamp {shown} is incomplete", cut_hint
        if rest[:1] in "+-" and _fits(rest, _OFFSET_SHAPE):
            return f"UTC offset {rest!r} of timestamp {shown} is incomplete", cut_hint
        if rest[:1] in "+-":
            return (
                f"UTC offset {rest!r} of timestamp {shown} is malformed",
                "write the offset as +HH:MM, +HHMM, +HH or Z, e.g. 2026-01-15T09:00:00+01:00",
            )
        if rest.strip().upper() in ("UTC", "GMT", "UT"):
            return f"timestamp {shown} names its zone as {rest.strip()!r}", "write Z for UTC, e.g. 2026-01-15T09:00:00Z"
        return f"timestamp {shown} has unexpected text {rest!r} after the time", ISO_HINT
    return f"cannot read timestamp {shown}", ISO_HINT


def _fail(error_type, what, hint, source, line, field):
    return error_type(what, source=source, line=line, field=field, hint=hint)


def check_time_range(
    times: pd.Series | pd.DatetimeIndex,
    texts=None,
    *,
    source: str | None = None,
    field: str | None = None,
    line_offset=None,
    error_type: type[AdvisorError] = UsageError,
    hint: str | None = None,
) -> None:
    """Refuse any time outside :data:`TIME_RANGE_UTC` (NaT is ignored), naming the first one's line.

    Naive times are compared with the range's wall-clock bounds.
    """
    values = pd.Series(times).reset_index(drop=True)
    if len(values) == 0:
        return
    lo, hi = TIME_RANGE_UTC
    if getattr(values.dt, "tz", None) is None:
        lo, hi = lo.tz_localize(None), hi.tz_localize(None)
    bad = (values.notna() & ((values < lo) | (values >= hi))).to_numpy()
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        shown = texts.iloc[i] if isinstance(texts, pd.Series) else texts[i] if texts is not None else values.iloc[i]
        raise _fail(
            error_type,
            f"time {str(shown).strip()!r} is outside the years {RANGE_TEXT}",
            hint or "check the year",
            source,
            _line(i, line_offset),
            field,
        )


def _line(i: int, line_offset) -> int | None:
    """File line of row ``i``: ``line_offset`` is ``None``, the line of row 0, or one line per row."""
    if line_offset is None:
        return None
    if isinstance(line_offset, (int, np.integer)):
        return int(i + line_offset)
    return int(line_offset[i])


def parse_time_column(
    texts: pd.Series,
    *,
    source: str | None,
    field: str | None,
    line_offset,
    error_type: type[AdvisorError],
    time_zone: str | None = None,
    require_offset: bool = True,
    allow_empty: bool = False,
    no_zone_hint: str | None = None,
) -> pd.Series:
    """A column of ISO 8601 texts → UTC times (``datetime64[ns, UTC]``), strictly.

    Row ``i`` is reported as line ``i + line_offset`` (``line_offset[i]`` for an array of lines;
    no line with ``None``).  Empty cells are NaT with
    ``allow_empty``, an error otherwise.  Texts without an offset are read in ``time_zone``
    when ``require_offset`` is false and a zone is given; mixing both kinds is refused.
    """
    series, stripped, empty = _text_array(texts)
    if empty.any() and not allow_empty:
        i = int(np.flatnonzero(empty)[0])
        raise _fail(error_type, "empty timestamp", "every row needs a time", source, _line(i, line_offset), field)
    ok, has_offset = iso_shape(stripped)
    bad = ~ok & ~empty
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        what, hint = describe_bad_time(series.iloc[i])
        raise _fail(error_type, what, hint, source, _line(i, line_offset), field)
    given = ~empty
    naive = given & ~has_offset
    out = pd.Series(pd.NaT, index=range(len(series)), dtype="datetime64[ns, UTC]")
    if not given.any():
        out.index = texts.index
        return out
    if naive.any():
        i = int(np.flatnonzero(naive)[0])
        shown = repr(str(stripped[i]))
        if require_offset:
            raise _fail(
                error_type,
                f"time {shown} has no UTC offset",
                no_zone_hint or ISO_HINT,
                source,
                _line(i, line_offset),
                field,
            )
        if has_offset.any():
            raise _fail(
                error_type,
                f"timestamp {shown} has no UTC offset while others do",
                "write every time with an offset or Z",
                source,
                _line(i, line_offset),
                field,
            )
        if time_zone is None:
            raise _fail(
                error_type,
                f"timestamp {shown} carries no UTC offset and no time zone is declared",
                no_zone_hint or ISO_HINT,
                source,
                _line(i, line_offset),
                field,
            )
    # pandas reads the original strings fastest; only stripped or lower-case texts are rewritten.
    same = np.array_equal(
        np.fromiter(map(len, series), dtype=np.int64, count=len(series)), np.strings.str_len(stripped)
    )
    if same and not (np.strings.find(stripped, "t") >= 0).any() and not (np.strings.find(stripped, "z") >= 0).any():
        upper = series.where(given, None)
    else:
        upper = pd.Series(np.strings.upper(stripped).astype(object)).where(given, None)
    try:
        parsed = pd.to_datetime(upper, utc=not naive.any(), format="ISO8601")
    except (ValueError, TypeError, OverflowError):
        check = pd.to_datetime(upper, utc=not naive.any(), format="ISO8601", errors="coerce")
        wrong = given & check.isna().to_numpy()
        i = int(np.flatnonzero(wrong)[0]) if wrong.any() else 0
        raise _fail(
            error_type,
            f"timestamp {str(stripped[i])!r} is not a valid date and time",
            "check the month, day, hour and minute; " + ISO_HINT,
            source,
            _line(i, line_offset),
            field,
        ) from None
    check_time_range(parsed, stripped, source=source, field=field, line_offset=line_offset, error_type=error_type)
    if naive.any():
        local = parsed.dt.tz_localize(time_zone, ambiguous="NaT", nonexistent="NaT")
        lost = (local.isna() & parsed.notna()).to_numpy()
        if lost.any():
            i = int(np.flatnonzero(lost)[0])
            raise _fail(
                error_type,
                f"local time {str(stripped[i])!r} is ambiguous or does not exist in {time_zone}",
                "log in UTC or with an offset to avoid daylight-saving changes",
                source,
                _line(i, line_offset),
                field,
            )
        parsed = local.dt.tz_convert("UTC")
    return pd.Series(pd.DatetimeIndex(parsed).as_unit("ns"), index=texts.index)


#: Epoch units: name in the site file → (pandas unit, factor to seconds).
EPOCH_UNITS: dict[str, tuple[Literal["s", "ms"], float]] = {"epoch_s": ("s", 1.0), "epoch_ms": ("ms", 1e-3)}


def epoch_times(
    values: np.ndarray,
    unit: str,
    *,
    guessed: bool,
    texts=None,
    source: str | None,
    field: str | None,
    line_offset: int,
    error_type: type[AdvisorError],
) -> pd.Series:
    """Numeric epoch times (``unit`` ``epoch_s`` or ``epoch_ms``) → UTC ``datetime64[ns, UTC]``.

    Every value is range-checked first.  ``guessed`` says the unit was assumed (no
    ``feed.time_unit`` in the site file): the message then names the setting.
    """
    values = np.asarray(values, dtype=float)
    pd_unit, to_s = EPOCH_UNITS[unit]
    lo, hi = (t.value / 1e9 for t in TIME_RANGE_UTC)
    seconds = values * to_s
    bad = ~np.isfinite(seconds) | (seconds < lo) | (seconds >= hi)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        shown = texts[i] if texts is not None else values[i]
        name = "epoch seconds" if unit == "epoch_s" else "epoch milliseconds"
        if guessed and np.isfinite(values[i]) and lo <= values[i] / 1000 < hi:
            what = f"numeric timestamp {str(shown).strip()} is not a time in {name} (it looks like milliseconds)"
            hint = "set feed.time_unit: epoch_ms in the site file"
        else:
            what = f"numeric timestamp {str(shown).strip()} read as {name} is outside the years {RANGE_TEXT}"
            hint = "set feed.time_unit (epoch_s or epoch_ms) in the site file to match the logger"
        raise _fail(error_type, what, hint, source, _line(i, line_offset), field)
    times = pd.to_datetime(pd.Series(values), unit=pd_unit, utc=True)
    return pd.Series(pd.DatetimeIndex(times).as_unit("ns"))


def parse_time_text(
    text: str,
    *,
    field: str | None = None,
    source: str | None = None,
    line: int | None = None,
    error_type: type[AdvisorError] = UsageError,
) -> pd.Timestamp:
    """One ISO 8601 time with a UTC offset (``--at``, a registry row) → UTC ``Timestamp`` [ns].

    Raises ``error_type`` (``UsageError`` by default: exit 2) with an accurate one-line message
    for a malformed, incomplete, offset-less or out-of-range time.
    """
    series = pd.Series([str(text)], dtype=object)
    times = parse_time_column(
        series, source=source, field=field, line_offset=line, error_type=error_type, require_offset=True
    )
    return times.iloc[0]


def parse_time_arg(text: str, field: str = "--at", now: pd.Timestamp | None = None) -> pd.Timestamp:
    """A command-line time: ISO 8601 with an offset, or ``now`` (``now`` given, or the clock)."""
    if str(text).strip().lower() == "now":
        return pd.Timestamp.now(tz="UTC") if now is None else now
    return parse_time_text(text, field=field, error_type=UsageError)


def utc_ns(times) -> np.ndarray:
    """Times (DatetimeIndex, Series, datetime64 array or a list of timestamps) → int64 nanoseconds
    since the epoch, UTC (tz-aware times are converted; naive ones are read as UTC)."""
    if isinstance(times, np.ndarray) and times.dtype.kind == "M":
        return times.astype("datetime64[ns]").astype(np.int64)
    index = pd.DatetimeIndex(times)
    if index.tz is not None:
        index = index.tz_convert("UTC").tz_localize(None)
    return index.as_unit("ns").asi8
