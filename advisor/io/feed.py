"""Weather feed reader: a logger's CSV or JSON Lines file → the canonical frame.

``read_feed(path, layout)`` returns a :class:`Feed`: a frame sorted by UTC time with the
canonical columns of DESIGN §4 in SI units, a ``kind`` column (``observed``/``forecast``), per-row
quality flags (``q_implausible``, ``q_gap_before``, ``q_missing``) and a :class:`FeedQuality`
summary.  Duplicate timestamps are dropped (first kept) and out-of-order rows are sorted, both
counted.  Implausible values are set to NaN and their row flagged, so no statistic ever uses
them.  ``canonical_frame(df, layout)`` does the same for an in-memory table (tests, forecasts).
"""

from __future__ import annotations

import contextlib
import io
import json
import re
import warnings
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pandas as pd

from advisor import units
from advisor.catalogue import PLAUSIBLE_RANGE
from advisor.errors import FeedError
from advisor.io.fileio import regular_file_size
from advisor.physics.moisture import dew_point_c
from advisor.io.site import CANONICAL_COLUMNS, CANONICAL_UNITS, REQUIRED_COLUMNS, FeedLayout

MAX_FULL_READ_BYTES = 600_000_000   # whole-file reads (replay, outlook); bounded memory
CHECK_TAIL_BYTES = 16_000_000       # an instant's call reads at most this much of a big feed
MAX_OUT_OF_ORDER_FRACTION = 0.01

#: Physically plausible range of each canonical column [its SI unit] (DESIGN §4).



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
    values = table[column].astype("string").str.strip()
    present = (values.notna() & (values != "")).to_numpy()
    texts = values.fillna("").to_numpy(dtype=object)
    parsed = pd.to_datetime(values.where(present), utc=True, format="ISO8601", errors="coerce")
    bad = present & (parsed.isna().to_numpy() | ~_has_utc_offset(texts))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise FeedError(f"cannot read issue time {values.iloc[i]!r}", source=source, line=i + line_offset,
                        field=column, hint="write ISO 8601 with Z or an offset, e.g. 2026-12-01T03:00:00Z")
    return pd.Series(pd.DatetimeIndex(parsed).as_unit("ns"), index=table.index)


def check_whole_read(path: Path, size: int | None = None) -> None:
    """Refuse, before touching its content, a feed too big to read whole in bounded memory."""
    size = regular_file_size(Path(path), FeedError, "feed file") if size is None else size
    if size > MAX_FULL_READ_BYTES:
        raise FeedError(f"feed is {size / 1e6:.0f} MB; whole-file commands read at most "
                        f"{MAX_FULL_READ_BYTES / 1e6:.0f} MB", source=str(path),
                        hint="split the archive by month and process each part")


def _tail_text(path: Path, tail_bytes: int, is_jsonl: bool) -> tuple[str, int]:
    """Header (CSV) plus the last ``tail_bytes`` of the file, cut at a line start; and the 1-based
    line number of the first data line kept (counted in the skipped part, in bounded memory)."""
    size = path.stat().st_size
    start = size - tail_bytes
    with path.open("rb") as fh:
        header = b"" if is_jsonl else fh.readline()
        fh.seek(max(start, len(header)))
        fh.readline()  # drop the partial line
        cut = fh.tell()
        body = fh.read()
        fh.seek(0)
        newlines, done = 0, 0
        while done < cut:
            block = fh.read(min(1 << 24, cut - done))
            newlines += block.count(b"\n")
            done += len(block)
    text = (header + body).decode("utf-8", errors="strict")
    return text, newlines + 1


def _read_table(path: Path, tail_bytes: int | None = None) -> tuple[pd.DataFrame, int]:
    """The raw table and the file line of its first data row."""
    source = str(path)
    size = regular_file_size(path, FeedError, "feed file", empty_hint="expected a header line and data rows")
    tail = tail_bytes is not None and size > 2 * tail_bytes
    if not tail:
        check_whole_read(path, size)
    with path.open("rb") as fh:
        head = fh.read(4096)
    if b"\x00" in head:
        raise FeedError("binary content (NUL bytes)", source=source, hint="expected CSV or JSON Lines text")
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 4:
            raise FeedError("not UTF-8 text", source=source, hint="save the feed as UTF-8 CSV") from None
    is_jsonl = path.suffix.lower() in (".jsonl", ".ndjson") or head.lstrip().startswith(b"{")
    try:
        if tail:
            text, first_line = _tail_text(path, tail_bytes, is_jsonl)
            if is_jsonl:
                return _read_jsonl(path, text.splitlines(), first_line), first_line
            return _read_csv(io.StringIO(text)), first_line
        if is_jsonl:
            return _read_jsonl(path), 1
        return _read_csv(path), 2
    except FeedError:
        raise
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        m = re.search(r"line (\d+)", msg)
        raise FeedError(f"cannot parse CSV: {msg}", source=source, line=int(m.group(1)) if m else None,
                        hint="check delimiters and quoting") from None
    except pd.errors.EmptyDataError:
        raise FeedError("feed has no header or rows", source=source) from None


def _read_csv(source) -> pd.DataFrame:
    """pandas' C parser in its fast (chunked) mode; a column of mixed types is coerced later anyway."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pd.errors.DtypeWarning)
        return pd.read_csv(source)


def _nullcontext(value):
    return contextlib.nullcontext(value)


def _read_jsonl(path: Path, lines=None, first_line: int = 1) -> pd.DataFrame:
    rows = []
    with (path.open("r", encoding="utf-8") if lines is None else _nullcontext(lines)) as fh:
        for number, raw in enumerate(fh, start=first_line):
            if not raw.strip():
                continue
            try:
                obj = json.loads(raw)
            except json.JSONDecodeError as exc:
                raise FeedError(f"invalid JSON: {exc.msg}", source=str(path), line=number,
                                column=exc.colno, hint="one JSON object per line") from None
            if not isinstance(obj, dict):
                raise FeedError("expected a JSON object on each line", source=str(path), line=number)
            rows.append(obj)
    if not rows:
        raise FeedError("feed has no rows", source=str(path))
    return pd.DataFrame(rows).astype(object)


def _numeric(raw: pd.Series, column: str, source: str, line_offset: int) -> np.ndarray:
    """A feed column as floats; a non-empty value that is not a number is an error."""
    if pd.api.types.is_float_dtype(raw) or pd.api.types.is_integer_dtype(raw):
        return raw.to_numpy(dtype=float)
    if pd.api.types.is_bool_dtype(raw):
        raise FeedError("true/false where a number is expected", source=source, line=line_offset, field=column)
    values = pd.to_numeric(raw, errors="coerce")
    bad = values.isna() & raw.notna() & (raw.astype(str).str.strip() != "")
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise FeedError(f"{raw.iloc[i]!r} is not a number", source=source, line=i + line_offset, field=column,
                        hint="leave the cell empty for a missing value")
    return values.to_numpy(dtype=float)


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
    try:
        float(text)
    except (TypeError, ValueError):
        return False
    return True


def _has_utc_offset(texts: np.ndarray) -> np.ndarray:
    """Vectorised: does each ISO 8601 text end in ``Z``, ``±HH:MM`` or ``±HHMM`` after a time?"""
    texts = np.asarray(texts, dtype=object)
    try:  # ASCII bytes are five times cheaper to build than unicode arrays
        arr = texts.astype("S")
        codes = arr.view(np.uint8).reshape(len(arr), arr.dtype.itemsize)
    except (UnicodeEncodeError, ValueError, TypeError):
        arr = np.asarray(texts.astype(str))
        codes = arr.view(np.uint32).reshape(len(arr), arr.dtype.itemsize // 4)
    width = codes.shape[1]
    length = np.strings.str_len(arr)
    rows = np.arange(len(arr))

    def char_at(offset_from_end: int) -> np.ndarray:
        idx = length - offset_from_end
        ok = idx >= 0
        return np.where(ok, codes[rows, np.clip(idx, 0, width - 1)], 0)

    sign6, colon3, sign5 = char_at(6), char_at(3), char_at(5)
    plus_minus = (ord("+"), ord("-"))
    zulu = np.isin(char_at(1), (ord("Z"), ord("z")))
    hh_mm = np.isin(sign6, plus_minus) & (colon3 == ord(":"))
    hhmm = np.isin(sign5, plus_minus) & np.all([(char_at(k) >= ord("0")) & (char_at(k) <= ord("9")) for k in (1, 2, 3, 4)], axis=0)
    has_time = np.strings.find(arr, b":" if arr.dtype.kind == "S" else ":") >= 0
    return has_time & (zulu | hh_mm | hhmm)


def _parse_times(raw: pd.Series, layout: FeedLayout, source: str, line_offset: int) -> pd.Series:
    """Timestamps (ISO 8601 with offset, or naive in ``layout.time_zone``, or epoch s) → UTC."""
    values = raw if raw.dtype == object else raw.astype(object)
    empty = values.isna()
    if empty.any():
        i = int(np.flatnonzero(empty.to_numpy())[0])
        raise FeedError("empty timestamp", source=source, line=i + line_offset,
                        field=layout.time_column, hint="every row needs a time")
    if pd.api.types.is_numeric_dtype(raw) or _is_number(values.iloc[0]):
        numeric = pd.to_numeric(values, errors="coerce")
        if numeric.isna().any():
            i = int(np.flatnonzero(numeric.isna().to_numpy())[0])
            raise FeedError(f"cannot read timestamp {values.iloc[i]!r} as epoch seconds", source=source,
                            line=i + line_offset, field=layout.time_column,
                            hint="write every time the same way: epoch seconds or ISO 8601")
        return pd.to_datetime(numeric.astype(float), unit="s", utc=True)
    has_offset = pd.Series(_has_utc_offset(values.to_numpy(dtype=object)), index=values.index)
    if has_offset.all():
        try:
            return pd.to_datetime(values, utc=True, format="ISO8601")
        except (ValueError, TypeError):
            pass
    elif not has_offset.any():
        if layout.time_zone is None:
            raise FeedError("timestamps carry no UTC offset and no time zone is declared",
                            source=source, line=line_offset, field=layout.time_column,
                            hint="write times like 2026-01-15T09:00:00Z, or set feed.time_zone in the site file")
        try:
            naive = pd.to_datetime(values, format="ISO8601")
            local = naive.dt.tz_localize(layout.time_zone, ambiguous="NaT", nonexistent="NaT")
        except (ValueError, TypeError):
            local = None
        if local is not None:
            bad = local.isna()
            if bad.any():
                i = int(np.flatnonzero(bad.to_numpy())[0])
                raise FeedError(f"local time {values.iloc[i]!r} is ambiguous or does not exist in {layout.time_zone}",
                                source=source, line=i + line_offset, field=layout.time_column,
                                hint="log in UTC or with an offset to avoid daylight-saving changes")
            return local.dt.tz_convert("UTC")
    else:
        i = int(np.flatnonzero(~has_offset.to_numpy())[0])
        try:
            pd.Timestamp(values.iloc[i])
        except (ValueError, TypeError):
            raise FeedError(f"cannot read timestamp {values.iloc[i]!r}", source=source, line=i + line_offset,
                            field=layout.time_column, hint="use ISO 8601, e.g. 2026-01-15T09:00:00Z") from None
        raise FeedError(f"timestamp {values.iloc[i]!r} has no UTC offset while others do",
                        source=source, line=i + line_offset, field=layout.time_column,
                        hint="write every time with an offset or Z")
    # Find the first unparseable value for the message.
    for i, text in enumerate(values):
        try:
            pd.Timestamp(text)
        except (ValueError, TypeError):
            raise FeedError(f"cannot read timestamp {text!r}", source=source, line=i + line_offset,
                            field=layout.time_column, hint="use ISO 8601, e.g. 2026-01-15T09:00:00Z") from None
    raise FeedError("cannot read timestamps", source=source, field=layout.time_column,
                    hint="use ISO 8601, e.g. 2026-01-15T09:00:00Z")


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
    ``tail_bytes`` (plus the header): enough for an instant's call, in bounded memory.
    """
    path = Path(path)
    table, first_line = _read_table(path, tail_bytes)
    return canonical_frame(table, layout, source=str(path), line_offset=first_line,
                           issue_time_column=issue_time_column)
