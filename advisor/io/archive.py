"""An archive read in parts: the canonical rows of a long feed file in bounded memory.

    reader = ArchiveReader(path, layout)                # nothing is read yet
    for frame in reader.frames():                        # canonical rows, in time order, part by part
        ...
    reader.cadence_min, reader.measured_cadence_min()    # the cadence used, and the whole file's

Concatenated, the frames equal ``read_feed(path, layout).frame`` row for row and bit for bit
(``tests/test_archive.py``), provided the reader was given the whole file's cadence.  Each part
of the file goes through the same code as a whole read: the bounded file opening, complete lines
only (a half-written last line is ignored), pandas' C parser and
:func:`advisor.io.feed.canonical_frame`, with the file line of the part's first row, so an error
names the line a whole read would name.  What a row's flags need from the rows before it (the
step test, the gap before it, whether an optional sensor was just reporting) is carried over:
each part is made canonical together with the last :func:`_context_rows` of the part before,
which are then dropped again.

Two things a part cannot know, and how they are kept exact:

* the feed's cadence (the median interval between observed rows, which sets the gap and
  dropout limits).  Without ``cadence_min`` the first part's own median is used;
  :meth:`ArchiveReader.measured_cadence_min` then gives the whole file's median, counted exactly
  as the parts pass.  A caller whose first guess was wrong reads the file again with the
  measured one (an archive whose cadence changed over the years);
* the order of the rows.  A row out of time order, a repeated time or a part that overlaps the
  one before cannot be streamed exactly: :class:`NeedsWholeRead` is raised and the caller reads
  the file whole (:func:`advisor.io.feed.read_feed`), which sorts, counts and refuses as always.
  So is a part that is refused (a wrong value, rows going back in time): the whole read names
  the problem as it always has, counted over the whole file.  A file too big to be read whole
  gets the part's own message instead.

Files below ``stream_above_bytes`` are read whole (one frame); so is a JSON Lines file in which a
key first appears after the first part.  Known
difference: a relative-humidity column written as fractions in a few rows and percent in others
is refused when at least three such rows fall in one part (a whole read counts over the file).
"""

from __future__ import annotations

import io
import itertools
import warnings
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.errors import FeedError
from advisor.io.feed import Feed, FeedQuality, canonical_frame, read_feed
from advisor.io.feedfile import (
    ANY_SIZE,
    BLOCK_BYTES,
    EMPTY_FEED_HINT,
    MAX_FULL_READ_BYTES,
    ByteWindow,
    complete_end,
    first_bad_utf8,
    is_json_lines,
    jsonl_rows,
    parse_error,
    refuse_bad_head,
    refuse_repeated_column,
)
from advisor.io.feedlayout import FeedLayout
from advisor.io.feedvalues import REPORTING_RUN
from advisor.io.fileio import open_regular

__all__ = ["ARCHIVE_PART_ROWS", "STREAM_ABOVE_BYTES", "ArchiveReader", "NeedsWholeRead"]

#: File rows parsed at a time (about 60 bytes each in a logger's CSV, a few hundred once canonical).
ARCHIVE_PART_ROWS = 100_000
#: Smaller files are read whole, as one frame.
STREAM_ABOVE_BYTES = 0


class NeedsWholeRead(Exception):
    """The file cannot be read in parts exactly (rows out of order or repeated): read it whole."""


def count_values(counts: dict, values: np.ndarray) -> None:
    """Add to ``counts`` how often each value occurs (one value throughout without sorting)."""
    if len(values) == 0:
        return
    first = values[0].item()
    if (values == first).all():
        counts[first] = counts.get(first, 0) + len(values)
        return
    unique, repeats = np.unique(values, return_counts=True)
    for value, count in zip(unique.tolist(), repeats.tolist(), strict=True):
        counts[value] = counts.get(value, 0) + count


def median_of_counts(counts: dict) -> float | None:
    """The median of a multiset of numbers given as value → count, as ``np.median`` computes it
    (the mean of the two middle values for an even count); None for no values."""
    if not counts:
        return None
    values = np.array(sorted(counts))
    cum = np.cumsum([counts[v] for v in values.tolist()])
    total = int(cum[-1])

    def kth(k: int):
        return values[np.searchsorted(cum, k + 1)]

    if total % 2:
        return float(kth(total // 2))
    return float(np.mean(np.array([kth(total // 2 - 1), kth(total // 2)])))


def _context_rows(frame: pd.DataFrame, layout: FeedLayout, cadence_min: float | None) -> int:
    """How many of the last rows of a canonical part the next part's flags may depend on.

    The gap before a row and the step test look one sample back (of its kind); a dropout looks
    back to the last report within the dropout limit and the run of reports ending there.
    """
    t = frame["time"].to_numpy(dtype="datetime64[ns]").view(np.int64)
    if len(t) == 0:
        return 0
    reach_ns = int((float(layout.dropout_limit_min(cadence_min)) + 1.0) * 6e10)
    first = int(np.searchsorted(t, t[-1] - reach_ns, side="left"))
    return min(len(t), len(t) - first + REPORTING_RUN + 2 + _kinds_back(frame))


def _kinds_back(frame: pd.DataFrame) -> int:
    """Rows to go further back so each kind (observed, forecast) keeps its previous sample."""
    if "kind" not in frame or len(frame) == 0:
        return 0
    kind = frame["kind"].to_numpy(dtype=object)
    back = 0
    for value in pd.unique(kind):
        last = np.flatnonzero(kind == value)
        back = max(back, len(kind) - int(last[-1 - min(len(last) - 1, REPORTING_RUN + 2)]))
    return back


class ArchiveReader:
    """The canonical rows of a feed file, a part at a time (see the module's text).

    Parameters
    ----------
    path : path-like
        The feed file (CSV or JSON Lines).
    layout : FeedLayout
        How to read it (the site file's ``feed:``).
    cadence_min : float, optional
        The whole file's cadence [min] when known (a second reading); else the first part's.
    part_rows : int, optional
        File rows parsed at a time (default :data:`ARCHIVE_PART_ROWS`).
    stream_above_bytes : int, optional
        Files no larger than this are read whole (default :data:`STREAM_ABOVE_BYTES`).
    """

    def __init__(
        self,
        path: Path | str,
        layout: FeedLayout,
        cadence_min: float | None = None,
        part_rows: int | None = None,
        stream_above_bytes: int | None = None,
    ) -> None:
        self.path = Path(path)
        self.layout = layout
        self.cadence_min = cadence_min
        self.part_rows = int(ARCHIVE_PART_ROWS if part_rows is None else part_rows)
        self.stream_above_bytes = int(STREAM_ABOVE_BYTES if stream_above_bytes is None else stream_above_bytes)
        self.partial_last_line = False
        self.rows = 0
        self.first_time_utc: pd.Timestamp | None = None
        self.last_time_utc: pd.Timestamp | None = None
        self._steps: dict[int, int] = {}  # interval between observed rows [ns] → count
        self._whole_cadence: float | None = None
        self._size = 0
        self._window: ByteWindow | None = None  # the bytes being parsed, for progress

    @property
    def source(self) -> str:
        return str(self.path)

    def fraction_read(self) -> float:
        """How much of the file has been parsed so far (0..1; 1 for a file read whole)."""
        if self._window is None:
            return 1.0 if self.rows else 0.0
        return min(1.0, self._window.position / max(1, self._size))

    def measured_cadence_min(self) -> float | None:
        """The whole file's cadence [min], as a whole read measures it (after :meth:`frames`)."""
        if self._whole_cadence is not None:
            return self._whole_cadence
        median = median_of_counts(self._steps)
        return None if median is None else median / 6e10

    # ------------------------------------------------------------------ reading
    def check_head(self) -> None:
        """Refuse at once a file that is not a regular file of text (before anything reads it all)."""
        with open_regular(self.path, FeedError, ANY_SIZE, empty_hint=EMPTY_FEED_HINT) as (fh, _size):
            refuse_bad_head(fh.read(4096), self.source)

    def frames(self) -> Iterator[pd.DataFrame]:
        """The canonical rows of the file, in time order, one part at a time."""
        with open_regular(self.path, FeedError, ANY_SIZE, empty_hint=EMPTY_FEED_HINT) as (fh, size):
            self._size = size
            head = fh.read(4096)
            refuse_bad_head(head, self.source)
            skip = self.layout.skip_lines
            is_jsonl = is_json_lines(self.path, head, skip)
            whole = size <= self.stream_above_bytes
            end = 0 if whole else complete_end(fh, size, size)
            if whole or end == 0:
                yield from self._whole()
                return
            self.partial_last_line = end < size
            if is_jsonl:
                yield from self._parts(self._jsonl_tables(fh, end, skip), 1 + skip)
                return
            refuse_repeated_column(fh, skip, self.source)
            yield from self._parts(self._tables(fh, end, skip), 2 + skip)

    def _whole(self) -> Iterator[pd.DataFrame]:
        feed = read_feed(self.path, self.layout)
        self._note(feed.frame)
        self._whole_cadence = feed.quality.cadence_min
        self.cadence_min = feed.quality.cadence_min
        self.partial_last_line = feed.quality.partial_last_line
        yield feed.frame

    def _tables(self, fh, end: int, skip: int) -> Iterator[pd.DataFrame]:
        """The raw tables of the file's parts, as pandas parses them."""
        self._window = ByteWindow(fh, 0, end)
        stream = io.BufferedReader(self._window, buffer_size=BLOCK_BYTES)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", pd.errors.DtypeWarning)
                reader = pd.read_csv(stream, encoding="utf-8", skiprows=skip or None, chunksize=self.part_rows)
                with reader:
                    yield from reader
        except UnicodeDecodeError:
            raise (
                first_bad_utf8(fh, end, self.source)
                or FeedError("not UTF-8 text", source=self.source, hint="save the feed as UTF-8 CSV")
            ) from None
        except pd.errors.EmptyDataError:
            raise FeedError("feed has no header or rows", source=self.source, hint=EMPTY_FEED_HINT) from None
        except (pd.errors.ParserError, ValueError) as exc:
            raise parse_error(exc, self.source) from None

    def _jsonl_tables(self, fh, end: int, skip: int) -> Iterator[pd.DataFrame]:
        """The raw tables of a JSON Lines file's parts (one object per line, as a whole read parses them).

        A key that first appears after the first part cannot be placed as a whole read places
        it (its column position and its empty cells before): :class:`NeedsWholeRead`.
        """
        self._window = ByteWindow(fh, 0, end)
        stream = io.BufferedReader(self._window, buffer_size=BLOCK_BYTES)
        text = io.TextIOWrapper(stream, encoding="utf-8-sig", newline=None)
        line = 1
        for _ in range(skip):
            text.readline()
            line += 1
        columns: list | None = None
        try:
            while True:
                lines = list(itertools.islice(text, self.part_rows))
                if not lines:
                    return
                if not any(raw.strip() for raw in lines):
                    line += len(lines)
                    continue
                table = jsonl_rows(lines, self.source, line)
                line += len(lines)
                if columns is None:
                    columns = list(table.columns)
                elif not set(table.columns) <= set(columns):
                    raise NeedsWholeRead(f"{self.source}: a key first appears near line {line}")
                else:
                    table = table.reindex(columns=columns)
                yield table
        except UnicodeDecodeError:
            raise (
                first_bad_utf8(fh, end, self.source)
                or FeedError("not UTF-8 text", source=self.source, hint="save the feed as UTF-8 JSON Lines")
            ) from None

    def _parts(self, tables: Iterator[pd.DataFrame], first_line: int) -> Iterator[pd.DataFrame]:
        carry: pd.DataFrame | None = None  # raw rows of the part before that the next one needs
        line = first_line
        for table in tables:
            if len(table) == 0:
                continue
            n_carry = 0 if carry is None else len(carry)
            work = table if carry is None else pd.concat([carry, table], ignore_index=True)
            try:
                feed = canonical_frame(work, self.layout, self.source, line - n_carry, cadence_min=self.cadence_min)
            except FeedError:
                if self._size > MAX_FULL_READ_BYTES:
                    raise  # the part's own message: the file is too big to be read whole
                raise NeedsWholeRead(f"{self.source}: refused near line {line}; a whole read says why") from None
            frame, quality = feed.frame, feed.quality
            if quality.n_duplicates or quality.n_out_of_order or len(frame) != len(work):
                raise NeedsWholeRead(f"{self.source}: rows out of time order or repeated near line {line}")
            if self.cadence_min is None:
                self.cadence_min = quality.cadence_min
            self._count_steps(frame, max(0, n_carry - 1))
            part = frame.iloc[n_carry:].reset_index(drop=True) if n_carry else frame
            self._note(part)
            keep = _context_rows(frame, self.layout, self.cadence_min)
            carry = work.iloc[len(work) - keep :].reset_index(drop=True)
            line += len(table)
            yield part
        if carry is None:  # not one row: the whole read says why (no data rows, a line in progress)
            yield from self._whole()

    # ------------------------------------------------------------------ bookkeeping
    def _count_steps(self, frame: pd.DataFrame, start: int) -> None:
        """Count the intervals between observed rows that end at rows from ``start`` + 1 on."""
        observed = (frame["kind"].to_numpy(dtype=object) == "observed") if "kind" in frame else None
        t = frame["time"].to_numpy(dtype="datetime64[ns]").view(np.int64)
        positions = np.arange(len(t)) if observed is None else np.flatnonzero(observed)
        times = t[positions]
        count_values(self._steps, np.diff(times)[positions[1:] > start])

    def _note(self, part: pd.DataFrame) -> None:
        if len(part) == 0:
            return
        if self.first_time_utc is None:
            self.first_time_utc = part["time"].iloc[0]
        self.last_time_utc = part["time"].iloc[-1]
        self.rows += len(part)

    def feed_of(self, frame: pd.DataFrame) -> Feed:
        """A :class:`Feed` view of one part (for checks that take a feed, e.g. the time-zone check)."""
        quality = FeedQuality(
            n_rows=len(frame),
            n_duplicates=0,
            n_out_of_order=0,
            n_gaps=int(frame["q_gap_before"].sum()),
            n_implausible=int(frame["q_implausible"].sum()),
            n_missing=int(frame["q_missing"].sum()),
            first_time_utc=frame["time"].iloc[0] if len(frame) else None,
            last_time_utc=frame["time"].iloc[-1] if len(frame) else None,
            cadence_min=self.cadence_min,
        )
        return Feed(frame=frame, quality=quality, source=self.source)
