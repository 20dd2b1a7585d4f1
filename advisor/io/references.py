"""Reference-scan registry: the laser scans taken right after an astronomical correction.

A CSV with columns ``time`` (ISO 8601 with a UTC offset), ``air_temp_c`` and optional ``note``
(a spreadsheet's UTF-8 byte-order mark and CRLF line ends are fine).  The newest row at or
before an evaluation time is the reference in force.  ``read_registry`` validates;
``append_reference`` adds one row under an exclusive lock on the registry's sidecar lock file
(read, add, write a temporary file beside it, fsync, rename), so concurrent writers never lose
each other's rows and a crash never leaves a half-written registry.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.errors import AdvisorError, RegistryError
from advisor.io.fileio import read_text_bounded, update_text_locked
from advisor.io.times import check_time_range, parse_time_column, parse_time_text
from advisor.text import clean_text

COLUMNS = ("time", "air_temp_c", "note")
AIR_TEMP_RANGE_C = (-60.0, 60.0)


@dataclass(frozen=True)
class Registry:
    """Reference scans sorted by time: ``times_utc`` (datetime64[ns, UTC]), ``air_temp_c``, ``notes``."""

    times_utc: pd.DatetimeIndex
    air_temp_c: np.ndarray
    notes: tuple[str, ...]
    source: str = "<none>"

    @classmethod
    def empty(cls, source: str = "<none>") -> Registry:
        return cls(pd.DatetimeIndex([], tz="UTC"), np.array([], dtype=float), (), source)

    def __len__(self) -> int:
        return len(self.times_utc)


def parse_time_utc(text: str) -> pd.Timestamp:
    """An ISO 8601 time with offset or Z → UTC Timestamp; ValueError (with an accurate message) otherwise."""
    try:
        return parse_time_text(str(text))
    except AdvisorError as exc:
        raise ValueError(f"{exc.message} ({exc.hint})" if exc.hint else exc.message) from None


def parse_registry_text(text: str | None, source: str) -> Registry:
    """Validate the text of a registry CSV (``None`` or blank: an empty registry)."""
    if text is None or not text.strip():
        return Registry.empty(source)
    reader = csv.DictReader(io.StringIO(text, newline=""))
    header = [(h or "").strip() for h in (reader.fieldnames or [])]
    seen = set()
    for name in header:
        if name in seen and name:
            raise RegistryError(
                f"column {name!r} appears twice in the header",
                source=source,
                line=1,
                hint="header must be: time,air_temp_c,note",
            )
        seen.add(name)
    for required in ("time", "air_temp_c"):
        if required not in header:
            raise RegistryError(
                f"missing column '{required}'", source=source, line=1, hint="header must be: time,air_temp_c,note"
            )
    texts, lines, temps, notes = [], [], [], []
    lo, hi = AIR_TEMP_RANGE_C
    try:
        for row in reader:
            number = reader.line_num
            row = {(k or "").strip(): (v or "").strip() if isinstance(v, str) else "" for k, v in row.items()}
            if not any(row.values()):
                continue
            texts.append(row["time"])
            lines.append(number)
            cell = row["air_temp_c"]
            shown = cell if len(cell) <= 24 else f"{cell[:12]}… ({len(cell)} characters)"
            try:
                temp = float(cell)
            except ValueError:
                raise RegistryError(
                    f"air_temp_c {shown!r} is not a number",
                    source=source,
                    line=number,
                    field="air_temp_c",
                    hint="write °C, e.g. 3.5",
                ) from None
            if not (math.isfinite(temp) and lo <= temp <= hi):
                raise RegistryError(
                    f"air_temp_c {shown} is outside {lo:g}..{hi:g} °C", source=source, line=number, field="air_temp_c"
                )
            temps.append(temp)
            notes.append(clean_text(row.get("note", "")))
    except csv.Error as exc:
        raise RegistryError(
            f"cannot parse CSV: {exc}", source=source, line=reader.line_num, hint="check quotes and commas"
        ) from None
    if not texts:
        return Registry.empty(source)
    times = parse_time_column(
        pd.Series(texts, dtype=object),
        source=source,
        field="time",
        line_offset=np.array(lines),
        error_type=RegistryError,
    )
    t = times.to_numpy(dtype="datetime64[ns]").view(np.int64)
    order = np.argsort(t, kind="stable")
    idx = pd.DatetimeIndex(times.iloc[order]).tz_convert("UTC").as_unit("ns")
    return Registry(idx, np.array(temps, dtype=float)[order], tuple(notes[i] for i in order), source)


def read_registry(path: Path | str | None) -> Registry:
    """Read a registry CSV; a missing path gives an empty registry (no reference)."""
    if path is None:
        return Registry.empty()
    text = read_text_bounded(
        path, RegistryError, "registry", missing_ok=True, empty_ok=True, expected="a CSV text file"
    )
    return parse_registry_text(text, str(path))


def reference_in_force(registry: Registry, times_utc: pd.DatetimeIndex | np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """For each time, the (time_ns, air_temp_c) of the newest reference at or before it.

    Returns ``(reference_time_ns, reference_air_temp_c)``; NaN/-1 where none is in force.
    """
    t = np.asarray(
        times_utc.as_unit("ns").asi8 if isinstance(times_utc, pd.DatetimeIndex) else times_utc, dtype=np.int64
    )
    if len(registry) == 0:
        return np.full(t.shape, -1, dtype=np.int64), np.full(t.shape, np.nan)
    ref_t = registry.times_utc.as_unit("ns").asi8
    pos = np.searchsorted(ref_t, t, side="right") - 1
    has = pos >= 0
    safe = np.clip(pos, 0, None)
    return np.where(has, ref_t[safe], -1), np.where(has, registry.air_temp_c[safe], np.nan)


def format_registry(registry: Registry) -> str:
    """The CSV text of ``registry`` (header and one row per scan, sorted by time)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(COLUMNS)
    for t, temp, n in zip(registry.times_utc, registry.air_temp_c, registry.notes):
        writer.writerow((t.strftime("%Y-%m-%dT%H:%M:%SZ"), f"{temp:.1f}", n))
    return buf.getvalue()


def append_reference(path: Path | str, time_utc: pd.Timestamp, air_temp_c: float, note: str = "") -> Registry:
    """Append one reference scan to the registry at ``path`` (created if absent).

    The whole read-validate-add-write runs under an exclusive lock on the registry's sidecar
    lock file and ends with an atomic rename: twenty concurrent writers keep all twenty rows.
    """
    path = Path(path)
    lo, hi = AIR_TEMP_RANGE_C
    if not (math.isfinite(air_temp_c) and lo <= air_temp_c <= hi):
        raise RegistryError(f"air temperature {air_temp_c:g} °C is outside {lo:g}..{hi:g}", field="--air-temp-c")
    time_utc = pd.Timestamp(time_utc).tz_convert("UTC")
    check_time_range(pd.Series([time_utc]), [time_utc.isoformat()], field="--time", error_type=RegistryError)
    note = clean_text(note)
    if not path.parent.exists():
        raise RegistryError("folder does not exist", source=str(path.parent), hint="create it first")
    result: list[Registry] = []

    def add(old_text: str | None) -> str:
        registry = parse_registry_text(old_text, str(path))  # validates the existing file first
        times = pd.DatetimeIndex(registry.times_utc.append(pd.DatetimeIndex([time_utc]).as_unit("ns")))
        temps = np.append(registry.air_temp_c, float(air_temp_c))
        notes = registry.notes + (note,)
        order = np.argsort(times.asi8, kind="stable")
        new = Registry(pd.DatetimeIndex(times[order]), temps[order], tuple(notes[i] for i in order), str(path))
        result.append(new)
        return format_registry(new)

    update_text_locked(path, add, RegistryError, "registry")
    return result[0]
