"""The decision: per-candidate error budget, Ruze efficiency, feasibility and the verdict.

``decide(features, targets, rule_eval, rules, site, odds)`` works on whole columns and returns
a :class:`Decisions` (one verdict per row, with each method's blocking masks);
``explain(decisions, i)`` turns one row into a :class:`Call` with its reasons, ready to render.
The error budgets (see docs/design.md):

* laser:        σ = √(σ_astro² + σ_scan(wind)² + σ_age² + Σ rule terms²), σ_scan = √(noise² + (k v²)²),
                σ_age = √((ageing · age_days)² + (mismatch · |ΔT|)²)
* astronomical: σ = √(σ_astro² + (k v²)² + (drift · |dT/dt| · duration_h)² + Σ rule terms²)

A candidate is feasible when no blocking rule fired, its efficiency reaches the site's
minimum and (when a model gives odds) ``p_usable`` reaches the site's threshold.  The laser is
preferred when within ``laser_preference_efficiency`` of holography.  Rows whose data are not
good (``data_ok`` false) are ``undetermined`` — never ``scan``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import pandas as pd

from advisor.fmt import duration_text, freq_text, odds_text
from advisor.vocabulary import EXIT_CODES, METHOD_LABEL, METHODS, VERDICTS  # noqa: F401 (re-exported)
from advisor.physics.aperture import root_sum_square, ruze_efficiency
from advisor.rules.ruleset import RuleEvaluation, RuleSet, format_message
from advisor.io.site import Site



@dataclass(frozen=True)
class Candidates:
    """Column arrays for one method: budget, efficiency, odds, feasibility."""

    surface_rms_um: np.ndarray
    ruze_efficiency: np.ndarray
    p_usable: np.ndarray          # NaN where no model
    duration_min: float
    blocked: np.ndarray
    feasible: np.ndarray


@dataclass(frozen=True)
class Decisions:
    """Vectorised decisions over a feature frame."""

    features: pd.DataFrame        # row features (``time``, ..., ``source_row``)
    targets: dict[str, float]     # target features: one number each
    verdict: np.ndarray           # object array of VERDICTS
    candidates: dict[str, Candidates]
    rule_eval: RuleEvaluation
    rules: RuleSet
    site: Site
    model_notes: dict[str, list] = field(default_factory=dict)

    def blocking(self, method: str) -> dict[str, np.ndarray]:
        """Rule id → mask of the rows where that blocking rule fired against ``method``."""
        return {r.id: self.rule_eval.fired[r.id] for r in self.rules if r.applies(method) and r.effect == "block"}

    def blocked_by(self, method: str, i: int) -> list[str]:
        """Ids of the blocking rules that fired against ``method`` at row ``i``."""
        return [rule_id for rule_id, mask in self.blocking(method).items() if mask[i]]


@dataclass(frozen=True)
class Reason:
    rule: str
    applies_to: str
    effect: str
    message: str

    def as_dict(self) -> dict:
        return {"rule": self.rule, "applies_to": self.applies_to, "effect": self.effect, "message": self.message}


@dataclass(frozen=True)
class Call:
    """One row's decision with everything needed to render it."""

    verdict: str
    time_utc: pd.Timestamp
    freq_ghz: float
    reasons: list[Reason]
    features: dict
    candidates: dict[str, dict]
    calibrator_name: str
    headline: str


def _rule_error_terms(rule_eval: RuleEvaluation, rules: RuleSet, method: str, n: int) -> np.ndarray:
    """Root-sum-square of the rule error terms for ``method`` (one running sum: constant memory)."""
    total = np.zeros(n)
    for r in rules:
        if r.applies(method) and r.id in rule_eval.error_um:
            term = rule_eval.error_um[r.id]
            total += term * term
    return np.sqrt(total, out=total)


def _blocked(rule_eval: RuleEvaluation, rules: RuleSet, method: str, n: int) -> np.ndarray:
    masks = [rule_eval.fired[r.id] for r in rules if r.applies(method) and r.effect == "block"]
    return np.logical_or.reduce(masks) if masks else np.zeros(n, dtype=bool)


def laser_budget_um(features: pd.DataFrame, site: Site) -> np.ndarray:
    """Expected surface rms after a laser correction [µm]; NaN without a reference."""
    s = site.scan
    gust = features["wind_gust_ms"].to_numpy()
    scan_term = root_sum_square(s.noise_um_at_calm, s.wind_term_um_per_ms2 * gust**2)
    age_term = root_sum_square(s.reference_ageing_um_per_day * features["reference_age_h"].to_numpy() / 24.0,
                               s.reference_mismatch_um_per_c * features["reference_temp_delta_c"].to_numpy())
    return root_sum_square(site.astronomical.surface_rms_um, scan_term, age_term)


def astronomical_budget_um(features: pd.DataFrame, site: Site) -> np.ndarray:
    """Expected surface rms after an out-of-focus holography correction [µm]."""
    a = site.astronomical
    gust = features["wind_gust_ms"].to_numpy()
    drift = a.thermal_drift_um_per_c * np.abs(features["air_temp_rate_c_per_h"].fillna(0.0).to_numpy()) * a.duration_min / 60.0
    return root_sum_square(a.surface_rms_um, a.wind_term_um_per_ms2 * gust**2, drift)


def decide(features: pd.DataFrame, targets: Mapping[str, float], rule_eval: RuleEvaluation, rules: RuleSet,
           site: Site, odds: Mapping[str, np.ndarray] | None = None) -> Decisions:
    """Verdicts for every row of ``features``.

    ``odds`` is the seam for the site classifier: method → probability of a usable result per
    row (NaN where unknown), optionally with ``notes`` (method → per-row text naming what pushed
    the odds most), which become ``Decisions.model_notes``.  Without it, candidates carry
    ``p_usable = NaN`` and the decision rests on rules and the error budget alone.
    """
    n = len(features)
    freq = float(targets["freq_ghz"])
    th = site.thresholds
    base = {"scan": laser_budget_um(features, site), "astronomical": astronomical_budget_um(features, site)}
    durations = {"scan": site.scan.duration_min, "astronomical": site.astronomical.duration_min}
    candidates = {}
    for method in METHODS:
        rms = root_sum_square(base[method], _rule_error_terms(rule_eval, rules, method, n))
        eta = ruze_efficiency(rms, freq)
        p = np.asarray(odds[method], dtype=float) if odds and method in odds else np.full(n, np.nan)
        blocked = _blocked(rule_eval, rules, method, n)
        odds_ok = np.isnan(p) | (p >= th.min_p_usable)
        feasible = ~blocked & np.isfinite(rms) & (eta >= th.min_ruze_efficiency) & odds_ok
        candidates[method] = Candidates(rms, eta, p, durations[method], blocked, feasible)

    scan, astro = candidates["scan"], candidates["astronomical"]
    prefer_scan = scan.ruze_efficiency >= astro.ruze_efficiency - th.laser_preference_efficiency
    verdict = np.full(n, "postpone", dtype=object)
    verdict[astro.feasible] = "astronomical"
    verdict[scan.feasible & (~astro.feasible | prefer_scan)] = "scan"
    verdict[~features["data_ok"].to_numpy(dtype=bool)] = "undetermined"
    # An odds mapping may carry per-row explanations (advisor.model.inference.ModelOdds.notes).
    return Decisions(features, dict(targets), verdict, candidates, rule_eval, rules, site,
                     dict(getattr(odds, "notes", None) or {}))


def _data_reasons(row: pd.Series, site: Site) -> list[Reason]:
    """Why the data cannot support a call."""
    reasons = []
    age = row["data_age_min"]
    if not np.isfinite(age):
        reasons.append(Reason("data", "both", "block", "No good weather sample at or before this time."))
    elif age > site.feed.max_feed_age_min:
        reasons.append(Reason("data", "both", "block",
                              f"Last good weather sample is {duration_text(age)} old "
                              f"(limit {duration_text(site.feed.max_feed_age_min)}): "
                              "the feed looks stale; the figures below are from that sample."))
    if not reasons:
        reasons.append(Reason("data", "both", "block",
                              "The latest weather sample is implausible or incomplete; no call is made on bad data."))
    return reasons


def explain(decisions: Decisions, i: int) -> Call:
    """The call for row ``i`` with its reasons for and against each method."""
    f = decisions.features
    row = f.iloc[i]
    site = decisions.site
    th = site.thresholds
    verdict = str(decisions.verdict[i])
    values = {k: (bool(v) if isinstance(v, (bool, np.bool_)) else v) for k, v in row.items()
              if k not in ("time", "source_row")}
    values.update(decisions.targets)
    reasons: list[Reason] = []
    if verdict == "undetermined":
        reasons.extend(_data_reasons(row, site))
    for rule in decisions.rules:
        if decisions.rule_eval.fired[rule.id][i]:
            effect = rule.effect
            message = format_message(rule.message, values)
            if rule.error is not None:
                term = decisions.rule_eval.error_um[rule.id][i]
                message = f"{message} (+{term:.0f} µm in quadrature)"
            reasons.append(Reason(rule.id, rule.applies_to, effect, message))
    freq = float(decisions.targets["freq_ghz"])
    req = float(decisions.targets["required_surface_rms_um"])
    cands = {}
    for method in METHODS:
        c = decisions.candidates[method]
        rms, eta, p = float(c.surface_rms_um[i]), float(c.ruze_efficiency[i]), float(c.p_usable[i])
        label = METHOD_LABEL[method]
        if np.isfinite(rms) and eta < th.min_ruze_efficiency:    # infeasible: says so first
            reasons.append(Reason(f"budget.{method}", method, "block",
                                  f"{label}: Ruze efficiency {eta:.2f} is below the site minimum "
                                  f"{th.min_ruze_efficiency:.2f} (expected {rms:.0f} µm rms at {freq_text(freq)}; "
                                  f"λ/16 = {req:.0f} µm)"))
        elif np.isfinite(rms):
            reasons.append(Reason(f"budget.{method}", method, "info",
                                  f"{label}: expected {rms:.0f} µm rms → Ruze efficiency {eta:.2f} at "
                                  f"{freq_text(freq)} (λ/16 = {req:.0f} µm)"))
        if np.isfinite(p) and p < th.min_p_usable:
            reasons.append(Reason(f"model.{method}", method, "block",
                                  f"{label}: site model gives only {odds_text(p)} odds of a usable result "
                                  f"(threshold {th.min_p_usable:.0%})"))
        for note in decisions.model_notes.get(method, [])[i:i + 1]:
            if note:
                reasons.append(Reason(f"model.{method}", method, "info", note))
        cands[method] = {
            "feasible": bool(c.feasible[i]) and verdict != "undetermined",
            "surface_rms_um": None if not np.isfinite(rms) else round(rms, 1),
            "ruze_efficiency": None if not np.isfinite(eta) else round(eta, 4),
            "p_usable": None if not np.isfinite(p) else round(p, 4),
            "duration_min": c.duration_min,
            "blocked_by": decisions.blocked_by(method, i),
        }
    reasons.extend(_choice_reasons(verdict, cands, site))
    headline = _headline(verdict, cands, row)
    return Call(verdict=verdict, time_utc=row["time"], freq_ghz=freq, reasons=reasons, features=values,
                candidates=cands, calibrator_name=str(row.get("calibrator_name", "")), headline=headline)


def _choice_reasons(verdict: str, cands: dict, site: Site) -> list[Reason]:
    """Why the chosen method won over the other one, when both were feasible."""
    scan, astro = cands["scan"], cands["astronomical"]
    if not (scan["feasible"] and astro["feasible"]):
        return []
    margin = site.thresholds.laser_preference_efficiency
    gap = astro["ruze_efficiency"] - scan["ruze_efficiency"]
    if verdict == "scan":
        text = (f"Both methods are feasible; the laser is preferred: its efficiency is within {margin:.2f} of "
                f"holography's ({gap:+.2f}) and it takes {scan['duration_min']:.0f} min instead of "
                f"{astro['duration_min']:.0f} min of telescope time.")
    else:
        text = (f"Both methods are feasible; holography's efficiency is {gap:.2f} better, more than the "
                f"{margin:.2f} margin that favours the quicker laser scan.")
    return [Reason("choice", "both", "info", text)]


def _headline(verdict: str, cands: dict, row: pd.Series) -> str:
    if verdict == "scan":
        c = cands["scan"]
        return f"Scan the reflector now: laser correction expected to leave {c['surface_rms_um']:.0f} µm rms (η {c['ruze_efficiency']:.2f})."
    if verdict == "astronomical":
        c = cands["astronomical"]
        cal = row.get("calibrator_name") or "a calibrator"
        return (f"Use the astronomical method on {cal}: expected {c['surface_rms_um']:.0f} µm rms "
                f"(η {c['ruze_efficiency']:.2f}); take a fresh reference scan afterwards if the laser can see.")
    if verdict == "postpone":
        return "Postpone: neither method can deliver a useful surface for this session now."
    return "Undetermined: the weather data cannot support a call. Do not scan on this advice."
