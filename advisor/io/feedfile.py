"""Reading a feed file's bytes into a raw table: bounded, never blocking, complete lines only.

    with open_feed(path, tail_bytes) as raw:       # a regular file; size checked first
        raw.table, raw.first_line, raw.partial     # the logger's columns as read
        raw.relocate(error)                        # its line (in what was read) → file line

A logger appends to its file while the advisor reads it, so the last line may be half-written:
a line without its newline is ignored as still in progress ("99.5" cut to "9" is never read).
A whole-file read (replay, outlook) is capped at :data:`MAX_FULL_READ_BYTES`; an instant's call
reads only the header and the last ``tail_bytes`` of a larger file, and counts the lines before
that part only when an error message needs a line number.  CSV goes to pandas' C parser through
a stream that ends at the last complete line; JSON Lines are parsed one object per line with
duplicate keys refused, integers bounded and ``true``/``false`` kept as words (never numbers).
"""

from __future__ import annotations

import codecs
import io
import json
import re
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

import pandas as pd

from advisor.errors import FeedError
from advisor.io.fileio import KINDS, FileKind, encoding_error, open_regular, repeated_csv_column, sniff_encoding_problem

MAX_FULL_READ_BYTES = KINDS["feed"].max_bytes  # whole-file reads (replay, outlook); bounded memory
MAX_HEADER_BYTES = 65_536  # the CSV header line
MAX_LINE_COUNT_BYTES = 512_000_000  # lines before a tail are counted up to this far
ANY_SIZE = FileKind("feed file", 1 << 62, "")  # tail reads: the size does not matter, the read is bounded
BLOCK_BYTES = 1 << 20
EMPTY_FEED_HINT = "expected a header line and data rows"


@dataclass
class RawFeed:
    """What was read from a feed file, before mapping: ``table`` and where its rows are."""

    table: pd.DataFrame
    first_line: int  # line (in what was read) of the table's first row
    partial: bool  # the file's last line had no newline and was ignored
    fh: BinaryIO
    cut: int = 0  # byte offset where the read part starts (0: whole file)
    is_jsonl: bool = False
    skip: int = 0  # lines above the header (feed.skip_lines)

    def relocate(self, error: FeedError) -> FeedError:
        """``error`` with its line turned into a file line (see :func:`_relocate`)."""
        return _relocate(error, self.fh, self.cut, self.is_jsonl, self.skip)


def _relocate(error: FeedError, fh: BinaryIO, cut: int, is_jsonl: bool, skip: int = 0) -> FeedError:
    """Turn the line of ``error`` (counted in the part read from byte ``cut``) into a file line.

    Lines before the cut are counted only now that a message needs them, and only up to
    :data:`MAX_LINE_COUNT_BYTES`; beyond that the message says where the line is instead.
    In a tail, line 1 is the header, which lies below ``skip`` lines of the file.
    """
    line = error.line
    if line is None or cut == 0:
        return error
    if line == 1 and not is_jsonl:
        error.line = 1 + skip
        return error
    before = _count_newlines(fh, cut)
    if before is None:
        error.line = None
        error.message = f"{error.message} (line {line - (0 if is_jsonl else 1)} after byte {cut:,})"
    else:
        error.line = line + before - (0 if is_jsonl else 1)
    return error


def _count_newlines(fh: BinaryIO, end: int) -> int | None:
    """Newlines in the first ``end`` bytes, or ``None`` if that is more than worth counting."""
    if end > MAX_LINE_COUNT_BYTES:
        return None
    fh.seek(0)
    count, done = 0, 0
    while done < end:
        block = fh.read(min(BLOCK_BYTES * 16, end - done))
        if not block:
            break
        count += block.count(b"\n")
        done += len(block)
    return count


def complete_end(fh: BinaryIO, size: int, limit: int) -> int:
    """Byte offset just after the file's last newline, searching back at most ``limit`` bytes
    (0 if there is none there)."""
    pos, stop = size, max(0, size - limit)
    while pos > stop:
        start = max(stop, pos - 65_536)
        fh.seek(start)
        block = fh.read(pos - start)
        found = block.rfind(b"\n")
        if found >= 0:
            return start + found + 1
        pos = start
    return 0


class ByteWindow(io.RawIOBase):
    """Bytes ``[start, end)`` of a binary file, as a readable raw stream."""

    def __init__(self, fh: BinaryIO, start: int, end: int) -> None:
        super().__init__()
        self._fh, self._pos, self._end = fh, start, end
        fh.seek(start)

    def readable(self) -> bool:
        return True

    @property
    def position(self) -> int:
        """The byte offset in the file of the next byte to be read."""
        return self._pos

    def readinto(self, buffer) -> int:
        n = min(len(buffer), self._end - self._pos)
        if n <= 0:
            return 0
        data = self._fh.read(n)
        buffer[: len(data)] = data
        self._pos += len(data)
        return len(data)


def refuse_bad_head(head: bytes, source: str) -> None:
    problem = sniff_encoding_problem(head)
    if problem is not None:
        raise encoding_error(problem, FeedError, "feed", source, expected="CSV or JSON Lines text")
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 4:  # not merely a character cut by the 4 kB boundary
            raise _not_utf8(head, exc.start, source, 0) from None


def _not_utf8(data: bytes, pos: int, source: str, lines_before: int) -> FeedError:
    line = lines_before + data.count(b"\n", 0, pos) + 1
    return FeedError(
        f"not UTF-8 text (byte 0x{data[pos]:02x})", source=source, line=line, hint="save the feed as UTF-8 CSV"
    )


def first_bad_utf8(fh: BinaryIO, end: int, source: str) -> FeedError | None:
    """The error naming the line of the first invalid UTF-8 byte before ``end``, if any."""
    decoder = codecs.getincrementaldecoder("utf-8")()
    fh.seek(0)
    lines, done = 0, 0
    while done < end:
        block = fh.read(min(BLOCK_BYTES, end - done))
        if not block:
            break
        try:
            decoder.decode(block, final=done + len(block) >= end)
        except UnicodeDecodeError as exc:
            return _not_utf8(block, max(0, min(exc.start, len(block) - 1)), source, lines)
        lines += block.count(b"\n")
        done += len(block)
    return None


def _read_csv(stream, skip: int = 0) -> pd.DataFrame:
    """pandas' C parser in its fast (chunked) mode; a column of mixed types is coerced later anyway.

    ``skip`` lines above the header are passed over (a logger's metadata line)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pd.errors.DtypeWarning)
        return pd.read_csv(stream, encoding="utf-8", skiprows=skip or None)


def _unique_keys(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"key {key!r} given twice")
        out[key] = value
    return out


def _bounded_int(text: str):
    """A JSON integer: exact up to 16 digits, else kept as its text, which the column check then
    refuses with the number as written (never an OverflowError or Python's 4300-digit limit)."""
    return int(text) if len(text) <= 16 else text


def _constant(name: str) -> float:
    if name == "NaN":
        return float("nan")  # read as a missing value
    raise ValueError(f"{name} is not a finite number")


def jsonl_rows(lines, source: str, first_line: int) -> pd.DataFrame:
    rows = []
    for number, raw in enumerate(lines, start=first_line):
        if not raw.strip():
            continue
        try:
            obj = json.loads(raw, object_pairs_hook=_unique_keys, parse_int=_bounded_int, parse_constant=_constant)
        except json.JSONDecodeError as exc:
            raise FeedError(
                f"invalid JSON: {exc.msg}",
                source=source,
                line=number,
                column=exc.colno,
                hint="one JSON object per line",
            ) from None
        except ValueError as exc:
            raise FeedError(
                f"invalid JSON: {exc}", source=source, line=number, hint="one JSON object per line"
            ) from None
        except RecursionError:
            raise FeedError(
                "JSON nested too deeply", source=source, line=number, hint="one flat JSON object per line"
            ) from None
        if not isinstance(obj, dict):
            raise FeedError("expected a JSON object on each line", source=source, line=number)
        for key, value in obj.items():
            if value is True or value is False:  # a JSON boolean is a word, never 1 or 0
                obj[key] = "true" if value else "false"
        rows.append(obj)
    if not rows:
        raise FeedError("feed has no rows", source=source, hint=EMPTY_FEED_HINT)
    return pd.DataFrame(rows).astype(object)


def parse_error(exc: Exception, source: str) -> FeedError:
    msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    m = re.search(r"line (\d+)", msg)
    return FeedError(
        f"cannot parse CSV: {msg}",
        source=source,
        line=int(m.group(1)) if m else None,
        hint="check delimiters and quoting",
    )


def check_whole_read(path: Path, size: int | None = None) -> None:
    """Refuse, before touching its content, a feed too big to read whole in bounded memory."""
    if size is None:
        with open_regular(Path(path), FeedError, ANY_SIZE, empty_hint=EMPTY_FEED_HINT) as (_fh, size):
            pass
    if size > MAX_FULL_READ_BYTES:
        raise FeedError(
            f"feed is {size / 1e6:.0f} MB; whole-file commands read at most {MAX_FULL_READ_BYTES / 1e6:.0f} MB",
            source=str(path),
            hint="split the archive by month and process each part",
        )


def is_json_lines(path: Path, head: bytes, skip_lines: int = 0) -> bool:
    """Whether a feed file is JSON Lines: by its suffix, or by its first bytes (an object)."""
    body = head[3:] if head.startswith(codecs.BOM_UTF8) else head
    return path.suffix.lower() in (".jsonl", ".ndjson") or (skip_lines == 0 and body.lstrip().startswith(b"{"))


def refuse_repeated_column(fh: BinaryIO, skip_lines: int, source: str) -> None:
    """Refuse a CSV header (below ``skip_lines`` lines) that names a column twice."""
    fh.seek(0)
    for _ in range(skip_lines):
        fh.readline(MAX_HEADER_BYTES)
    repeated = repeated_csv_column(fh.readline(MAX_HEADER_BYTES))
    if repeated:
        raise FeedError(
            f"column {repeated!r} appears twice in the header",
            source=source,
            line=1 + skip_lines,
            hint="keep one; the advisor will not guess which is meant",
        )


@contextmanager
def open_feed(path: Path | str, tail_bytes: int | None = None, skip_lines: int = 0) -> Iterator[RawFeed]:
    """Read a CSV or JSON Lines feed into a :class:`RawFeed` (the file stays open for line counts).

    ``skip_lines`` lines above the header (or above the first JSON line) are passed over."""
    path = Path(path)
    source = str(path)
    with open_regular(path, FeedError, ANY_SIZE, empty_hint=EMPTY_FEED_HINT) as (fh, size):
        head = fh.read(4096)
        refuse_bad_head(head, source)
        is_jsonl = is_json_lines(path, head, skip_lines)
        tail_part = tail_bytes if tail_bytes is not None and size > 2 * tail_bytes else None
        if tail_part is None:
            check_whole_read(path, size)
        end = complete_end(fh, size, size if tail_part is None else tail_part)
        if end == 0:
            where = "in the feed"
            if tail_part is not None:
                amount = f"{tail_part / 1e6:.0f} MB" if tail_part >= 10_000_000 else f"{tail_part:,} bytes"
                where = f"in the last {amount} of the feed"
            raise FeedError(
                f"no complete line {where}: no line ends with a newline",
                source=source,
                hint="a logger's line in progress is ignored until its newline is written; "
                "is this a CSV or JSON Lines feed?",
            )
        try:
            raw = (
                _whole(fh, end, is_jsonl, source, skip_lines)
                if tail_part is None
                else _tail(fh, end, tail_part, is_jsonl, source, skip_lines)
            )
        except UnicodeDecodeError:
            raise (
                first_bad_utf8(fh, end, source)
                or FeedError("not UTF-8 text", source=source, hint="save the feed as UTF-8 CSV")
            ) from None
        except pd.errors.EmptyDataError:
            raise FeedError("feed has no header or rows", source=source, hint=EMPTY_FEED_HINT) from None
        except (pd.errors.ParserError, ValueError) as exc:
            raise parse_error(exc, source) from None
        if not is_jsonl:
            refuse_repeated_column(fh, skip_lines, source)
        raw.partial = end < size
        if len(raw.table) == 0 and raw.partial:
            raise FeedError(
                "feed has no complete data row: its last line has no newline at the end",
                source=source,
                hint="a logger's line in progress is ignored until its newline is written; "
                "end every line with a newline",
            )
        yield raw


def _whole(fh: BinaryIO, end: int, is_jsonl: bool, source: str, skip: int = 0) -> RawFeed:
    stream = io.BufferedReader(ByteWindow(fh, 0, end), buffer_size=BLOCK_BYTES)
    if is_jsonl:
        text = io.TextIOWrapper(stream, encoding="utf-8-sig", newline=None)
        for _ in range(skip):
            text.readline()
        return RawFeed(jsonl_rows(text, source, 1 + skip), 1 + skip, False, fh, 0, True, skip)
    return RawFeed(_read_csv(stream, skip), 2 + skip, False, fh, 0, False, skip)


def _tail(fh: BinaryIO, end: int, tail_bytes: int, is_jsonl: bool, source: str, skip: int = 0) -> RawFeed:
    """Header (CSV) plus the complete lines of the last ``tail_bytes`` before ``end``."""
    fh.seek(0)
    header = b""
    for _ in range(skip):
        fh.readline(MAX_HEADER_BYTES)
    if not is_jsonl:
        header = fh.readline(MAX_HEADER_BYTES + 1)
        if len(header) > MAX_HEADER_BYTES or not header.endswith(b"\n"):
            raise FeedError(
                f"the header line is longer than {MAX_HEADER_BYTES:,} bytes",
                source=source,
                line=1 + skip,
                hint="is this a CSV feed? expected a header line of column names",
            )
    body_start = fh.tell()  # after the skipped lines and the header
    start = max(end - tail_bytes, body_start)
    fh.seek(start)
    if start > body_start:
        fh.readline(tail_bytes)  # the line the cut fell into; `end` ends a line, so this stops there
    cut = fh.tell()
    body = fh.read(max(0, end - cut))
    if header.startswith(codecs.BOM_UTF8):
        header = header[3:]
    data = header + body
    try:
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise _not_utf8(data, exc.start, source, 0) from None
        if is_jsonl:
            return RawFeed(jsonl_rows(text.splitlines(), source, 1), 1, False, fh, cut, True, skip)
        try:
            return RawFeed(_read_csv(io.StringIO(text)), 2, False, fh, cut, False, skip)
        except pd.errors.EmptyDataError:
            raise FeedError("feed has no header or rows", source=source, hint=EMPTY_FEED_HINT) from None
        except (pd.errors.ParserError, ValueError) as exc:
            raise parse_error(exc, source) from None
    except FeedError as exc:
        raise _relocate(exc, fh, cut, is_jsonl, skip) from None
