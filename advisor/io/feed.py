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

from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd

from advisor import units
from advisor.catalogue import PLAUSIBLE_RANGE
from advisor.errors import FeedError
from advisor.io.feedfile import MAX_FULL_READ_BYTES, check_whole_read, open_feed
from advisor.io.feedlayout import (
    CANONICAL_COLUMNS,
    CANONICAL_UNITS,
    OPTIONAL_COLUMNS,
    REQUIRED_COLUMNS,
    ColumnMap,
    FeedLayout,
)
from advisor.io.feedtimes import feed_times
from advisor.io.feedvalues import (
    MAX_FEED_NUMBER,
    column_bit,
    depth_rate,
    dropout_mask,
    kind_rows,
    numeric_column,
    refuse_mixed_humidity,
    step_basis,
    step_outliers,
)
from advisor.io.times import parse_time_column
from advisor.physics.moisture import dew_point_c

__all__ = [
    "CHECK_TAIL_BYTES",
    "MAX_FEED_NUMBER",
    "MAX_FULL_READ_BYTES",
    "Feed",
    "FeedQuality",
    "canonical_frame",
    "check_whole_read",
    "read_feed",
    "column_names",
]

CHECK_TAIL_BYTES = 16_000_000  # an instant's call reads at most this much of a big feed
MAX_OUT_OF_ORDER_FRACTION = 0.01


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
    partial_last_line: bool = False  # the file's last line had no newline: ignored as still being written
    cadence_min: float | None = None  # median interval between observed rows
    #: Logger column → cells holding one of the site's missing-value codes.
    coded_cells: dict = field(default_factory=dict)
    rows_with_codes: int = 0
    #: Canonical column → rows where its value was implausible (range or step test).
    implausible_by_column: dict = field(default_factory=dict)
    gust_estimated: bool = False  # gusts are gust_factor × mean wind (no gust sensor)
    columns_read: tuple[str, ...] = ()  # canonical columns the file carries (gusts and dew point may be made)
    #: Canonical column → the logger column it was read from.
    sources: dict = field(default_factory=dict)
    n_dropouts: int = 0  # rows where an optional sensor that was reporting fell silent

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
            "cadence_min": None if self.cadence_min is None else round(self.cadence_min, 3),
            "missing_codes": dict(self.coded_cells),
            "rows_with_missing_codes": self.rows_with_codes,
            "implausible_by_column": dict(self.implausible_by_column),
            "gust_estimated": self.gust_estimated,
            "optional_dropout_rows": self.n_dropouts,
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
    return parse_time_column(
        table[column],
        source=source,
        field=column,
        line_offset=line_offset,
        error_type=FeedError,
        require_offset=True,
        allow_empty=True,
    )


def _source_column(
    table: pd.DataFrame, name: str, spec: ColumnMap | None, layout: FeedLayout, source: str, line_offset: int
) -> tuple[str, ColumnMap] | None:
    """The logger column a canonical column is read from, and how; None when the feed has none."""
    if spec is not None and spec.source_column in table.columns:
        return spec.source_column, spec
    if name in table.columns:  # canonical names are always read as SI
        return name, ColumnMap(name, name, CANONICAL_UNITS[name])
    required = name in REQUIRED_COLUMNS and not (name == "wind_gust_ms" and layout.gust_factor is not None)
    if required:
        wanted = f"'{spec.source_column}' (mapped to {name})" if spec else name
        hint = (
            f"columns found: {', '.join(map(str, table.columns[:10]))}; map the logger's column in the site "
            "file under feed.columns"
        )
        if name == "wind_gust_ms":
            hint += ", or set feed.gust_factor if the station has no gust sensor"
        raise FeedError(f"missing required column {wanted}", source=source, line=max(1, line_offset - 1), hint=hint)
    return None  # an optional input the feed lacks: "not seen" in every call (feed inspect names the mapping)


def _read_values(table: pd.DataFrame, layout: FeedLayout, source: str, line_offset: int):
    """Every canonical column the feed has, in canonical units; and cells coded missing per logger column."""
    mapping = {c.canonical: c for c in layout.columns}
    out: dict[str, np.ndarray] = {}
    coded_cells: dict[str, int] = {}
    coded_rows = np.zeros(len(table), dtype=bool)
    coded_bits = np.zeros(len(table), dtype=np.int32)
    sources: dict[str, str] = {}
    for k, name in enumerate(CANONICAL_COLUMNS):
        found = _source_column(table, name, mapping.get(name), layout, source, line_offset)
        if found is None:
            continue
        column, spec = found
        sources[name] = column
        values, coded = numeric_column(table[column], column, (*layout.missing, *spec.missing), source, line_offset)
        unit = spec.unit
        if spec.is_depth:
            hours: np.ndarray | float | None = spec.over_hours
            if spec.over_hours_from is not None:
                if spec.over_hours_from not in table.columns:
                    raise FeedError(
                        f"no column '{spec.over_hours_from}' (the hours of {column})",
                        source=source,
                        line=max(1, line_offset - 1),
                        hint=f"fix feed.columns.{name}.over_hours_from in the site file",
                    )
                hours, hours_coded = numeric_column(
                    table[spec.over_hours_from],
                    spec.over_hours_from,
                    (*layout.missing, *spec.missing),
                    source,
                    line_offset,
                )
                if hours_coded.any():
                    coded_cells[spec.over_hours_from] = int(hours_coded.sum())
                coded = coded | hours_coded
            values = depth_rate(np.asarray(units.convert(values, unit, "mm"), dtype=float), hours)
            unit = "mm/h"
        if name == "rel_humidity_pct" and unit == "%":
            refuse_mixed_humidity(values, column, source, line_offset)
        if coded.any():
            coded_cells[column] = coded_cells.get(column, 0) + int(coded.sum())
            coded_rows |= coded
            coded_bits |= np.where(coded, column_bit(k), 0).astype(np.int32)
        out[name] = np.asarray(units.convert(values, unit, CANONICAL_UNITS[name]), dtype=float)
    if layout.gust_factor is not None:
        out["wind_gust_ms"] = layout.gust_factor * out["wind_mean_ms"]
    return out, coded_cells, coded_rows, coded_bits, sources


def _flag_implausible(
    frame: pd.DataFrame, layout: FeedLayout, t_ns: np.ndarray, groups: list[np.ndarray]
) -> tuple[np.ndarray, dict[str, int]]:
    """Set implausible values to NaN (kept as ``raw_<name>``); the per-row mask of columns affected.

    Implausible: outside the catalogue's plausible range, a gust below the mean wind, or a change
    from the previous sample larger than the step limit (:func:`advisor.io.feedvalues.step_outliers`).
    """
    n = len(frame)
    bits = np.zeros(n, dtype=np.int32)
    counts: dict[str, int] = {}
    limits = layout.step_limits()
    basis = step_basis(t_ns, groups) if limits else None
    for k, name in enumerate(CANONICAL_COLUMNS):
        if name not in frame:
            continue
        col = frame[name].to_numpy(dtype=float)
        lo, hi = PLAUSIBLE_RANGE.get(name, (-np.inf, np.inf))
        bad = (col < lo) | (col > hi)
        if name in limits and not (name == "wind_gust_ms" and layout.gust_factor is not None):
            bad |= step_outliers(np.where(bad, np.nan, col), t_ns, groups, limits[name], basis)
        if name == "wind_gust_ms":
            bad |= col < frame["wind_mean_ms"].to_numpy(dtype=float) - 0.5
        if bad.any():
            counts[name] = int(bad.sum())
            bits |= np.where(bad, column_bit(k), 0).astype(np.int32)
            frame[f"raw_{name}"] = np.where(bad, col, np.nan)
            col = np.where(bad, np.nan, col)
        if name == "rel_humidity_pct":
            col = np.minimum(col, 100.0)
        frame[name] = col
    return bits, counts


def _dropouts(
    frame: pd.DataFrame,
    layout: FeedLayout,
    cadence_min: float | None,
    t_ns: np.ndarray,
    groups: list[np.ndarray],
    observed: np.ndarray,
) -> np.ndarray:
    """Per-row mask of the optional columns whose sensor fell silent just now (see ``dropout_mask``)."""
    bits = np.zeros(len(frame), dtype=np.int32)
    hold = layout.dropout_limit_min(cadence_min)
    for name in OPTIONAL_COLUMNS:
        if name in frame:
            mask = dropout_mask(frame[name].to_numpy(dtype=float), t_ns, groups, hold) & observed
            bits |= np.where(mask, column_bit(CANONICAL_COLUMNS.index(name)), 0).astype(np.int32)
    return bits


def _cadence(t_ns: np.ndarray, observed: np.ndarray) -> float | None:
    t = t_ns[observed]
    return float(np.median(np.diff(t)) / 6e10) if len(t) >= 2 else None


def canonical_frame(
    table: pd.DataFrame,
    layout: FeedLayout,
    source: str = "<feed>",
    line_offset: int = 2,
    issue_time_column: str | None = None,
    cadence_min: float | None = None,
) -> Feed:
    """Map, convert, sort and flag a logger table into a canonical :class:`Feed`.

    The feed's cadence (gap and dropout limits follow it) is the median interval between the
    table's observed rows, or ``cadence_min`` [min] when given: a file read in parts
    (:mod:`advisor.io.archive`) passes the cadence of the whole file to each part.

    With ``issue_time_column``, the frame also carries ``issued_utc``: each forecast row's issue
    time (NaT where the column is absent or the cell empty).  Besides the canonical columns the
    frame has ``kind``, ``gust_estimated``, the flags ``q_implausible``, ``q_missing``,
    ``q_gap_before``, ``good``, and per-row masks of canonical columns (bit ``k`` for
    ``CANONICAL_COLUMNS[k]``): ``q_bits_implausible``, ``q_bits_coded`` (a missing-value code),
    ``q_bits_dropout`` (an optional sensor that was reporting fell silent).
    """
    table = table.rename(columns=lambda c: str(c).strip())
    if len(table) == 0:
        raise FeedError("feed has a header but no data rows", source=source)
    times, time_field = feed_times(table, layout, source, line_offset)
    out, coded_cells, coded_rows, coded_bits, sources = _read_values(table, layout, source, line_offset)
    read = set(out)

    frame = pd.DataFrame(out)
    frame.insert(0, "time", pd.DatetimeIndex(times).as_unit("ns"))
    if "kind" in table.columns:
        kind = table["kind"].astype("string").str.strip().str.lower().fillna("observed")
        bad = ~kind.isin(["observed", "forecast"])
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise FeedError(
                f"kind {table['kind'].iloc[i]!r} is neither 'observed' nor 'forecast'",
                source=source,
                line=i + line_offset,
                field="kind",
            )
        frame["kind"] = kind.to_numpy(dtype=object)
    else:
        frame["kind"] = "observed"
    if issue_time_column is not None:
        frame["issued_utc"] = _issue_times(table, issue_time_column, source, line_offset)
    frame["gust_estimated"] = layout.gust_factor is not None
    frame["q_bits_coded"] = coded_bits

    # Order and duplicates: a few late rows are sorted in, exact repeats dropped (both counted);
    # a feed running backwards or repeating a time with other values is refused.
    t = pd.DatetimeIndex(frame["time"]).asi8
    backwards = np.flatnonzero(t[1:] < t[:-1]) + 1 if len(t) > 1 else np.array([], dtype=int)
    n_out_of_order = int(len(backwards))
    if n_out_of_order > max(1, MAX_OUT_OF_ORDER_FRACTION * len(t)):
        raise FeedError(
            f"{n_out_of_order} rows go back in time, first at this line",
            source=source,
            line=int(backwards[0]) + line_offset,
            hint="the logger clock or the file order is wrong; sort the feed by time",
        )
    if n_out_of_order:
        frame = frame.sort_values("time", kind="stable")
        dup = frame["time"].duplicated(keep="first").to_numpy()
    else:  # in order already (the stable sort would keep every row where it is): repeats are neighbours
        dup = np.concatenate([[False], t[1:] == t[:-1]]) if len(t) else np.zeros(0, dtype=bool)
    if dup.any():
        value_cols = [c for c in CANONICAL_COLUMNS if c in frame]
        repeated = frame[frame["time"].duplicated(keep=False).to_numpy()]
        conflicting = repeated.groupby("time")[value_cols].nunique(dropna=False).gt(1).any(axis=1)
        if conflicting.any():
            when = conflicting[conflicting].index[0]
            i = int(np.flatnonzero(t == when.value)[1])
            raise FeedError(
                f"time {_iso(when)} appears twice with different values",
                source=source,
                line=i + line_offset,
                field=time_field,
                hint="remove the duplicate rows; the advisor will not guess which is right",
            )
    n_duplicates = int(dup.sum())
    if n_duplicates or n_out_of_order:  # else the frame keeps every row, in order, indexed 0..n-1
        frame = frame[~dup].reset_index(drop=True)
    t_ns = pd.DatetimeIndex(frame["time"]).asi8
    if "kind" in table.columns:
        row_kinds: np.ndarray = frame["kind"].to_numpy(dtype=object)
        groups, observed_rows = kind_rows(row_kinds), np.asarray(row_kinds == "observed", dtype=bool)
    else:  # every row observed
        groups, observed_rows = [np.arange(len(frame))], np.ones(len(frame), dtype=bool)

    # Implausible values → NaN (range and step tests, after sorting), row flagged; required
    # inputs missing; dew point derived where the feed has none.
    implausible_bits, implausible_counts = _flag_implausible(frame, layout, t_ns, groups)
    implausible = implausible_bits != 0
    frame["q_bits_implausible"] = implausible_bits
    frame["q_implausible"] = implausible
    frame["q_missing"] = frame[list(REQUIRED_COLUMNS)].isna().any(axis=1).to_numpy() & ~implausible
    derived = dew_point_c(frame["air_temp_c"].to_numpy(), frame["rel_humidity_pct"].to_numpy())
    if "dew_point_c" in frame:
        frame["dew_point_c"] = frame["dew_point_c"].fillna(pd.Series(derived))
    else:
        frame["dew_point_c"] = derived

    cadence = _cadence(t_ns, observed_rows) if cadence_min is None else float(cadence_min)
    dt_min = frame["time"].diff().dt.total_seconds().to_numpy() / 60.0
    frame["q_gap_before"] = np.nan_to_num(dt_min, nan=0.0) > layout.gap_limit_min(cadence)
    frame["good"] = ~(frame["q_implausible"] | frame["q_missing"]).to_numpy()
    frame["q_bits_dropout"] = _dropouts(frame, layout, cadence, t_ns, groups, observed_rows)

    quality = FeedQuality(
        n_rows=len(frame),
        n_duplicates=n_duplicates,
        n_out_of_order=n_out_of_order,
        n_gaps=int(frame["q_gap_before"].sum()),
        n_implausible=int(frame["q_implausible"].sum()),
        n_missing=int(frame["q_missing"].sum()),
        first_time_utc=frame["time"].iloc[0] if len(frame) else None,
        last_time_utc=frame["time"].iloc[-1] if len(frame) else None,
        cadence_min=cadence,
        coded_cells=coded_cells,
        rows_with_codes=int(coded_rows.sum()),
        implausible_by_column=implausible_counts,
        gust_estimated=layout.gust_factor is not None,
        columns_read=tuple(
            n for n in CANONICAL_COLUMNS if n in read and not (n == "wind_gust_ms" and layout.gust_factor)
        ),
        sources=sources,
        n_dropouts=int((frame["q_bits_dropout"] != 0).sum()),
    )
    return Feed(frame=frame, quality=quality, source=source)


def read_feed(
    path: Path | str, layout: FeedLayout, tail_bytes: int | None = None, issue_time_column: str | None = None
) -> Feed:
    """Read a CSV or JSON Lines feed file and return its canonical :class:`Feed`.

    With ``tail_bytes``, a file larger than twice that is read only from its last
    ``tail_bytes`` (plus the header): enough for an instant's call, in bounded memory.  A last
    line without its newline is ignored (a logger is still writing it) and noted in the quality.
    """
    path = Path(path)
    with open_feed(path, tail_bytes, skip_lines=layout.skip_lines) as raw:
        try:
            feed = canonical_frame(
                raw.table, layout, source=str(path), line_offset=raw.first_line, issue_time_column=issue_time_column
            )
        except FeedError as exc:
            raise raw.relocate(exc) from None
    if raw.partial:
        feed = replace(feed, quality=replace(feed.quality, partial_last_line=True))
    return feed


def column_names(bits: int) -> list[str]:
    """The canonical columns of a per-row column mask (``q_bits_*``), in catalogue order."""
    return [name for k, name in enumerate(CANONICAL_COLUMNS) if int(bits) & column_bit(k)]
