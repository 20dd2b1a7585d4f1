"""Replay in chunks: an archive of any length in bounded memory, with the results of a whole replay.

    chunks = feature_chunks(frames, site, registry, t_from, t_to)      # row features, chunk by chunk
    totals = ReplayTotals(rule_sets, site, attempts)
    decide_chunks(chunks, scenario, rule_sets, totals, on_slice=write_rows)
    totals.hours(0), totals.by_month(), totals.by_local_hour(), totals.dominant()
    totals.weather(), totals.comparison(), totals.scores(0), totals.warnings(registry, covered)

Pure: canonical frames (or cached row features) in, totals out; each chunk is freed once it is
summed.  What is kept grows with the number of months, attempts and rules, never with the
number of rows.

* :func:`feature_chunks` computes the row features of the observed rows of a stream of
  canonical frames in the chunks :func:`advisor.features.row_features_chunked` uses over the
  whole frame (:data:`FEATURE_CHUNK_ROWS` evaluation times, each with
  :data:`advisor.features.LOOKBACK` of feed before it), so they are those of a whole replay,
  bit for bit, whatever parts the archive arrives in.
* :func:`decide_chunks` decides each chunk under every rule set in slices of at most
  :data:`DECIDE_CELLS` rule × row results (a thousand rules stay in bounded memory) and adds the
  slice to the :class:`ReplayTotals`.
* :class:`advisor.evaluation.replay_totals.ReplayTotals` sums what each slice contributes.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator, Sequence

import numpy as np
import pandas as pd

from advisor.decision import Decisions
from advisor.evaluation.evaluate import Scenario
from advisor.evaluation.replay_totals import ReplayTotals
from advisor.features import LOOKBACK, row_features
from advisor.io.references import Registry
from advisor.io.site import Site
from advisor.rules.ruleset import RuleSet

__all__ = ["DECIDE_CELLS", "FEATURE_CHUNK_ROWS", "decide_chunks", "feature_chunks"]

#: Evaluation times per chunk of row features (as :func:`advisor.features.row_features_chunked`).
FEATURE_CHUNK_ROWS = 100_000
#: Most rule × row results (fired masks and error terms) held at once while deciding.
DECIDE_CELLS = 16_000_000


# --------------------------------------------------------------------------- row features
def feature_chunks(
    frames: Iterable[pd.DataFrame],
    site: Site,
    registry: Registry,
    t_from: pd.Timestamp | None = None,
    t_to: pd.Timestamp | None = None,
    chunk_rows: int | None = None,
    on_rows: Callable[[int], None] | None = None,
) -> Iterator[pd.DataFrame]:
    """Row features of every observed row in ``[t_from, t_to]`` of a stream of canonical frames.

    ``frames`` are consecutive parts of one canonical frame (as
    :meth:`advisor.io.archive.ArchiveReader.frames` hands them out).  The chunks equal those of
    :func:`advisor.features.row_features_chunked` over the whole observed frame, ``source_row``
    and ``latest_row`` included (positions in the observed frame), with the same ``chunk_rows``
    (default :data:`FEATURE_CHUNK_ROWS`).  ``on_rows(done)`` follows progress.
    """
    chunk_rows = FEATURE_CHUNK_ROWS if chunk_rows is None else chunk_rows
    lo_ns = None if t_from is None else pd.Timestamp(t_from).value
    hi_ns = None if t_to is None else pd.Timestamp(t_to).value
    lookback = LOOKBACK.value
    window: pd.DataFrame | None = None  # observed rows a later chunk may still read
    w_ns = np.zeros(0, dtype=np.int64)
    w_start = 0  # position in the observed frame of the window's first row
    cursor = 0  # window position of the first row not yet evaluated
    done = 0

    def in_period(ns: np.ndarray) -> np.ndarray:
        keep = np.ones(len(ns), dtype=bool)
        if lo_ns is not None:
            keep &= ns >= lo_ns
        if hi_ns is not None:
            keep &= ns <= hi_ns
        return keep

    def emit(sel: np.ndarray) -> pd.DataFrame:
        assert window is not None
        t = w_ns[sel]
        lo = int(np.searchsorted(w_ns, t[0] - lookback, side="left"))
        hi = int(np.searchsorted(w_ns, t[-1], side="right"))
        times = pd.DatetimeIndex(t.astype("datetime64[ns]")).tz_localize("UTC")
        part = row_features(window.iloc[lo:hi], times, site, registry)
        for column in ("source_row", "latest_row"):
            rows = part[column].to_numpy()
            part[column] = np.where(rows >= 0, rows + (w_start + lo), -1)
        return part

    for frame in frames:
        if len(frame) == 0:
            continue
        if "kind" in frame:
            observed = frame["kind"].to_numpy(dtype=object) == "observed"
            if not observed.all():
                frame = frame[observed]
        ns = frame["time"].to_numpy(dtype="datetime64[ns]").view(np.int64)
        window = frame if window is None else pd.concat([window, frame], ignore_index=True)
        w_ns = np.concatenate([w_ns, ns]) if len(w_ns) else ns
        while True:
            todo = np.flatnonzero(in_period(w_ns[cursor:])) + cursor
            if len(todo) < chunk_rows:
                break
            sel = todo[:chunk_rows]
            yield emit(sel)
            done += len(sel)
            if on_rows:
                on_rows(done)
            cursor = int(sel[-1]) + 1
            # every later chunk starts after this one's last time: older rows are never read again
            keep_from = int(np.searchsorted(w_ns, w_ns[sel[-1]] - lookback, side="left"))
            window, w_ns = window.iloc[keep_from:].reset_index(drop=True), w_ns[keep_from:]
            w_start += keep_from
            cursor -= keep_from
    if window is not None:
        todo = np.flatnonzero(in_period(w_ns[cursor:])) + cursor
        if len(todo):
            yield emit(todo)
            done += len(todo)
            if on_rows:
                on_rows(done)


# --------------------------------------------------------------------------- deciding
def decide_chunks(
    chunks: Iterable[pd.DataFrame],
    scenario: Scenario,
    rule_sets: Sequence[RuleSet],
    totals: ReplayTotals,
    on_slice: Callable[[list[Decisions]], None] | None = None,
) -> ReplayTotals:
    """Decide each chunk of row features under every rule set and add it to ``totals``.

    ``on_slice(decisions)`` sees each slice's decisions (one per rule set) before they are freed
    (the per-row CSV is written from it).
    """
    n_rules = max(1, sum(len(r) for r in rule_sets))
    step = max(2048, DECIDE_CELLS // n_rules)
    pending: list[tuple[list[Decisions], np.ndarray]] = []  # the newest slice waits for the next time

    def flush(next_ns: int | None) -> None:
        decisions, ns = pending.pop()
        totals.add(decisions, ns, next_ns)

    for rows in chunks:
        for start in range(0, len(rows), step):
            part = rows.iloc[start : start + step]
            ns = part["time"].to_numpy(dtype="datetime64[ns]").view(np.int64)
            if pending:
                flush(int(ns[0]))
            decisions = scenario.decide(part, rule_sets)
            if on_slice:
                on_slice(decisions)
            pending.append((decisions, ns))
    if pending:
        flush(None)
    return totals
