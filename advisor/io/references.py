"""Reference-scan registry: the laser scans taken right after an astronomical correction.

A CSV with columns ``time`` (ISO 8601 UTC), ``air_temp_c`` and optional ``note``.  The newest
row at or before an evaluation time is the reference in force.  ``read_registry`` validates;
``append_reference`` adds one row with an atomic replace (write a temporary file in the same
folder, fsync, rename), so a crash never leaves a half-written registry.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.errors import RegistryError
from advisor.io.fileio import atomic_write_text

COLUMNS = ("time", "air_temp_c", "note")


@dataclass(frozen=True)
class Registry:
    """Reference scans sorted by time: ``times_utc`` (datetime64[ns, UTC]), ``air_temp_c``, ``notes``."""

    times_utc: pd.DatetimeIndex
    air_temp_c: np.ndarray
    notes: tuple[str, ...]
    source: str = "<none>"

    @classmethod
    def empty(cls, source: str = "<none>") -> "Registry":
        return cls(pd.DatetimeIndex([], tz="UTC"), np.array([], dtype=float), (), source)

    def __len__(self) -> int:
        return len(self.times_utc)


def parse_time_utc(text: str) -> pd.Timestamp:
    """An ISO 8601 time with offset or Z → UTC Timestamp; ValueError otherwise."""
    ts = pd.Timestamp(str(text).strip())
    if ts.tzinfo is None:
        raise ValueError(f"time {text!r} has no UTC offset (write e.g. 2026-01-15T09:00:00Z)")
    return ts.tz_convert("UTC")


def read_registry(path: Path | str | None) -> Registry:
    """Read a registry CSV; a missing path gives an empty registry (no reference)."""
    if path is None:
        return Registry.empty()
    path = Path(path)
    source = str(path)
    if not path.exists():
        return Registry.empty(source)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise RegistryError(f"cannot read reference registry: {exc}", source=source) from None
    if not text.strip():
        return Registry.empty(source)
    reader = csv.DictReader(io.StringIO(text))
    header = [h.strip() for h in (reader.fieldnames or [])]
    for required in ("time", "air_temp_c"):
        if required not in header:
            raise RegistryError(f"missing column '{required}'", source=source, line=1,
                                hint="header must be: time,air_temp_c,note")
    times, temps, notes = [], [], []
    for number, row in enumerate(reader, start=2):
        row = {(k or "").strip(): (v or "").strip() for k, v in row.items()}
        try:
            times.append(parse_time_utc(row["time"]))
        except ValueError as exc:
            raise RegistryError(str(exc).split(" (")[0], source=source, line=number, field="time",
                                hint="write e.g. 2026-01-15T09:00:00Z") from None
        try:
            temp = float(row["air_temp_c"])
        except ValueError:
            raise RegistryError(f"air_temp_c {row['air_temp_c']!r} is not a number", source=source,
                                line=number, field="air_temp_c") from None
        if not -60 <= temp <= 60:
            raise RegistryError(f"air_temp_c {temp:g} is outside -60..60", source=source, line=number,
                                field="air_temp_c")
        temps.append(temp)
        notes.append(row.get("note", ""))
    order = np.argsort(np.array([t.value for t in times], dtype=np.int64), kind="stable")
    idx = pd.DatetimeIndex([times[i] for i in order]).tz_convert("UTC") if times else pd.DatetimeIndex([], tz="UTC")
    return Registry(idx, np.array(temps, dtype=float)[order], tuple(notes[i] for i in order), source)


def reference_in_force(registry: Registry, times_utc: pd.DatetimeIndex) -> tuple[np.ndarray, np.ndarray]:
    """For each time, the (time_ns, air_temp_c) of the newest reference at or before it.

    Returns ``(reference_time_ns, reference_air_temp_c)``; NaN/-1 where none is in force.
    """
    t = np.asarray(times_utc.as_unit("ns").asi8 if isinstance(times_utc, pd.DatetimeIndex) else times_utc, dtype=np.int64)
    if len(registry) == 0:
        return np.full(t.shape, -1, dtype=np.int64), np.full(t.shape, np.nan)
    ref_t = registry.times_utc.as_unit("ns").asi8
    pos = np.searchsorted(ref_t, t, side="right") - 1
    has = pos >= 0
    safe = np.clip(pos, 0, None)
    return np.where(has, ref_t[safe], -1), np.where(has, registry.air_temp_c[safe], np.nan)


def append_reference(path: Path | str, time_utc: pd.Timestamp, air_temp_c: float, note: str = "") -> Registry:
    """Append one reference scan to the registry at ``path`` (created if absent), atomically."""
    path = Path(path)
    registry = read_registry(path)  # validates the existing file before we touch it
    if not -60 <= air_temp_c <= 60:
        raise RegistryError(f"air temperature {air_temp_c:g} °C is outside -60..60", field="--air-temp-c")
    if not path.parent.exists():
        raise RegistryError("folder does not exist", source=str(path.parent), hint="create it first")
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(COLUMNS)
    rows = list(zip(registry.times_utc, registry.air_temp_c, registry.notes))
    rows.append((time_utc.tz_convert("UTC"), float(air_temp_c), note))
    rows.sort(key=lambda r: r[0].value)
    for t, temp, n in rows:
        writer.writerow((t.strftime("%Y-%m-%dT%H:%M:%SZ"), f"{temp:.1f}", n))
    try:
        atomic_write_text(path, buf.getvalue())
    except OSError as exc:
        raise RegistryError(f"cannot write registry: {exc.strerror}", source=str(path),
                            hint="check the folder is writable") from None
    return read_registry(path)
