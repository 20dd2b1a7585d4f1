"""Stable calls over a sequence of evaluations: brief changes of preference are not news.

    stable = stabilise(times_utc, verdict, at_once, confirm_min)

A call that changes because the advised method became unsafe or impossible (a blocking rule:
fog, rain, wind; bad data) changes at once.  A call that changes only because the figures moved
(holography a little better for ten minutes, a short lull) is kept as it was until the new call
has held for ``confirm_min`` minutes.  ``advisor tick`` does the same online
(:mod:`advisor.evaluation.advisory`); the outlook's spans use this offline form.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.vocabulary import METHODS

__all__ = ["stabilise", "changes_at_once"]


def changes_at_once(verdict: np.ndarray, hard_blocked: dict[str, np.ndarray]) -> np.ndarray:
    """Per row: a change of call here is forced (the previous row's method is hard-blocked here,
    or the data went bad or came back), so it needs no confirmation.

    ``hard_blocked`` maps method → mask of rows where a block other than a shortfall of
    efficiency or odds applies.
    """
    verdict = np.asarray(verdict, dtype=object)
    previous = np.concatenate((verdict[:1], verdict[:-1]))
    forced = (verdict == "undetermined") | (previous == "undetermined")
    for method in METHODS:
        forced |= (previous == method) & np.asarray(hard_blocked.get(method, False), dtype=bool)
    forced[:1] = True
    return forced


def stabilise(times_utc, verdict: np.ndarray, at_once: np.ndarray, confirm_min: float) -> np.ndarray:
    """The verdict per row with changes shorter than ``confirm_min`` absorbed (vectorised over runs).

    A run of one verdict stands when it lasts at least ``confirm_min`` (to the next run's start) or
    begins with a forced change (``at_once``); other runs take the verdict of the last run that
    stands before them.  The first run always stands.
    """
    verdict = np.asarray(verdict, dtype=object)
    n = len(verdict)
    if n == 0:
        return verdict.copy()
    t = pd.DatetimeIndex(times_utc).as_unit("ns").asi8
    starts = np.flatnonzero(np.concatenate(([True], verdict[1:] != verdict[:-1])))
    ends_ns = np.append(t[starts[1:]], t[-1] + (t[-1] - t[-2] if n > 1 else 0))
    lasts_min = (ends_ns - t[starts]) / 6e10
    stands = (lasts_min >= confirm_min) | np.asarray(at_once, dtype=bool)[starts]
    stands[0] = True
    last_standing = np.maximum.accumulate(np.where(stands, np.arange(len(starts)), 0))
    run_verdict = verdict[starts][last_standing]
    run_of_row = np.cumsum(np.concatenate(([True], verdict[1:] != verdict[:-1]))) - 1
    return run_verdict[run_of_row]
