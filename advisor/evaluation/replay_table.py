"""What a replay writes per step (``replay --csv``) and what it warns about (pure pandas/numpy).

    table = step_table(replayed, compared)          # one row per step: verdict, blocked-by, odds, key features
    warnings = coverage_warnings(times, hours, rows, registry, attempts)

``blocked_by_<method>`` lists, separated by ``;``, everything that blocks the method, with the
ids ``check --json`` uses in ``blocked_by``: the blocking rules that fired, ``efficiency.min``,
``target.unreachable``, ``model.<method>`` (the site model's odds below the site's threshold)
and ``data`` (no good weather: undetermined).  Flags are written ``true``/``false``.  The strings are built once per
distinct combination of blocks, not once per row.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from advisor.catalogue import CATALOGUE, KEY_FEATURES
from advisor.evaluation.replay import Attempts, Replayed
from advisor.fmt import hours_total, percent
from advisor.io.references import Registry
from advisor.vocabulary import METHODS

#: Flags a replay's CSV carries beside the key features.
CSV_FLAGS = ("data_ok", "fog", "precipitation", "is_night", "has_reference", "calibrator_available")
#: A coverage gap is worth a warning above this fraction of the replayed hours.
GAP_FRACTION = 0.05


def _joined(masks: list[tuple[str, np.ndarray]], n: int) -> np.ndarray:
    """Per row, the names whose mask is true, joined by ';' (built once per distinct combination)."""
    if not masks:
        return np.full(n, "", dtype=object)
    bits = np.ascontiguousarray(np.column_stack([m for _, m in masks]).astype(np.uint8))
    rows = bits.view(np.dtype((np.void, bits.shape[1]))).ravel()  # one opaque value per row of bits
    _, first, inverse = np.unique(rows, return_index=True, return_inverse=True)
    names = [name for name, _ in masks]
    texts = np.array([";".join(name for name, on in zip(names, bits[k]) if on) for k in first], dtype=object)
    return texts[np.asarray(inverse).ravel()]


def blocked_by(replayed: Replayed, method: str) -> np.ndarray:
    """Per row, everything that rules ``method`` out (:meth:`advisor.decision.Decisions.blocking`)."""
    d = replayed.decisions
    n = len(replayed.verdict)
    if d is None:
        return np.full(n, "", dtype=object)
    masks = [(block_id, np.asarray(mask, dtype=bool)) for block_id, mask in d.blocking(method).items()]
    return _joined(masks, n)


def _flag_text(values) -> np.ndarray:
    return np.where(np.asarray(values, dtype=bool), "true", "false")


def step_table(replayed: Replayed, compared: Replayed | None = None) -> pd.DataFrame:
    """One row per replayed step: time, verdict(s), blocked-by and odds per method, key features, flags."""
    out = pd.DataFrame({"time": replayed.times_utc.strftime("%Y-%m-%dT%H:%M:%SZ"), "verdict": replayed.verdict})
    if compared is not None:
        out["verdict_compared"] = compared.verdict
    d = replayed.decisions
    for method in METHODS:
        out[f"blocked_by_{method}"] = blocked_by(replayed, method)
    if d is not None:
        for method in METHODS:
            c = d.candidates[method]
            out[f"surface_rms_um_{method}"] = np.round(c.surface_rms_um, 1)
            out[f"p_usable_{method}"] = np.round(c.p_usable, 4)
            extrapolated = d.model_extrapolated.get(method)
            out[f"odds_extrapolated_{method}"] = _flag_text(
                extrapolated if extrapolated is not None else np.zeros(len(out), dtype=bool)
            )
        rows = d.features
        for spec in KEY_FEATURES:
            if spec.name in rows:
                out[spec.name] = np.round(rows[spec.name].to_numpy(dtype=float), 4)
        for name in CSV_FLAGS:
            if name in rows and CATALOGUE[name].unit == "flag":
                out[name] = _flag_text(rows[name].to_numpy())
    return out


def coverage_warnings(
    times_utc: pd.DatetimeIndex,
    hours: np.ndarray,
    rows: pd.DataFrame,
    registry: Registry,
    attempts: Attempts | None = None,
    attempts_covered: int | None = None,
) -> list[str]:
    """What the replay cannot speak for: stretches with no reference scan in force, and a history
    of attempts that does not cover the replayed period (each over :data:`GAP_FRACTION` of it)."""
    if len(times_utc) == 0:
        return []
    outside = 0.0
    if attempts is not None and len(attempts):
        first, last = attempts.times_utc.min(), attempts.times_utc.max()
        outside = float(hours[(times_utc < first) | (times_utc > last)].sum())
    return coverage_warnings_from(
        times_utc[0],
        times_utc[-1],
        float(np.sum(hours)),
        float(hours[~rows["has_reference"].to_numpy(dtype=bool)].sum()),
        outside,
        registry,
        attempts,
        attempts_covered,
    )


def coverage_warnings_from(
    first_utc: pd.Timestamp,
    last_utc: pd.Timestamp,
    total_hours: float,
    no_reference_hours: float,
    outside_attempts_hours: float,
    registry: Registry,
    attempts: Attempts | None = None,
    attempts_covered: int | None = None,
) -> list[str]:
    """:func:`coverage_warnings` from the replay's totals: its first and last times, its hours, the
    hours without a reference scan in force and those outside the attempts' span [h]."""
    warnings: list[str] = []
    total = total_hours
    if total <= 0:
        return warnings
    period = f"{first_utc:%Y-%m-%d} .. {last_utc:%Y-%m-%d}"
    uncovered = no_reference_hours
    if uncovered > GAP_FRACTION * total:
        share = f"{hours_total(uncovered)} of {hours_total(total)} ({percent(uncovered / total)})"
        if len(registry) == 0:
            where = f"the reference registry {registry.source} holds no scan"
        else:
            where = f"the reference registry {registry.source} covers only {registry.times_utc[0]:%Y-%m-%d} onwards"
        warnings.append(
            f"{where}: for {share} of the replayed period ({period}) no reference scan is in force, "
            "so the laser is never advised there; pass --references with the scans of that time"
        )
    if attempts is not None:
        if len(attempts) == 0 or not attempts_covered:
            warnings.append(
                f"none of the {len(attempts)} attempts in {attempts.source} falls in the replayed period "
                f"({period}): there is nothing to score the advice against"
            )
        else:
            first, last = attempts.times_utc.min(), attempts.times_utc.max()
            outside = outside_attempts_hours
            if outside > GAP_FRACTION * total:
                warnings.append(
                    f"the attempts in {attempts.source} run {first:%Y-%m-%d} .. {last:%Y-%m-%d}: "
                    f"{hours_total(outside)} of the replayed period ({period}) have no attempt to score against; "
                    f"the scores speak for {attempts_covered} attempts only"
                )
    return warnings
