"""Weather feed reader: a logger's CSV or JSON Lines file → the canonical frame.

``read_feed(path, layout)`` returns a :class:`Feed`: a frame sorted by UTC time with the
canonical columns in SI units, a ``kind`` column (``observed``/``forecast``), per-row
quality flags (``q_implausible``, ``q_gap_before``, ``q_missing``) and a :class:`FeedQuality`
summary.  Duplicate timestamps are dropped (first kept) and out-of-order rows are sorted, both
counted.  Implausible values are set to NaN and their row flagged, so no statistic ever uses
them.  ``canonical_frame(df, layout)`` does the same for an in-memory table (tests, forecasts).
The file itself is read by :mod:`advisor.io.feedfile` (bounded, complete lines only) and its
times by :mod:`advisor.io.times` (strict ISO 8601 or epoch numbers, range-checked).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pandas as pd

from advisor import units
from advisor.catalogue import PLAUSIBLE_RANGE
from advisor.errors import FeedError
from advisor.io.feedfile import MAX_FULL_READ_BYTES, check_whole_read, open_feed
from advisor.io.site import CANONICAL_COLUMNS, CANONICAL_UNITS, REQUIRED_COLUMNS, FeedLayout
from advisor.io.times import EPOCH_UNITS, check_time_range, epoch_times, parse_time_column
from advisor.physics.moisture import dew_point_c

__all__ = ["CHECK_TAIL_BYTES", "MAX_FULL_READ_BYTES", "Feed", "FeedQuality", "canonical_frame",
           "check_whole_read", "read_feed"]

CHECK_TAIL_BYTES = 16_000_000       # an instant's call reads at most this much of a big feed
MAX_OUT_OF_ORDER_FRACTION = 0.01
#: Largest magnitude read as a feed value; beyond it a cell is corrupt, not a measurement.
MAX_FEED_NUMBER = 1e15


@dataclass(frozen=True)
class FeedQuality:
    """Counts of what the reader found wrong or odd in a feed."""

    n_rows: int
    n_duplicates: int
    n_out_of_order: int
    n_gaps: int
    n_implausible: int
    n_missing: int
    first_time_utc: pd.Timestamp | None
    last_time_utc: pd.Timestamp | None
    partial_last_line: bool = False   # the file's last line had no newline: ignored as still being written

    def as_dict(self) -> dict:
        return {
            "rows": self.n_rows,
            "duplicates": self.n_duplicates,
            "out_of_order": self.n_out_of_order,
            "gaps": self.n_gaps,
            "implausible_rows": self.n_implausible,
            "missing_rows": self.n_missing,
            "first_time_utc": _iso(self.first_time_utc),
            "last_time_utc": _iso(self.last_time_utc),
        }


@dataclass(frozen=True)
class Feed:
    """A canonical feed: ``frame`` (UTC-sorted, SI) plus its quality summary and origin."""

    frame: pd.DataFrame
    quality: FeedQuality
    source: str


def _iso(ts: pd.Timestamp | None) -> str | None:
    return None if ts is None or pd.isna(ts) else ts.strftime("%Y-%m-%dT%H:%M:%SZ")


def _issue_times(table: pd.DataFrame, column: str, source: str, line_offset: int) -> pd.Series:
    """The issue-time column as UTC times (NaT where empty); every given time needs an offset."""
    if column not in table.columns:
        return pd.Series(pd.NaT, index=table.index, dtype="datetime64[ns, UTC]")
    return parse_time_column(table[column], source=source, field=column, line_offset=line_offset,
                             error_type=FeedError, require_offset=True, allow_empty=True)


def _numeric(raw: pd.Series, column: str, source: str, line_offset: int) -> np.ndarray:
    """A feed column as floats; a non-empty value that is not a finite number is an error.

    ``true``/``false`` (a JSON boolean, or a word in a CSV cell) is never read as 1 or 0.
    """
    if pd.api.types.is_bool_dtype(raw):
        raise FeedError("true/false where a number is expected", source=source, line=line_offset, field=column,
                        hint="write the measured value; leave the cell empty for a missing value")
    if pd.api.types.is_float_dtype(raw) or pd.api.types.is_integer_dtype(raw):
        values = raw.to_numpy(dtype=float)
        text = None
    else:
        text = raw.astype(object).where(raw.notna(), "").astype(str).str.strip()
        values = pd.to_numeric(text.where(text != "", None), errors="coerce").to_numpy(dtype=float)
        bad = np.isnan(values) & (text != "").to_numpy() & ~text.str.lower().isin(["nan", "na", "n/a", "null"]).to_numpy()
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            word = text.iloc[i]
            if word.lower() in ("true", "false"):
                raise FeedError(f"{word} where a number is expected", source=source, line=i + line_offset,
                                field=column, hint="write the measured value; leave the cell empty for a missing value")
            shown = repr(word) if len(word) <= 40 else repr(word[:30] + "…")
            raise FeedError(f"{shown} is not a number", source=source, line=i + line_offset, field=column,
                            hint="leave the cell empty for a missing value")
    huge = ~np.isnan(values) & ~(np.abs(values) < MAX_FEED_NUMBER)
    if huge.any():
        i = int(np.flatnonzero(huge)[0])
        if text is not None:
            shown = text.iloc[i] if len(text.iloc[i]) <= 24 else f"{text.iloc[i][:12]}… ({len(text.iloc[i])} digits)"
            what = f"value {shown} is not a finite number of plausible size"
        else:
            what = f"a number too large to be a measurement (read as {values[i]:g})"
        raise FeedError(what, source=source, line=i + line_offset, field=column,
                        hint="leave the cell empty for a missing value")
    return values


def _refuse_mixed_humidity(values: np.ndarray, column: str, source: str, line_offset: int) -> None:
    """RH in percent with some rows written as fractions (0..1) is ambiguous: refuse it."""
    finite = np.isfinite(values)
    looks_fraction = finite & (values > 0) & (values <= 1.0)
    looks_percent = finite & (values > 1.5)
    if looks_fraction.sum() >= 3 and looks_percent.any():
        i = int(np.flatnonzero(looks_fraction)[0])
        raise FeedError("relative humidity looks like a fraction in some rows and percent in others",
                        source=source, line=i + line_offset, field=column,
                        hint="write RH the same way in every row; map it with unit: fraction if it is 0..1")


def _is_number(text) -> bool:
    if isinstance(text, bool):
        return False
    try:
        float(text)
    except (TypeError, ValueError, OverflowError):
        return False
    return True


def _parse_times(raw: pd.Series, layout: FeedLayout, source: str, line_offset: int) -> pd.Series:
    """Timestamps → UTC: ISO 8601 (with an offset, or naive in ``layout.time_zone``) or epoch numbers.

    ``layout.time_unit`` says which; unset, numbers are read as epoch seconds and a value that
    cannot be one (e.g. epoch milliseconds) is refused with a message naming the setting.
    """
    field = layout.time_column
    if isinstance(raw.dtype, pd.DatetimeTZDtype):   # an in-memory table with real times
        times = raw.dt.tz_convert("UTC").reset_index(drop=True)
        if times.isna().any():
            i = int(np.flatnonzero(times.isna().to_numpy())[0])
            raise FeedError("empty timestamp", source=source, line=i + line_offset, field=field)
        check_time_range(times, source=source, field=field, line_offset=line_offset, error_type=FeedError)
        return pd.Series(pd.DatetimeIndex(times).as_unit("ns"))
    if pd.api.types.is_datetime64_dtype(raw):       # naive in-memory times: local wall clock
        raw = raw.dt.strftime("%Y-%m-%dT%H:%M:%S.%f").where(raw.notna(), None)
    values = raw.reset_index(drop=True).astype(object)
    empty = values.isna().to_numpy()
    if empty.any():
        i = int(np.flatnonzero(empty)[0])
        raise FeedError("empty timestamp", source=source, line=i + line_offset, field=field,
                        hint="every row needs a time")
    unit = layout.time_unit
    looks_numeric = (pd.api.types.is_numeric_dtype(raw) and not pd.api.types.is_bool_dtype(raw)) or \
        _is_number(values.iloc[0])
    if unit in EPOCH_UNITS or (unit is None and looks_numeric):
        unit_name = unit or "epoch_s"
        numbers = pd.to_numeric(values.astype(str).str.strip(), errors="coerce").to_numpy(dtype=float)
        bad = np.isnan(numbers)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            if not str(values.iloc[i]).strip():
                raise FeedError("empty timestamp", source=source, line=i + line_offset, field=field,
                                hint="every row needs a time")
            raise FeedError(f"cannot read timestamp {values.iloc[i]!r} as "
                            f"{'epoch seconds' if unit_name == 'epoch_s' else 'epoch milliseconds'}",
                            source=source, line=i + line_offset, field=field,
                            hint="write every time the same way, and set feed.time_unit (iso, epoch_s or epoch_ms) "
                                 "in the site file to match")
        return epoch_times(numbers, unit_name, guessed=unit is None, texts=values.astype(str).to_numpy(),
                           source=source, field=field, line_offset=line_offset, error_type=FeedError)
    if looks_numeric:   # unit == "iso"
        raise FeedError(f"numeric timestamp {values.iloc[0]!r} where feed.time_unit is iso", source=source,
                        line=line_offset, field=field,
                        hint="set feed.time_unit: epoch_s or epoch_ms in the site file, or write ISO 8601 times")
    return parse_time_column(values, source=source, field=field, line_offset=line_offset, error_type=FeedError,
                             time_zone=layout.time_zone, require_offset=False,
                             no_zone_hint="write times like 2026-01-15T09:00:00Z, or set feed.time_zone in the site file")


def canonical_frame(table: pd.DataFrame, layout: FeedLayout, source: str = "<feed>",
                    line_offset: int = 2, issue_time_column: str | None = None) -> Feed:
    """Map, convert, sort and flag a logger table into a canonical :class:`Feed`.

    With ``issue_time_column``, the frame also carries ``issued_utc``: each forecast row's issue
    time (NaT where the column is absent or the cell empty).
    """
    table = table.rename(columns=lambda c: str(c).strip())
    if len(table) == 0:
        raise FeedError("feed has a header but no data rows", source=source)
    time_col = layout.time_column if layout.time_column in table.columns else (
        "time" if "time" in table.columns else None)
    if time_col is None:
        hint = f"map it with feed.time_column in the site file; columns found: {', '.join(map(str, table.columns[:8]))}"
        if len(table.columns) == 1 and any(ch in str(table.columns[0]) for ch in ";\t|"):
            hint = "the file seems to use another delimiter than ','; save it as comma-separated"
        raise FeedError(f"no time column '{layout.time_column}'", source=source, line=1, hint=hint)
    times = _parse_times(table[time_col], replace(layout, time_column=time_col), source, line_offset)

    mapping = {c.canonical: c for c in layout.columns}
    out = {}
    for name in CANONICAL_COLUMNS:
        spec = mapping.get(name)
        if spec is not None and spec.source_column in table.columns:
            raw, unit = table[spec.source_column], spec.unit
        elif name in table.columns:  # canonical names are always read as SI
            raw, unit = table[name], CANONICAL_UNITS[name]
        elif name in REQUIRED_COLUMNS:
            wanted = f"'{spec.source_column}' (mapped to {name})" if spec else name
            raise FeedError(f"missing required column {wanted}", source=source, line=1,
                            hint=f"columns found: {', '.join(map(str, table.columns[:10]))}; "
                                 "map the logger's column in the site file under feed.columns")
        else:
            continue
        column = spec.source_column if spec is not None and spec.source_column in table.columns else name
        values = _numeric(raw, column, source, line_offset)
        if name == "rel_humidity_pct" and unit == "%":
            _refuse_mixed_humidity(values, column, source, line_offset)
        out[name] = np.asarray(units.convert(values, unit, CANONICAL_UNITS[name]), dtype=float)

    frame = pd.DataFrame(out)
    frame.insert(0, "time", pd.DatetimeIndex(times).as_unit("ns"))
    if "kind" in table.columns:
        kind = table["kind"].astype("string").str.strip().str.lower().fillna("observed")
        bad = ~kind.isin(["observed", "forecast"])
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise FeedError(f"kind {table['kind'].iloc[i]!r} is neither 'observed' nor 'forecast'",
                            source=source, line=i + line_offset, field="kind")
        frame["kind"] = kind.to_numpy(dtype=object)
    else:
        frame["kind"] = "observed"
    if issue_time_column is not None:
        frame["issued_utc"] = _issue_times(table, issue_time_column, source, line_offset)

    # Implausible values → NaN, row flagged (DESIGN §4 ranges).
    implausible = np.zeros(len(frame), dtype=bool)
    for name, (lo, hi) in PLAUSIBLE_RANGE.items():
        if name in frame:
            col = frame[name].to_numpy()
            bad = (col < lo) | (col > hi)
            implausible |= bad
            col = np.where(bad, np.nan, col)
            if name == "rel_humidity_pct":
                col = np.minimum(col, 100.0)
            frame[name] = col
    gust_below_mean = frame["wind_gust_ms"].to_numpy() < frame["wind_mean_ms"].to_numpy() - 0.5
    implausible |= gust_below_mean
    for name in ("wind_mean_ms", "wind_gust_ms"):
        frame.loc[gust_below_mean, name] = np.nan
    frame["q_implausible"] = implausible
    frame["q_missing"] = frame[list(REQUIRED_COLUMNS)].isna().any(axis=1).to_numpy() & ~implausible

    # Derived dew point where the feed has none.
    derived = dew_point_c(frame["air_temp_c"].to_numpy(), frame["rel_humidity_pct"].to_numpy())
    if "dew_point_c" in frame:
        frame["dew_point_c"] = frame["dew_point_c"].fillna(pd.Series(derived))
    else:
        frame["dew_point_c"] = derived

    # Order and duplicates: a few late rows are sorted in, exact repeats dropped (both counted);
    # a feed running backwards or repeating a time with other values is refused.
    t = pd.DatetimeIndex(frame["time"]).asi8
    backwards = np.flatnonzero(t[1:] < t[:-1]) + 1 if len(t) > 1 else np.array([], dtype=int)
    n_out_of_order = int(len(backwards))
    if n_out_of_order > max(1, MAX_OUT_OF_ORDER_FRACTION * len(t)):
        raise FeedError(f"{n_out_of_order} rows go back in time, first at this line", source=source,
                        line=int(backwards[0]) + line_offset,
                        hint="the logger clock or the file order is wrong; sort the feed by time")
    frame = frame.sort_values("time", kind="stable")
    dup = frame["time"].duplicated(keep="first").to_numpy()
    if dup.any():
        value_cols = [c for c in CANONICAL_COLUMNS if c in frame]
        repeated = frame[frame["time"].duplicated(keep=False).to_numpy()]
        conflicting = repeated.groupby("time")[value_cols].nunique(dropna=False).gt(1).any(axis=1)
        if conflicting.any():
            when = conflicting[conflicting].index[0]
            i = int(np.flatnonzero(t == when.value)[1])
            raise FeedError(f"time {_iso(when)} appears twice with different values", source=source,
                            line=i + line_offset, field=time_col,
                            hint="remove the duplicate rows; the advisor will not guess which is right")
    n_duplicates = int(dup.sum())
    frame = frame[~dup].reset_index(drop=True)
    dt_min = frame["time"].diff().dt.total_seconds().to_numpy() / 60.0
    frame["q_gap_before"] = np.nan_to_num(dt_min, nan=0.0) > layout.max_gap_min
    frame["good"] = ~(frame["q_implausible"] | frame["q_missing"]).to_numpy()

    quality = FeedQuality(
        n_rows=len(frame), n_duplicates=n_duplicates, n_out_of_order=n_out_of_order,
        n_gaps=int(frame["q_gap_before"].sum()), n_implausible=int(frame["q_implausible"].sum()),
        n_missing=int(frame["q_missing"].sum()),
        first_time_utc=frame["time"].iloc[0] if len(frame) else None,
        last_time_utc=frame["time"].iloc[-1] if len(frame) else None,
    )
    return Feed(frame=frame, quality=quality, source=source)


def read_feed(path: Path | str, layout: FeedLayout, tail_bytes: int | None = None,
              issue_time_column: str | None = None) -> Feed:
    """Read a CSV or JSON Lines feed file and return its canonical :class:`Feed`.

    With ``tail_bytes``, a file larger than twice that is read only from its last
    ``tail_bytes`` (plus the header): enough for an instant's call, in bounded memory.  A last
    line without its newline is ignored (a logger is still writing it) and noted in the quality.
    """
    path = Path(path)
    with open_feed(path, tail_bytes) as raw:
        try:
            feed = canonical_frame(raw.table, layout, source=str(path), line_offset=raw.first_line,
                                   issue_time_column=issue_time_column)
        except FeedError as exc:
            raise raw.relocate(exc) from None
    if raw.partial:
        feed = replace(feed, quality=replace(feed.quality, partial_last_line=True))
    return feed
