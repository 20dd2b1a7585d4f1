"""Replay: what the advice would have been over an archive, and how it scored.

The definitions, over the vectorised decisions of every archive row held at once.  ``advisor
replay`` never holds them at once: it streams the archive (:mod:`advisor.evaluation.replay_stream`)
and sums the same quantities slice by slice (:mod:`advisor.evaluation.replay_totals`), through
the mask and summary functions below (``weather_masks``/``weather_summary``,
``rule_set_change_masks``/``rule_set_changes``, ``score_attempts``); the whole-array forms stay
as the reference the streamed replay is tested against, and for analyses in a notebook.

* :func:`step_hours` — how many hours each row stands for (gaps count for nothing);
* :func:`hours_by` — hours per verdict, per month or per local hour of day;
* :func:`dominant_by_month_hour` — the verdict with most hours at each local hour of each month;
* :func:`score_attempts` — against recorded attempts of both methods: false go (the advice
  allowed the method, the attempt failed) and missed (a usable attempt while the advice ruled
  the method out), per method and per rule that fired;
* :func:`compare_rule_sets` — hours that change verdict between two rule sets, by rule;
* :func:`weather_hours` — hours of the conditions behind the verdicts (wind above the limit,
  fog, precipitation, night) and of each optional input not seen, with the scan hours among them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from advisor.decision import Decisions
from advisor.io.history import History
from advisor.rules.ruleset import RuleEvaluation
from advisor.vocabulary import METHODS, VERDICTS


@dataclass(frozen=True)
class Attempts:
    """Recorded measurement attempts: UTC times, method, whether the result was usable."""

    times_utc: pd.DatetimeIndex
    method: np.ndarray
    usable: np.ndarray
    source: str

    def __len__(self) -> int:
        return len(self.times_utc)


def attempts_from_history(history: History) -> Attempts:
    """The attempts of a validated :class:`advisor.io.history.History`, sorted by time."""
    frame = history.frame.sort_values("time", kind="stable")
    return Attempts(
        pd.DatetimeIndex(frame["time"]).as_unit("ns"),
        frame["method"].to_numpy(dtype=object),
        frame["usable"].to_numpy(dtype=bool),
        history.source,
    )


def step_hours(times_utc: pd.DatetimeIndex, max_gap_min: float) -> np.ndarray:
    """Hours each row stands for: the time to the next row, nothing across a gap."""
    t = times_utc.as_unit("ns").asi8
    if len(t) == 0:
        return np.zeros(0)
    dt_min = np.diff(t) / 6e10
    typical = float(np.median(dt_min)) if len(dt_min) else 1.0
    step = np.append(dt_min, typical)
    return np.where(step <= max_gap_min, step, 0.0) / 60.0


def verdict_codes(verdict: np.ndarray) -> np.ndarray:
    """The position of each verdict in :data:`advisor.vocabulary.VERDICTS` (-1 for anything else),
    by hashing (an object array compared once per verdict would be slower)."""
    return pd.Categorical(np.asarray(verdict, dtype=object), categories=list(VERDICTS)).codes.astype(np.int64)


def hours_by(verdict: np.ndarray, hours: np.ndarray, keys) -> pd.DataFrame:
    """Hours per verdict (columns, every verdict) for each distinct value of ``keys`` (rows, sorted)."""
    unique_keys, key_code = np.unique(np.asarray(keys), return_inverse=True)
    verdict_code = verdict_codes(verdict)
    ok = verdict_code >= 0
    sums = np.bincount(
        key_code.ravel()[ok] * len(VERDICTS) + verdict_code[ok],
        weights=np.asarray(hours)[ok],
        minlength=len(unique_keys) * len(VERDICTS),
    ).reshape(len(unique_keys), len(VERDICTS))
    return pd.DataFrame(sums, index=pd.Index(unique_keys, name="key"), columns=list(VERDICTS))


def month_keys(local_times: pd.DatetimeIndex) -> np.ndarray:
    """'YYYY-MM' of each time, formatted once per distinct month (not per row)."""
    code = local_times.year.to_numpy() * 100 + local_times.month.to_numpy()
    unique, inverse = np.unique(code, return_inverse=True)
    labels = np.array([f"{c // 100:04d}-{c % 100:02d}" for c in unique])
    return labels[inverse]


def dominant_verdicts(table: pd.DataFrame) -> np.ndarray:
    """The verdict with most hours in each row of a :func:`hours_by` table ('' for a row without hours)."""
    values = table.to_numpy()
    best = np.asarray(table.columns, dtype=object)[values.argmax(axis=1)]
    return np.where(values.sum(axis=1) == 0, "", best).astype(object)


def dominant_by_month_hour(verdict: np.ndarray, hours: np.ndarray, local_times: pd.DatetimeIndex) -> pd.DataFrame:
    """The dominant verdict at each local hour of day (columns 0..23) of each month (rows 'YYYY-MM', sorted).

    A cell is '' when the archive has no hours there.
    """
    months = month_keys(local_times)
    hour = local_times.hour.to_numpy()
    verdict = np.asarray(verdict)
    rows = {}
    for month in np.unique(months):  # one pass per month, not per row
        mask = months == month
        table = hours_by(verdict[mask], hours[mask], hour[mask]).reindex(range(24), fill_value=0.0)
        rows[str(month)] = dominant_verdicts(table)
    return pd.DataFrame.from_dict(rows, orient="index", columns=list(range(24)))


def _advice_at(
    times_utc: pd.DatetimeIndex, verdict: np.ndarray, at: pd.DatetimeIndex, max_age_min: float
) -> np.ndarray:
    """The replayed verdict in force at each time of ``at`` (None-like '' if no row close before)."""
    t = times_utc.as_unit("ns").asi8
    q = at.as_unit("ns").asi8
    pos = np.searchsorted(t, q, side="right") - 1
    ok = (pos >= 0) & ((q - t[np.clip(pos, 0, None)]) <= max_age_min * 6e10)
    return np.where(ok, verdict[np.clip(pos, 0, None)], "")


def score_attempts(
    times_utc: pd.DatetimeIndex,
    verdict: np.ndarray,
    rule_eval: RuleEvaluation,
    attempts: Attempts,
    max_age_min: float = 15.0,
    feasible: dict[str, np.ndarray] | None = None,
    applies: dict[str, str] | None = None,
) -> dict:
    """False-go and missed rates of the advice against recorded attempts, per method and per rule.

    For each method, the advice at an attempt *allowed* it ("go") when the method was feasible
    there (``feasible[method]``: it was the call, or both were feasible and the other preferred);
    without ``feasible``, when the call was that method.  False go: allowed, and the attempt
    failed.  Missed: ruled out, and the attempt gave a usable map.  Attempts with no replayed row
    within ``max_age_min`` before them are not scored.  ``applies`` (rule id → scan |
    astronomical | both) limits each method's per-rule table to the rules that concern it.
    """
    advice = _advice_at(times_utc, verdict, attempts.times_utc, max_age_min)
    t = times_utc.as_unit("ns").asi8
    pos = np.clip(np.searchsorted(t, attempts.times_utc.as_unit("ns").asi8, side="right") - 1, 0, None)
    covered = advice != ""
    result: dict = {"attempts": int(len(attempts)), "attempts_covered": int(covered.sum()), "methods": {}}
    for method in METHODS:
        of_method = (attempts.method == method) & covered
        if feasible is not None and method in feasible and len(t):
            go = of_method & np.asarray(feasible[method], dtype=bool)[pos]
        else:
            go = of_method & (advice == method)
        false_go = go & ~attempts.usable
        missed = of_method & ~go & attempts.usable
        per_rule: list[dict[str, Any]] = []
        for rule_id, fired in rule_eval.fired.items():
            if applies is not None and applies.get(rule_id, "both") not in (method, "both"):
                continue
            at_attempt = fired[pos] & of_method if len(t) else np.zeros(len(attempts), dtype=bool)
            if not at_attempt.any():
                continue
            per_rule.append(
                {
                    "rule": rule_id,
                    "attempts_when_fired": int(at_attempt.sum()),
                    "failed_when_fired": int((at_attempt & ~attempts.usable).sum()),
                    "false_go_when_fired": int((at_attempt & false_go).sum()),
                    "missed_when_fired": int((at_attempt & missed).sum()),
                }
            )
        per_rule.sort(key=lambda r: -r["attempts_when_fired"])
        result["methods"][method] = {
            "attempts": int(of_method.sum()),
            "usable": int((of_method & attempts.usable).sum()),
            "advised": int((of_method & (advice == method)).sum()),
            "allowed": int(go.sum()),
            "false_go": int(false_go.sum()),
            "false_go_rate": _rate(false_go.sum(), go.sum()),
            "missed": int(missed.sum()),
            "missed_rate": _rate(missed.sum(), (of_method & attempts.usable).sum()),
            "per_rule": per_rule,
        }
    return result


def _rate(num, den) -> float | None:
    return None if den == 0 else round(float(num) / float(den), 4)


def rule_set_change_masks(
    verdict_a: np.ndarray, verdict_b: np.ndarray, eval_a: RuleEvaluation, eval_b: RuleEvaluation
) -> dict[tuple, np.ndarray]:
    """The rows behind :func:`compare_rule_sets`: ``("changed",)``, ``("transition", a, b)`` for
    each pair of verdicts, ``("rule", id)`` for each rule of either set (changed there and firing
    differently)."""
    changed = np.asarray(verdict_a != verdict_b, dtype=bool)
    masks: dict[tuple, np.ndarray] = {("changed",): changed}
    for a in VERDICTS:
        for b in VERDICTS:
            masks[("transition", a, b)] = changed & (verdict_a == a) & (verdict_b == b)
    none = np.zeros(len(verdict_a), dtype=bool)
    for rule_id in sorted(set(eval_a.fired) | set(eval_b.fired)):
        masks[("rule", rule_id)] = changed & (eval_a.fired.get(rule_id, none) != eval_b.fired.get(rule_id, none))
    return masks


def rule_set_changes(hours_of, has_rows, rule_ids) -> dict:
    """The :func:`compare_rule_sets` summary from totals of :func:`rule_set_change_masks`.

    ``hours_of(key)`` is the hours of a mask's rows, ``has_rows(key)`` whether it has any.
    """
    transitions = [
        {"from": a, "to": b, "hours": round(hours_of(("transition", a, b)), 2)}
        for a in VERDICTS
        for b in VERDICTS
        if has_rows(("transition", a, b))
    ]
    by_rule = [
        {"rule": rule_id, "hours_changed": round(hours_of(("rule", rule_id)), 2)}
        for rule_id in sorted(rule_ids)
        if has_rows(("rule", rule_id))
    ]
    by_rule.sort(key=lambda r: -r["hours_changed"])
    return {"hours_changed": round(hours_of(("changed",)), 2), "transitions": transitions, "by_rule": by_rule}


def compare_rule_sets(
    verdict_a: np.ndarray, verdict_b: np.ndarray, eval_a: RuleEvaluation, eval_b: RuleEvaluation, hours: np.ndarray
) -> dict:
    """Hours that change verdict from rule set A to B, as a from→to table and by rule.

    A changed row is attributed to every rule whose firing differs between the two sets there
    (a rule present in only one set counts as not firing in the other).
    """
    masks = rule_set_change_masks(verdict_a, verdict_b, eval_a, eval_b)
    return rule_set_changes(
        lambda key: float(hours[masks[key]].sum()),
        lambda key: bool(masks[key].any()),
        set(eval_a.fired) | set(eval_b.fired),
    )


@dataclass(frozen=True)
class Replayed:
    """Verdicts and rule firings at every evaluated time (and the decisions behind them)."""

    times_utc: pd.DatetimeIndex
    verdict: np.ndarray
    rule_eval: RuleEvaluation
    decisions: Decisions | None = None

    @property
    def feasible(self) -> dict[str, np.ndarray] | None:
        """method → per-row mask: the advice allowed the method (None without decisions)."""
        if self.decisions is None:
            return None
        return {m: c.feasible & (self.verdict != "undetermined") for m, c in self.decisions.candidates.items()}


#: Optional inputs counted when not seen (canonical feature names).
NOT_SEEN_INPUTS = ("precip_mm_h", "visibility_m", "pressure_hpa", "solar_wm2")


def weather_masks(features: pd.DataFrame, verdict: np.ndarray, wind_limit_ms: float) -> dict[tuple, np.ndarray]:
    """The rows behind :func:`weather_hours`, each among the rows with good data: ``("weather",
    name)`` and ``("not_seen", input, "hours" | "scan_hours")``."""
    ok = features["data_ok"].to_numpy(dtype=bool)

    def among_ok(mask) -> np.ndarray:
        return np.asarray(mask, dtype=bool) & ok

    wind = features["wind_mean_ms"].to_numpy(dtype=float)
    masks: dict[tuple, np.ndarray] = {
        ("weather", "wind_above_limit"): among_ok(wind > wind_limit_ms),
        ("weather", "fog"): among_ok(features["fog"]),
        ("weather", "precipitation"): among_ok(features["precipitation"]),
        ("weather", "night"): among_ok(features["is_night"]),
    }
    if "gust_estimated" in features:
        masks[("weather", "gusts_estimated")] = among_ok(features["gust_estimated"])
    if "input_dropout" in features:
        masks[("weather", "sensor_dropout")] = among_ok(features["input_dropout"])
    scan = np.asarray(verdict) == "scan"
    for name in NOT_SEEN_INPUTS:
        if name in features:
            missing = ~np.isfinite(features[name].to_numpy(dtype=float))
            masks[("not_seen", name, "hours")] = among_ok(missing)
            masks[("not_seen", name, "scan_hours")] = among_ok(missing & scan)
    return masks


def weather_summary(hours_of, has_rows, keys) -> dict:
    """The :func:`weather_hours` summary from totals of :func:`weather_masks` (``keys``: the masks made)."""
    weather = {key[1]: round(hours_of(key), 2) for key in keys if key[0] == "weather"}
    not_seen = {}
    for key in keys:
        if key[0] == "not_seen" and key[2] == "hours" and has_rows(key):
            name = key[1]
            not_seen[name] = {
                "hours": round(hours_of(key), 2),
                "scan_hours": round(hours_of(("not_seen", name, "scan_hours")), 2),
            }
    return {"weather": weather, "not_seen": not_seen}


def weather_hours(features: pd.DataFrame, verdict: np.ndarray, hours: np.ndarray, wind_limit_ms: float) -> dict:
    """Hours of the weather behind the verdicts, and of the optional inputs the calls could not see.

    ``weather``: mean wind above ``wind_limit_ms``, fog likely, precipitation at or above the
    site threshold (where it was seen), night, gusts estimated, an optional sensor's dropout.
    ``not_seen``: per optional input, the hours it was missing at the sample in use, and how many
    of those hours the advice was scan (each such call names the input as not seen).
    """
    masks = weather_masks(features, verdict, wind_limit_ms)
    return weather_summary(lambda key: float(hours[masks[key]].sum()), lambda key: bool(masks[key].any()), list(masks))
