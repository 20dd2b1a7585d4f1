"""Past measurement attempts: reading and validating a site's history file (pandas only).

A history row is one past attempt: ``time`` (ISO 8601 with offset or ``Z``), ``method``
(``scan`` or ``astronomical``) and its outcome: ``usable`` (yes/no) and/or the measured residual
``residual_rms_um``, judged against the row's ``usable_max_rms_um`` or the ``usable_below_um``
argument when ``usable`` is blank; optionally the weather at the attempt in canonical names.
Training (:mod:`advisor.model.training`) and replay scoring (:mod:`advisor.evaluation.replay`) both read it here.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.errors import AdvisorError
from advisor.io.fileio import KINDS, encoding_error, open_regular, repeated_csv_column, sniff_encoding_problem
from advisor.io.site import CANONICAL_COLUMNS
from advisor.io.times import parse_time_column
from advisor.vocabulary import METHODS

MAX_HISTORY_BYTES = KINDS["history"].max_bytes
USABLE_WORDS = {**dict.fromkeys(("yes", "y", "true", "1", "usable", "ok", "success"), 1.0),
                **dict.fromkeys(("no", "n", "false", "0", "unusable", "failed", "fail"), 0.0), "": np.nan}



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
    with open_regular(path, HistoryError, KINDS["history"],
                      empty_hint="expected a header line and one row per attempt") as (fh, _size):
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
            raise HistoryError(f"cannot parse CSV: {msg}", source=source, line=int(m.group(1)) if m else None,
                               hint="save the history as comma-separated UTF-8 text") from None
    repeated = repeated_csv_column(header)
    if repeated:
        raise HistoryError(f"column {repeated!r} appears twice in the header", source=source, line=1,
                           hint="keep one; the advisor will not guess which is meant")
    table = table.rename(columns=lambda c: str(c).strip())
    if len(table) == 0:
        raise HistoryError("history has a header but no attempts", source=source)
    for required in ("time", "method"):
        if required not in table.columns:
            raise HistoryError(f"missing column {required!r}", source=source, line=1,
                               hint="columns: time, method, usable and/or residual_rms_um, then weather columns")
    if "usable" not in table.columns and "residual_rms_um" not in table.columns:
        raise HistoryError("no outcome column: need 'usable' (yes/no) and/or 'residual_rms_um'", source=source, line=1)

    def line_of(mask) -> int:
        return int(np.flatnonzero(np.asarray(mask))[0]) + 2

    times = parse_time_column(table["time"], source=source, field="time", line_offset=2, error_type=HistoryError,
                              require_offset=True)
    method = table["method"].str.strip().str.lower()
    bad = ~method.isin(list(METHODS))
    if bad.any():
        i = line_of(bad)
        raise HistoryError(f"method {table['method'].iloc[i - 2]!r} is neither 'scan' nor 'astronomical'",
                           source=source, line=i, field="method")
    out = pd.DataFrame({"time": times, "method": method.to_numpy(dtype=object)})

    usable = np.full(len(table), np.nan)
    if "usable" in table.columns:
        words = table["usable"].str.strip().str.lower()
        bad = ~words.isin(list(USABLE_WORDS))
        if bad.any():
            i = line_of(bad)
            raise HistoryError(f"usable {table['usable'].iloc[i - 2]!r} is not yes/no", source=source, line=i,
                               field="usable", hint="write yes or no (or leave it blank and give residual_rms_um)")
        usable = words.map(USABLE_WORDS).to_numpy(dtype=float)
    rms = _numeric(table, "residual_rms_um", source) if "residual_rms_um" in table.columns else np.full(len(table), np.nan)
    if (rms < 0).any():
        raise HistoryError("residual_rms_um is negative", source=source, line=line_of(rms < 0), field="residual_rms_um")
    limit = np.full(len(table), np.nan if usable_below_um is None else float(usable_below_um))
    if "usable_max_rms_um" in table.columns:
        row_limit = _numeric(table, "usable_max_rms_um", source)
        limit = np.where(np.isfinite(row_limit), row_limit, limit)
    judged = np.isnan(usable) & np.isfinite(rms)
    if (judged & np.isnan(limit)).any():
        raise HistoryError("no 'usable' value and no limit to judge residual_rms_um by", source=source,
                           line=line_of(judged & np.isnan(limit)), field="usable",
                           hint="fill in usable, add usable_max_rms_um, or pass --usable-below-um UM")
    usable = np.where(judged, (rms <= limit).astype(float), usable)
    if np.isnan(usable).any():
        raise HistoryError("attempt has no outcome (neither usable nor residual_rms_um)", source=source,
                           line=line_of(np.isnan(usable)), field="usable")
    out["usable"] = usable.astype(bool)
    out["residual_rms_um"] = rms
    for name in (*CANONICAL_COLUMNS, "air_temp_rate_c_per_h"):
        if name in table.columns:
            out[name] = _numeric(table, name, source)
    return History(out, source, sha256_of(path))


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
        raise HistoryError(f"{name} {shown} is not a finite number of plausible size", source=source, line=i + 2,
                           field=name)
    return numbers
