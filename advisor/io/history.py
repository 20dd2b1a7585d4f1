"""Past measurement attempts: reading and validating a site's history file (pandas only).

A history row is one past attempt: ``time`` (ISO 8601 with offset or ``Z``), ``method``
(``scan`` or ``astronomical``) and its outcome: ``usable`` (yes/no) and/or the measured residual
``residual_rms_um``, judged against the row's ``usable_max_rms_um`` or the ``usable_below_um``
argument when ``usable`` is blank; optionally the weather at the attempt in canonical names
(:data:`WEATHER_COLUMNS`) and a free-text ``note``.  Training (:mod:`advisor.model.training`) and
replay scoring (:mod:`advisor.evaluation.replay`) both read it here; ``advisor attempt add`` writes
it with :func:`append_attempt` (under a lock, by atomic replacement, refusing duplicates).
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.errors import AdvisorError
from advisor.io.fileio import (
    KINDS,
    atomic_write_text,
    encoding_error,
    locked,
    open_regular,
    read_text_bounded,
    repeated_csv_column,
    sniff_encoding_problem,
)
from advisor.io.site import CANONICAL_COLUMNS, REQUIRED_COLUMNS
from advisor.io.times import parse_time_column
from advisor.vocabulary import METHOD_LABEL, METHODS

MAX_HISTORY_BYTES = KINDS["history"].max_bytes
USABLE_WORDS = {
    **dict.fromkeys(("yes", "y", "true", "1", "usable", "ok", "success"), 1.0),
    **dict.fromkeys(("no", "n", "false", "0", "unusable", "failed", "fail"), 0.0),
    "": np.nan,
}

#: The weather an attempt row carries, in canonical names and SI units: what ``attempt add``
#: records from the feed at the attempt's time, what a ``tick`` history line keeps, and what
#: ``train`` computes the features from.  The wind columns are the 10-minute mean and maximum
#: and the rate is the air-temperature change over the last hour, as ``check`` computes them.
WEATHER_COLUMNS = (
    "wind_mean_ms",
    "wind_gust_ms",
    "air_temp_c",
    "rel_humidity_pct",
    "dew_point_c",
    "pressure_hpa",
    "precip_mm_h",
    "visibility_m",
    "solar_wm2",
    "air_temp_rate_c_per_h",
)
#: A row carries its own weather when every one of these is a number.
REQUIRED_WEATHER = (*REQUIRED_COLUMNS, "air_temp_rate_c_per_h")
#: The columns of a history file ``attempt add`` creates, in order.
COLUMNS = ("time", "method", "usable", "residual_rms_um", *WEATHER_COLUMNS, "note")
#: Two attempts of one method closer than this are the same attempt recorded twice.
DUPLICATE_WITHIN = pd.Timedelta(minutes=1)


class HistoryError(AdvisorError):
    """A history file is malformed, or too small to train on honestly."""


@dataclass(frozen=True)
class History:
    """Validated attempts: ``frame`` has ``time`` (UTC), ``method``, ``usable`` (bool), ``residual_rms_um``
    and any weather columns; ``sha256`` is the hash of the file's bytes."""

    frame: pd.DataFrame
    source: str
    sha256: str


def sha256_of(path: Path) -> str:
    digest = hashlib.sha256()
    with Path(path).open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def read_history(path: Path | str, usable_below_um: float | None = None) -> History:
    """Read and validate a history CSV (see the module docstring for its columns)."""
    path = Path(path)
    source = str(path)
    with open_regular(
        path, HistoryError, KINDS["history"], empty_hint="expected a header line and one row per attempt"
    ) as (fh, _size):
        head = fh.read(4096)
        problem = sniff_encoding_problem(head)
        if problem is not None:
            raise encoding_error(problem, HistoryError, "history file", source, expected="CSV text")
        fh.seek(0)
        header = fh.readline(65_536)
        fh.seek(0)
        try:
            table = pd.read_csv(fh, dtype=str, keep_default_na=False, skipinitialspace=True, encoding="utf-8")
        except pd.errors.EmptyDataError:
            raise HistoryError("history file has no header", source=source) from None
        except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
            msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            m = re.search(r"line (\d+)", msg)
            raise HistoryError(
                f"cannot parse CSV: {msg}",
                source=source,
                line=int(m.group(1)) if m else None,
                hint="save the history as comma-separated UTF-8 text",
            ) from None
    repeated = repeated_csv_column(header)
    if repeated:
        raise HistoryError(
            f"column {repeated!r} appears twice in the header",
            source=source,
            line=1,
            hint="keep one; the advisor will not guess which is meant",
        )
    table = table.rename(columns=lambda c: str(c).strip())
    if len(table) == 0:
        raise HistoryError("history has a header but no attempts", source=source)
    for required in ("time", "method"):
        if required not in table.columns:
            raise HistoryError(
                f"missing column {required!r}",
                source=source,
                line=1,
                hint="columns: time, method, usable and/or residual_rms_um, then weather columns",
            )
    if "usable" not in table.columns and "residual_rms_um" not in table.columns:
        raise HistoryError("no outcome column: need 'usable' (yes/no) and/or 'residual_rms_um'", source=source, line=1)

    def line_of(mask) -> int:
        return int(np.flatnonzero(np.asarray(mask))[0]) + 2

    times = parse_time_column(
        table["time"], source=source, field="time", line_offset=2, error_type=HistoryError, require_offset=True
    )
    method = table["method"].str.strip().str.lower()
    bad = ~method.isin(list(METHODS))
    if bad.any():
        i = line_of(bad)
        raise HistoryError(
            f"method {table['method'].iloc[i - 2]!r} is neither 'scan' nor 'astronomical'",
            source=source,
            line=i,
            field="method",
        )
    out = pd.DataFrame({"time": times, "method": method.to_numpy(dtype=object)})

    usable = np.full(len(table), np.nan)
    if "usable" in table.columns:
        words = table["usable"].str.strip().str.lower()
        bad = ~words.isin(list(USABLE_WORDS))
        if bad.any():
            i = line_of(bad)
            raise HistoryError(
                f"usable {table['usable'].iloc[i - 2]!r} is not yes/no",
                source=source,
                line=i,
                field="usable",
                hint="write yes or no (or leave it blank and give residual_rms_um)",
            )
        usable = words.map(USABLE_WORDS).to_numpy(dtype=float)
    rms = (
        _numeric(table, "residual_rms_um", source)
        if "residual_rms_um" in table.columns
        else np.full(len(table), np.nan)
    )
    if (rms < 0).any():
        raise HistoryError("residual_rms_um is negative", source=source, line=line_of(rms < 0), field="residual_rms_um")
    limit = np.full(len(table), np.nan if usable_below_um is None else float(usable_below_um))
    if "usable_max_rms_um" in table.columns:
        row_limit = _numeric(table, "usable_max_rms_um", source)
        limit = np.where(np.isfinite(row_limit), row_limit, limit)
    judged = np.isnan(usable) & np.isfinite(rms)
    if (judged & np.isnan(limit)).any():
        raise HistoryError(
            "no 'usable' value and no limit to judge residual_rms_um by",
            source=source,
            line=line_of(judged & np.isnan(limit)),
            field="usable",
            hint="fill in usable, add usable_max_rms_um, or pass --usable-below-um UM",
        )
    usable = np.where(judged, (rms <= limit).astype(float), usable)
    if np.isnan(usable).any():
        raise HistoryError(
            "attempt has no outcome (neither usable nor residual_rms_um)",
            source=source,
            line=line_of(np.isnan(usable)),
            field="usable",
        )
    out["usable"] = usable.astype(bool)
    out["residual_rms_um"] = rms
    for name in (*CANONICAL_COLUMNS, "air_temp_rate_c_per_h"):
        if name in table.columns:
            out[name] = _numeric(table, name, source)
    return History(out, source, sha256_of(path))


def own_weather(frame: pd.DataFrame) -> np.ndarray:
    """Rows of a history frame that carry their own weather (every :data:`REQUIRED_WEATHER` column a number)."""
    ok = np.ones(len(frame), dtype=bool)
    for name in REQUIRED_WEATHER:
        if name not in frame.columns:
            return np.zeros(len(frame), dtype=bool)
        ok &= np.isfinite(frame[name].to_numpy(dtype=float))
    return ok


def format_value(value) -> str:
    """A number as a history cell: 6 significant digits, blank when missing."""
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    value = float(value)
    return "" if not math.isfinite(value) else f"{value:.6g}"


def _records(text: str, source: str) -> tuple[list[str], list[str], list[list[str]]]:
    """``(header cells, original text of each record, cells of each record)`` of a CSV text.

    Each record's text is kept exactly as written (a quoted note may span lines), so rows that
    are not touched are written back byte for byte.  Blank lines are dropped.
    """
    lines = text.splitlines(keepends=True)
    reader = csv.reader(iter(lines))
    try:
        header = [h.strip() for h in next(reader)]
        texts, cells = [], []
        start = reader.line_num
        for row in reader:
            chunk = "".join(lines[start : reader.line_num])
            start = reader.line_num
            if any(c.strip() for c in row):
                texts.append(chunk if chunk.endswith("\n") else chunk + "\n")
                cells.append(row)
    except (csv.Error, StopIteration) as exc:
        raise HistoryError(f"cannot read the history: {exc}", source=source) from None
    return header, texts, cells


def _line(cells: list[str]) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(cells)
    return buf.getvalue()


def append_attempt(
    path: Path | str,
    time_utc: pd.Timestamp,
    method: str,
    cells: dict[str, str],
    duplicate_within: pd.Timedelta = DUPLICATE_WITHIN,
) -> int:
    """Add one attempt to the history at ``path`` (created if absent); return its line number.

    Under the history's lock (:func:`advisor.io.fileio.locked`) the existing file is validated
    with :func:`read_history`, an attempt of the same ``method`` within ``duplicate_within`` of
    ``time_utc`` is refused (:class:`HistoryError`, nothing written), and the file is replaced
    atomically with the new row in time order.  Existing rows keep their text; columns the file
    lacks are added at the end of its header, and older rows get blank cells for them.
    ``cells`` maps column names to text (``time`` and ``method`` are filled in here).
    """
    path = Path(path)
    source = str(path)
    if not path.parent.exists():
        raise HistoryError("folder does not exist", source=str(path.parent), hint="create it first")
    time_utc = pd.Timestamp(time_utc).tz_convert("UTC")
    with locked(path, HistoryError, "attempt history"):
        header: list[str] = []
        texts: list[str] = []
        rows: list[list[str]] = []
        times = pd.DatetimeIndex([], tz="UTC")
        if path.exists() and path.stat().st_size > 0:
            existing = read_history(path, usable_below_um=math.inf)  # validates; every outcome counts here
            frame = existing.frame
            same = (frame["method"].to_numpy() == method) & (
                (frame["time"] - time_utc).abs() < duplicate_within
            ).to_numpy()
            if same.any():
                k = int(np.flatnonzero(same)[0])
                label = METHOD_LABEL[method]
                article = "an" if label[0] in "aeiou" else "a"
                raise HistoryError(
                    f"{article} {label} attempt at {frame['time'].iloc[k]:%Y-%m-%dT%H:%M:%SZ} is already recorded",
                    source=source,
                    line=k + 2,
                    field="time",
                    hint="nothing was added; give the time of a different attempt, or correct that line",
                )
            times = pd.DatetimeIndex(frame["time"])
            text = read_text_bounded(path, HistoryError, "history") or ""  # a UTF-8 BOM is dropped here
            header, texts, rows = _records(text, source)
            if len(rows) != len(times):  # pragma: no cover - read_history and csv agree on rows
                raise HistoryError("the history's rows could not be matched up; nothing was added", source=source)
        width = len(header)
        for name in (*COLUMNS, *cells):
            if name not in header:
                header.append(name)
        grow = len(header) - width
        if grow:  # blank cells for the new columns, at the end of each older record's text
            texts = [
                t[: len(t) - 1] + "," * max(0, len(header) - len(r)) + "\n" if len(r) < len(header) else t
                for t, r in zip(texts, rows)
            ]
        values = {**cells, "time": time_utc.strftime("%Y-%m-%dT%H:%M:%SZ"), "method": method}
        new = _line([values.get(name, "") for name in header])
        later = np.flatnonzero(times.as_unit("ns").asi8 > time_utc.as_unit("ns").value)
        at = int(later[0]) if len(later) else len(texts)
        texts.insert(at, new)
        try:
            atomic_write_text(path, _line(header) + "".join(texts))
        except OSError as exc:
            raise HistoryError(
                f"cannot write the history: {exc.strerror}",
                source=source,
                hint="check the folder is writable and the disk is not full",
            ) from None
    return at + 2


def _numeric(table: pd.DataFrame, name: str, source: str) -> np.ndarray:
    raw = table[name].str.strip()
    blank = raw.isin(["", "NaN", "nan", "NA"])
    values = pd.to_numeric(raw.where(~blank, None), errors="coerce")
    bad = values.isna() & ~blank
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise HistoryError(f"{name} {table[name].iloc[i]!r} is not a number", source=source, line=i + 2, field=name)
    numbers = values.to_numpy(dtype=float)
    huge = ~np.isnan(numbers) & ~(np.abs(numbers) < 1e15)
    if huge.any():
        i = int(np.flatnonzero(huge)[0])
        shown = str(table[name].iloc[i]).strip()
        shown = shown if len(shown) <= 24 else f"{shown[:12]}… ({len(shown)} characters)"
        raise HistoryError(
            f"{name} {shown} is not a finite number of plausible size", source=source, line=i + 2, field=name
        )
    return numbers
