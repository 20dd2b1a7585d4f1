"""A feed's value columns → numbers in canonical units, with what was missing, coded or implausible.

    values, coded = numeric_column(raw, column, codes, source, line_offset)
    rate = depth_rate(depth_mm, hours)                    # precipitation depth over N hours → mm/h
    bad = step_outliers(values, time_ns, kind, limit)     # rate-of-change (step) test
    bits = dropout_mask(values, time_ns, kind, hold_min)  # an optional sensor that stopped reporting

Pure functions over whole columns (no loop over rows).  A cell that holds one of the site's
missing-value codes is missing, never a number: ``-9900`` visibility is not 9.9 km of fog-free air.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.errors import FeedError

__all__ = [
    "MAX_FEED_NUMBER",
    "numeric_column",
    "depth_rate",
    "step_outliers",
    "dropout_mask",
    "refuse_mixed_humidity",
    "column_bit",
    "kind_rows",
    "REPORTING_RUN",
]

#: Largest magnitude read as a feed value; beyond it a cell is corrupt, not a measurement.
MAX_FEED_NUMBER = 1e15
#: Samples in a row an optional sensor must have reported before its silence counts as a dropout.
REPORTING_RUN = 3
_NA_WORDS = ("nan", "na", "n/a", "null")
_EMPTY_HINT = "leave the cell empty for a missing value, or list the code under missing: in the site file"


def column_bit(index: int) -> int:
    """The bit of canonical column ``index`` in the frame's per-row column masks."""
    return 1 << index


def _split_codes(codes) -> tuple[np.ndarray, set[str]]:
    numbers = np.array([c for c in codes if not isinstance(c, str)], dtype=float)
    words = {c.strip().lower() for c in codes if isinstance(c, str)}
    return numbers, words


def numeric_column(raw: pd.Series, column: str, codes, source: str, line_offset: int) -> tuple[np.ndarray, np.ndarray]:
    """A feed column as floats, and the mask of cells that held a missing-value code.

    A coded or empty cell is NaN; any other cell that is not a finite number is an error naming the
    column, the line and the value.  ``true``/``false`` (a JSON boolean, or a word in a CSV cell)
    is never read as 1 or 0.
    """
    numbers, words = _split_codes(codes)
    if pd.api.types.is_bool_dtype(raw):
        raise FeedError(
            "true/false where a number is expected", source=source, line=line_offset, field=column, hint=_EMPTY_HINT
        )
    text = None
    if pd.api.types.is_float_dtype(raw) or pd.api.types.is_integer_dtype(raw):
        values = raw.to_numpy(dtype=float)
        coded = np.zeros(len(values), dtype=bool)
    else:
        text = raw.astype(object).where(raw.notna(), "").astype(str).str.strip()
        lower = text.str.lower()
        coded = lower.isin(words).to_numpy() if words else np.zeros(len(text), dtype=bool)
        usable = (text != "").to_numpy() & ~coded
        values = pd.to_numeric(text.where(usable, None), errors="coerce").to_numpy(dtype=float)
        bad = np.isnan(values) & usable & ~lower.isin(_NA_WORDS).to_numpy()
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            word = text.iloc[i]
            if word.lower() in ("true", "false"):
                raise FeedError(
                    f"{word} where a number is expected",
                    source=source,
                    line=i + line_offset,
                    field=column,
                    hint=_EMPTY_HINT,
                )
            shown = repr(word) if len(word) <= 40 else repr(word[:30] + "…")
            raise FeedError(
                f"{shown} is not a number", source=source, line=i + line_offset, field=column, hint=_EMPTY_HINT
            )
    if len(numbers):
        by_number = np.isin(values, numbers)
        coded = coded | by_number
        values = np.where(by_number, np.nan, values)
    huge = ~np.isnan(values) & ~(np.abs(values) < MAX_FEED_NUMBER)
    if huge.any():
        i = int(np.flatnonzero(huge)[0])
        if text is not None:
            shown = text.iloc[i] if len(text.iloc[i]) <= 24 else f"{text.iloc[i][:12]}… ({len(text.iloc[i])} digits)"
            what = f"value {shown} is not a finite number of plausible size"
        else:
            what = f"a number too large to be a measurement (read as {values[i]:g})"
        raise FeedError(what, source=source, line=i + line_offset, field=column, hint=_EMPTY_HINT)
    return values, coded


def refuse_mixed_humidity(values: np.ndarray, column: str, source: str, line_offset: int) -> None:
    """RH in percent with some rows written as fractions (0..1) is ambiguous: refuse it."""
    finite = np.isfinite(values)
    looks_fraction = finite & (values > 0) & (values <= 1.0)
    looks_percent = finite & (values > 1.5)
    if looks_fraction.sum() >= 3 and looks_percent.any():
        i = int(np.flatnonzero(looks_fraction)[0])
        raise FeedError(
            "relative humidity looks like a fraction in some rows and percent in others",
            source=source,
            line=i + line_offset,
            field=column,
            hint="write RH the same way in every row; map it with unit: fraction if it is 0..1",
        )


def depth_rate(depth_mm: np.ndarray, hours) -> np.ndarray:
    """Mean precipitation rate [mm/h] from a depth [mm] collected over ``hours`` [h] (per row or fixed).

    A period that is missing, zero or negative gives NaN (the rate is unknown, never 0).
    """
    hours = np.broadcast_to(np.asarray(hours, dtype=float), np.shape(depth_mm))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(np.isfinite(hours) & (hours > 0), depth_mm / np.where(hours > 0, hours, 1.0), np.nan)


def kind_rows(kind: np.ndarray) -> list[np.ndarray]:
    """The row positions of each kind (observed, forecast), by hashing (never sorting the texts)."""
    codes, uniques = pd.factorize(np.asarray(kind, dtype=object))
    if len(uniques) <= 1:
        return [np.arange(len(codes))]
    return [np.flatnonzero(codes == k) for k in range(len(uniques))]


def _previous_same_kind(groups: list[np.ndarray], n: int) -> np.ndarray:
    """Index of the previous row of the same kind (-1 for the first of its kind); rows are time-sorted."""
    prev = np.full(n, -1, dtype=np.int64)
    for rows in groups:
        prev[rows[1:]] = rows[:-1]
    return prev


def step_basis(time_ns: np.ndarray, groups: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray | None, np.ndarray]:
    """What :func:`step_outliers` needs of the times, the same for every column: ``(has, prev, minutes)``.

    ``has``: the row has a previous sample of its kind; ``prev``: that sample's row (0 where none;
    None when it is always the row before); ``minutes``: the minutes since it, at least one (NaN
    where none).
    """
    previous = _previous_same_kind(groups, len(time_ns))
    has = previous >= 0
    previous = np.clip(previous, 0, None)
    minutes = np.where(has, (time_ns - time_ns[previous]) / 6e10, np.nan)
    one_run = len(groups) == 1 and len(groups[0]) == len(time_ns) and np.array_equal(groups[0], np.arange(len(time_ns)))
    # every row's previous sample the row before (None): a shift, not a gather
    return has, None if one_run else previous, np.maximum(minutes, 1.0)


def step_outliers(
    values: np.ndarray,
    time_ns: np.ndarray,
    groups: list[np.ndarray],
    limit_per_min: float,
    basis: tuple[np.ndarray, np.ndarray | None, np.ndarray] | None = None,
) -> np.ndarray:
    """Rows whose value changed from the previous sample of their kind by more than
    ``limit_per_min`` × the minutes between them (at least one minute) — a step test.
    ``groups`` are the row positions of each kind (:func:`kind_rows`); ``basis`` is
    :func:`step_basis` of them when several columns are tested (computed here if not given).

    Past-only, so a live check and a replay flag the same rows: a spike is flagged, and so is
    the sample that returns from it; a lasting step is flagged once and then compared with itself.
    """
    has, prev, minutes = step_basis(time_ns, groups) if basis is None else basis
    if prev is None:
        before = np.concatenate([[np.nan], values[:-1]]) if len(values) else values
    else:
        before = np.where(has, values[prev], np.nan)
    with np.errstate(invalid="ignore"):
        return np.abs(values - before) > limit_per_min * minutes


def dropout_mask(values: np.ndarray, time_ns: np.ndarray, groups: list[np.ndarray], hold_min) -> np.ndarray:
    """Rows where an optional input is missing although its sensor was just reporting.

    A row is a dropout when the value is missing, the last value of its kind was at most
    ``hold_min`` minutes earlier (a scalar or one number per row), and that value ended a run of
    at least :data:`REPORTING_RUN` samples in a row that all had one.  A sensor the station reports
    only now and then (or lacks) never makes a run and is merely "not seen".
    """
    n = len(values)
    out = np.zeros(n, dtype=bool)
    present = np.isfinite(values)
    if present.all():  # a dropout is a missing value: none here
        return out
    hold = np.broadcast_to(np.asarray(hold_min, dtype=float), (n,))
    for rows in groups:
        p = present[rows]
        t = time_ns[rows]
        idx = np.where(p, np.arange(len(rows)), -1)
        last = np.maximum.accumulate(idx) if len(idx) else idx
        # length of the run of reports ending at each row: a running count reset at every gap
        count = np.cumsum(p)
        run = count - np.maximum.accumulate(np.where(p, 0, count))
        safe = np.clip(last, 0, None)
        recent = (last >= 0) & ((t - t[safe]) <= hold[rows] * 6e10)
        out[rows] = ~p & recent & (run[safe] >= REPORTING_RUN)
    return out
