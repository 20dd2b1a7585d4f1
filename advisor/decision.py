"""The decision: per-candidate surface, Ruze efficiency, feasibility and the verdict.

``decide(features, targets, rule_eval, rules, site, odds)`` works on whole columns and returns
a :class:`Decisions` (one verdict per row, with each method's blocking masks);
``explain(decisions, i)`` turns one row into a :class:`Call` with its reasons, ready to render.

Each method's expected surface is its error budget from the features (see
:func:`advisor.features.laser_surface_rms_um`) plus the error terms of the rules that fired, in
quadrature.  A method is feasible when nothing blocks it:

* a blocking rule that fired (its id);
* ``efficiency.min`` — its Ruze efficiency is below the site's minimum in this weather;
* ``target.unreachable`` — no weather could bring it to the site's minimum at this frequency;
* ``model.<method>`` — the site model's odds of a usable result are below the site's threshold;
* ``data`` — the weather data cannot support a call (the row is ``undetermined``, never ``scan``);
* ``data.dropout`` (laser only) — an optional sensor that was reporting (visibility,
  precipitation, ...) fell silent at the sample in use: fog or rain cannot be ruled out.

A rule whose condition needs an optional input that is missing neither fires nor clears
(:class:`advisor.rules.ruleset.RuleEvaluation` ``unknown``); the call is made on what is known
and its reasons say which rules could not be checked and which inputs were not seen.

Between two feasible methods the one worth more over the session wins (:func:`session_value`:
η² × (session − duration) / session × odds, with the figures as displayed), so holography's extra
half hour is taken only when the session is long enough to pay it back; without a session
length (``thresholds.session_hours: 0``) the laser wins when its efficiency is within
``laser_preference_efficiency``.  When the site's uncorrected surface already meets the
requirement the call is ``no_correction``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from advisor import fmt
from advisor.features import best_surface_rms_um
from advisor.fmt import duration_text, freq_text, odds_text
from advisor.io.site import CANONICAL_COLUMNS, Site
from advisor.physics.aperture import root_sum_square, ruze_efficiency
from advisor.rules.ruleset import RuleEvaluation, RuleSet
from advisor.vocabulary import EXIT_CODES, METHOD_LABEL, METHODS, VERDICTS  # noqa: F401 (re-exported)

#: Ids of the blocks that are not rules (they appear in ``blocked_by`` like rule ids).
DATA_BLOCK = "data"
DROPOUT_BLOCK = "data.dropout"
#: Id of the reason listing the optional inputs not seen at the sample in use.
UNSEEN_REASON = "data.unseen"
EFFICIENCY_BLOCK = "efficiency.min"
UNREACHABLE_BLOCK = "target.unreachable"


def model_block(method: str) -> str:
    """Id of the block the site model puts on ``method``."""
    return f"model.{method}"


@dataclass(frozen=True)
class Candidates:
    """Column arrays for one method: surface, efficiency, odds, feasibility and what blocks it."""

    surface_rms_um: np.ndarray
    ruze_efficiency: np.ndarray
    p_usable: np.ndarray          # NaN where no model
    duration_min: float
    blocked: np.ndarray
    feasible: np.ndarray
    meets_requirement: np.ndarray
    blocks: dict[str, np.ndarray] = field(default_factory=dict)  # non-rule block id -> mask


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
    best_surface_rms_um: dict[str, float] = field(default_factory=dict)
    #: method → per-row mask: the site model's odds are extrapolated (a term outside its training range)
    model_extrapolated: dict[str, np.ndarray] = field(default_factory=dict)
    #: method → per-row sentence naming what lies outside the training range (None inside)
    model_extrapolation: dict[str, list] = field(default_factory=dict)

    def blocking(self, method: str) -> dict[str, np.ndarray]:
        """Block id → mask of the rows where it blocks ``method``: rules first, then the others."""
        masks = {r.id: self.rule_eval.fired[r.id] for r in self.rules if r.applies(method) and r.effect == "block"}
        masks.update(self.candidates[method].blocks)
        return masks

    def blocked_by(self, method: str, i: int) -> list[str]:
        """Ids of everything that blocks ``method`` at row ``i``."""
        return [block_id for block_id, mask in self.blocking(method).items() if mask[i]]


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
    unseen_inputs: tuple[str, ...] = ()   # optional inputs (canonical names) missing at the sample in use


def _rule_error_terms(rule_eval: RuleEvaluation, rules: RuleSet, method: str, n: int) -> np.ndarray:
    """Root-sum-square of the rule error terms for ``method`` (one running sum: constant memory)."""
    total = np.zeros(n)
    for r in rules:
        if r.applies(method) and r.id in rule_eval.error_um:
            term = rule_eval.error_um[r.id]
            total += term * term
    return np.sqrt(total, out=total)


def _rule_blocked(rule_eval: RuleEvaluation, rules: RuleSet, method: str, n: int) -> np.ndarray:
    blocked = np.zeros(n, dtype=bool)
    for r in rules:
        if r.applies(method) and r.effect == "block":
            blocked |= rule_eval.fired[r.id]
    return blocked


def _as_shown(efficiency: np.ndarray) -> np.ndarray:
    """Efficiencies (and odds) as the screen shows them (two decimals), so the choice never contradicts them."""
    return np.round(efficiency, 2)


def session_value(efficiency, p_usable, duration_min, session_min):
    """What a correction is worth over a session, as a fraction of a perfect session [1].

    Parameters
    ----------
    efficiency : numeric
        Efficiency the correction leaves (Ruze η, or η with other factors). [1]
    p_usable : numeric
        Odds that the correction succeeds; NaN (no model) counts as 1. [1]
    duration_min : numeric
        Telescope time the correction takes. [min]
    session_min : float
        Length of the session. [min]

    Returns
    -------
    ndarray (float for scalar input)
        η² × max(S − d, 0) / S × p.

    Notes
    -----
    The signal-to-noise ratio of an observation grows as η √t (radiometer equation), so the
    integration time to a given sensitivity scales as 1/η²: a session observed at η for S − d
    minutes is worth η² (S − d) minutes at η = 1.  With holography at 230 µm against the laser at
    250 µm at 100 GHz (figures of the trade, common practice), η 0.39 against 0.33 means 1.4× the
    integration time with the laser, and holography's extra 33 min pay back after about 80 min.

    References
    ----------
    Dicke, R. H. (1946). Rev. Sci. Instrum. 17, 268 (the radiometer equation).
    """
    p = np.asarray(p_usable, dtype=float)
    odds = np.where(np.isfinite(p), p, 1.0)
    observed = np.clip(float(session_min) - np.asarray(duration_min, dtype=float), 0.0, None) / float(session_min)
    value = np.asarray(efficiency, dtype=float) ** 2 * observed * odds
    return float(value) if value.ndim == 0 else value


def decide(features: pd.DataFrame, targets: Mapping[str, float], rule_eval: RuleEvaluation, rules: RuleSet,
           site: Site, odds: Mapping[str, np.ndarray] | None = None) -> Decisions:
    """Verdicts for every row of ``features``.

    ``odds`` is the seam for the site classifier: method → probability of a usable result per
    row (NaN where unknown), optionally with ``notes`` (method → per-row text naming what pushed
    the odds most), which become ``Decisions.model_notes``, and ``extrapolated``/``extrapolation``
    (method → per-row mask and sentence: the odds lie outside what the model was trained on).  Without it, candidates carry
    ``p_usable = NaN`` and the decision rests on rules and the error budget alone.
    """
    n = len(features)
    freq = float(targets["freq_ghz"])
    required = float(targets["required_surface_rms_um"])
    th = site.thresholds
    data_bad = ~features["data_ok"].to_numpy(dtype=bool)
    dropout = features["input_dropout"].to_numpy(dtype=bool) if "input_dropout" in features else np.zeros(n, bool)
    best = best_surface_rms_um(site)
    durations = {"scan": site.scan.duration_min, "astronomical": site.astronomical.duration_min}
    candidates = {}
    for method in METHODS:
        base = features[f"{method}_surface_rms_um"].to_numpy(dtype=float)
        rms = root_sum_square(base, _rule_error_terms(rule_eval, rules, method, n))
        eta = ruze_efficiency(rms, freq)
        p = np.asarray(odds[method], dtype=float) if odds and method in odds else np.full(n, np.nan)
        unreachable = bool(ruze_efficiency(best[method], freq) < th.min_ruze_efficiency)
        blocks = {
            UNREACHABLE_BLOCK: np.full(n, unreachable),
            EFFICIENCY_BLOCK: np.isfinite(rms) & ~(eta >= th.min_ruze_efficiency) & (not unreachable),
            model_block(method): np.isfinite(p) & (p < th.min_p_usable),
            DATA_BLOCK: data_bad,
        }
        if method == "scan":
            blocks[DROPOUT_BLOCK] = dropout & ~data_bad
        blocked = _rule_blocked(rule_eval, rules, method, n)
        for mask in blocks.values():
            blocked = blocked | mask
        feasible = ~blocked & np.isfinite(rms)
        candidates[method] = Candidates(rms, eta, p, durations[method], blocked, feasible, rms <= required,
                                        {k: v for k, v in blocks.items() if v.any()})

    scan, astro = candidates["scan"], candidates["astronomical"]
    session_min = 60.0 * th.session_hours
    if session_min > 0:  # the session's economics, on the figures as displayed
        prefer_scan = (session_value(_as_shown(scan.ruze_efficiency), _as_shown(scan.p_usable), scan.duration_min, session_min)
                       >= session_value(_as_shown(astro.ruze_efficiency), _as_shown(astro.p_usable),
                                        astro.duration_min, session_min) - 1e-12)
    else:
        prefer_scan = (_as_shown(scan.ruze_efficiency)
                       >= _as_shown(astro.ruze_efficiency) - th.laser_preference_efficiency - 1e-9)
    verdict = np.full(n, "postpone", dtype=object)
    verdict[astro.feasible] = "astronomical"
    verdict[scan.feasible & (~astro.feasible | prefer_scan)] = "scan"
    uncorrected = site.astronomical.uncorrected_surface_rms_um
    if uncorrected is not None and uncorrected <= required:
        verdict[:] = "no_correction"
    verdict[data_bad] = "undetermined"
    # An odds mapping may carry per-row explanations (advisor.model.inference.ModelOdds.notes).
    return Decisions(features, dict(targets), verdict, candidates, rule_eval, rules, site,
                     dict(getattr(odds, "notes", None) or {}), best,
                     model_extrapolated=dict(getattr(odds, "extrapolated", None) or {}),
                     model_extrapolation=dict(getattr(odds, "extrapolation", None) or {}))


def _data_reasons(row: pd.Series, site: Site) -> list[Reason]:
    """Why the data cannot support a call."""
    reasons = []
    age = row["data_age_min"]
    limit = float(site.feed.age_limit_min(row.get("feed_cadence_min", np.nan)))
    if not np.isfinite(age):
        reasons.append(Reason(DATA_BLOCK, "both", "block", "No good weather sample at or before this time."))
    elif age > limit:
        reasons.append(Reason(DATA_BLOCK, "both", "block",
                              f"Last good weather sample is {duration_text(age)} old "
                              f"(limit {duration_text(limit)}): "
                              "the feed looks stale; the figures below are from that sample."))
    if not reasons:
        reasons.append(Reason(DATA_BLOCK, "both", "block",
                              "The latest weather sample is implausible or incomplete; no call is made on bad data."))
    return reasons


def _requirement_text(targets: Mapping[str, float]) -> str:
    return f"λ/{targets['surface_requirement_fraction']:g} = {targets['required_surface_rms_um']:.0f} µm"


def _rms_for_efficiency(efficiency: float, freq_ghz: float) -> float:
    """The surface rms that gives ``efficiency`` at ``freq_ghz`` (inverse Ruze) [µm]."""
    wavelength_um = 299_792_458.0 / (freq_ghz * 1e9) * 1e6
    return float(wavelength_um / (4.0 * np.pi) * np.sqrt(-np.log(efficiency)))


def _unreachable_reason(decisions: Decisions) -> Reason:
    t, th = decisions.targets, decisions.site.thresholds
    best = min(decisions.best_surface_rms_um.values())
    eta = float(ruze_efficiency(best, t["freq_ghz"]))
    need = _rms_for_efficiency(th.min_ruze_efficiency, t["freq_ghz"])
    return Reason(UNREACHABLE_BLOCK, "both", "block",
                  f"Not reachable at {t['freq_ghz']:g} GHz: the best surface, {best:.0f} µm, gives η {eta:.2f}; "
                  f"the site minimum η {th.min_ruze_efficiency:.2f} needs ≤ {need:.0f} µm. No weather changes that: "
                  "observe at a lower frequency.")


def explain(decisions: Decisions, i: int) -> Call:
    """The call for row ``i`` with its reasons for and against each method."""
    f = decisions.features
    row = f.iloc[i]
    site = decisions.site
    th = site.thresholds
    targets = decisions.targets
    verdict = str(decisions.verdict[i])
    values = {k: (bool(v) if isinstance(v, (bool, np.bool_)) else v) for k, v in row.items()
              if k not in ("time", "source_row")}
    values.update(targets)
    reasons: list[Reason] = []
    if verdict == "undetermined":
        reasons.extend(_data_reasons(row, site))
    unreachable = all(UNREACHABLE_BLOCK in decisions.candidates[m].blocks for m in METHODS)
    if unreachable and verdict != "no_correction":
        reasons.append(_unreachable_reason(decisions))
    for rule in decisions.rules:
        if decisions.rule_eval.fired[rule.id][i]:
            message = rule.message_for(values)
            if rule.error is not None:
                term = decisions.rule_eval.error_um[rule.id][i]
                message = f"{message} (+{term:.0f} µm in quadrature)"
            if values.get("gust_estimated") and rule.condition.names & GUST_FEATURES:
                message = f"{message} (gusts estimated: the station has no gust sensor)"
            reasons.append(Reason(rule.id, rule.applies_to, rule.effect, message))
    unseen = unseen_inputs(values)
    if verdict != "undetermined":
        reasons.extend(_input_reasons(decisions, i, values, unseen))
    freq = float(targets["freq_ghz"])
    cands = {}
    for method in METHODS:
        c = decisions.candidates[method]
        rms, eta, p = float(c.surface_rms_um[i]), float(c.ruze_efficiency[i]), float(c.p_usable[i])
        label = METHOD_LABEL[method]
        if np.isfinite(rms):
            meets = "meets" if rms <= targets["required_surface_rms_um"] else "misses"
            msg = (f"{label}: expected {rms:.0f} µm rms → Ruze efficiency {eta:.2f} at {freq_text(freq)} "
                   f"({meets} {_requirement_text(targets)})")
            blocked_low = EFFICIENCY_BLOCK in c.blocks and c.blocks[EFFICIENCY_BLOCK][i]
            if blocked_low:
                msg += f"; below the site minimum η {th.min_ruze_efficiency:.2f}"
            reasons.append(Reason(EFFICIENCY_BLOCK if blocked_low else f"budget.{method}", method,
                                  "block" if blocked_low else "info", msg))
        if np.isfinite(p) and p < th.min_p_usable:
            reasons.append(Reason(model_block(method), method, "block",
                                  f"{label}: site model gives only {odds_text(p)} odds of a usable result "
                                  f"(threshold {th.min_p_usable:.0%})"))
        for note in decisions.model_notes.get(method, [])[i:i + 1]:
            if note:
                reasons.append(Reason(f"model.{method}", method, "info", note))
        for warning in decisions.model_extrapolation.get(method, [])[i:i + 1]:
            if warning:
                reasons.append(Reason(f"model.{method}", method, "warn", warning))
        extrapolated = decisions.model_extrapolated.get(method)
        cands[method] = {
            "feasible": bool(c.feasible[i]) and verdict != "undetermined",
            "surface_rms_um": None if not np.isfinite(rms) else round(rms, 1),
            "ruze_efficiency": None if not np.isfinite(eta) else round(eta, 4),
            "meets_requirement": bool(c.meets_requirement[i]) if np.isfinite(rms) else None,
            "requirement_margin_um": None if not np.isfinite(rms) else round(targets["required_surface_rms_um"] - rms, 1),
            "p_usable": None if not np.isfinite(p) else round(p, 4),
            "extrapolated": bool(extrapolated[i]) if extrapolated is not None and np.isfinite(p) else False,
            "duration_min": c.duration_min,
            "blocked_by": decisions.blocked_by(method, i),
        }
    reasons.extend(_choice_reasons(verdict, cands, site))
    headline = _headline(verdict, cands, row, decisions)
    return Call(verdict=verdict, time_utc=row["time"], freq_ghz=freq, reasons=reasons, features=values,
                candidates=cands, calibrator_name=str(row.get("calibrator_name", "")), headline=headline,
                unseen_inputs=unseen)


#: Features computed from the gusts: a reason reading them says when the gusts are estimated.
GUST_FEATURES = frozenset({"wind_gust_ms", "gust_factor", "wind_pointing_error_arcsec", "pointing_beam_fraction",
                           "scan_surface_rms_um", "astronomical_surface_rms_um", "scan_surface_margin_um",
                           "astronomical_surface_margin_um"})
#: The optional inputs a call can be made without, as the reasons name them.
OPTIONAL_INPUT_WORDS = {"visibility_m": "visibility", "precip_mm_h": "precipitation", "pressure_hpa": "pressure",
                        "solar_wm2": "irradiance"}


def unseen_inputs(values: Mapping) -> tuple[str, ...]:
    """The optional inputs missing (NaN) in a row's features, canonical names."""
    out = []
    for name in OPTIONAL_INPUT_WORDS:
        value = values.get(name)
        if value is None or (isinstance(value, (float, np.floating)) and not np.isfinite(value)):
            out.append(name)
    return tuple(out)


def _named(names, site: Site) -> str:
    """'visibility ('Hvis (m)'), precipitation' — the inputs with the logger column each is read from."""
    parts = []
    for name in names:
        column = site.feed.source_of(name)
        word = OPTIONAL_INPUT_WORDS.get(name, name)
        parts.append(word if column == name else f"{word} ('{column}')")
    return ", ".join(parts)


def _input_reasons(decisions: Decisions, i: int, values: Mapping, unseen: tuple[str, ...]) -> list[Reason]:
    """A sensor dropout, the inputs not seen, and the rules that could not be checked without them."""
    site = decisions.site
    reasons = []
    bits = int(decisions.features["dropout_bits"].iloc[i]) if "dropout_bits" in decisions.features else 0
    dropped = [n for n in OPTIONAL_INPUT_WORDS if bits & (1 << CANONICAL_COLUMNS.index(n))]
    if values.get("input_dropout") and dropped:
        reasons.append(Reason(DROPOUT_BLOCK, "scan", "block",
                              f"{_named(dropped, site)} stopped reporting at the sample in use after reporting "
                              "steadily: a sensor dropout; no laser scan until it reports again (fog or rain cannot "
                              "be ruled out)."))
    if unseen:
        fog_note = " Fog is judged from the dew-point spread alone." if "visibility_m" in unseen else ""
        reasons.append(Reason(UNSEEN_REASON, "both", "info",
                              f"Not seen at this time: {_named(unseen, site)}. The call rests on the other "
                              f"inputs.{fog_note}"))
    for rule in decisions.rules:
        undecided = decisions.rule_eval.unknown.get(rule.id)
        if undecided is None or not undecided[i]:
            continue
        missing = [n for n in sorted(rule.condition.needs_inputs) if n in unseen]
        words = ", ".join(OPTIONAL_INPUT_WORDS.get(n, n) for n in missing) or "an optional input"
        would = {"block": "block", "warn": "warn about", "add_error": "add an error to"}.get(rule.effect, "affect")
        applies = "both methods" if rule.applies_to == "both" else METHOD_LABEL.get(rule.applies_to, rule.applies_to)
        reasons.append(Reason(rule.id, rule.applies_to, "warn" if rule.effect == "block" else "info",
                              f"Not checked: needs {words}, not seen at this time; this rule could {would} "
                              f"{applies} and cannot be ruled out."))
    return reasons


def _minutes_text(minutes: float) -> str:
    """A duration to the nearest 10 min: 'about 80 min', 'about 2 h 10 min'."""
    m = int(round(minutes / 10.0) * 10)
    return f"about {m} min" if m < 120 else f"about {fmt.duration_text(m)}"


def _choice_reasons(verdict: str, cands: dict, site: Site) -> list[Reason]:
    """Why the chosen method won over the other one, when both were feasible (figures as shown)."""
    scan, astro = cands["scan"], cands["astronomical"]
    if not (scan["feasible"] and astro["feasible"]) or verdict not in METHODS:
        return []
    session_min = 60.0 * site.thresholds.session_hours
    if session_min <= 0:
        return _margin_choice_reasons(verdict, cands, site)
    other = "astronomical" if verdict == "scan" else "scan"
    chosen, alt = cands[verdict], cands[other]
    label = {"scan": "the laser", "astronomical": "holography"}

    def per_minute(c: dict) -> float:  # η² × odds, as displayed
        p = 1.0 if c["p_usable"] is None else round(c["p_usable"], 2)
        return round(c["ruze_efficiency"], 2) ** 2 * p

    figures = f"η {round(alt['ruze_efficiency'], 2):.2f} against {round(chosen['ruze_efficiency'], 2):.2f}"
    if alt["p_usable"] is not None and chosen["p_usable"] is not None:
        figures += f", odds {alt['p_usable']:.0%} against {chosen['p_usable']:.0%}"
    extra = alt["duration_min"] - chosen["duration_min"]
    session = f"{site.thresholds.session_hours:g} h session"
    g_chosen, g_alt = per_minute(chosen), per_minute(alt)
    if g_chosen >= g_alt and extra >= 0:
        text = (f"{label[verdict].capitalize()} is quicker ({chosen['duration_min']:.0f} min, not "
                f"{alt['duration_min']:.0f} min) and {label[other]}'s surface would not shorten the integration "
                f"over the {session} ({figures}).")
    elif g_chosen > g_alt:   # better per minute, and longer: its extra minutes pay back
        ratio = g_chosen / g_alt if g_alt > 0 else float("inf")
        payback = -extra / (ratio - 1.0) if np.isfinite(ratio) else 0.0
        text = (f"Over the {session} {label[verdict]}'s extra {-extra:.0f} min pay back after "
                f"{_minutes_text(payback)} of observing: with {label[other]}'s surface "
                f"({figures.replace('against', 'instead of', 1)}) the session would need {ratio:.2f}× the "
                "integration time.")
    else:                    # the other is better per minute but takes longer: not paid back in this session
        ratio = g_alt / g_chosen if g_chosen > 0 else float("inf")
        payback = extra / (ratio - 1.0) if ratio > 1.0 else float("inf")
        saving = 1.0 - 1.0 / ratio if ratio > 0 else 0.0
        when = f"only after {_minutes_text(payback)} of observing" if np.isfinite(payback) else "never"
        text = (f"{label[other].capitalize()}'s extra {extra:.0f} min would pay back {when}, more than the "
                f"{session} leaves: its surface would save {saving:.0%} of the integration time ({figures}).")
    return [Reason("choice", "both", "info", text)]


def _margin_choice_reasons(verdict: str, cands: dict, site: Site) -> list[Reason]:
    """The choice without a session length: the laser within a fixed efficiency margin."""
    scan, astro = cands["scan"], cands["astronomical"]
    margin = site.thresholds.laser_preference_efficiency
    gap = round(astro["ruze_efficiency"], 2) - round(scan["ruze_efficiency"], 2)
    if verdict == "scan" and gap <= 0:
        text = (f"Both methods are feasible; the laser's efficiency is as good or better, and it takes "
                f"{scan['duration_min']:.0f} min, not {astro['duration_min']:.0f} min.")
    elif verdict == "scan":
        text = (f"Both methods are feasible; holography is only {gap:.2f} better (within the {margin:.2f} that "
                f"favours the laser), and the laser takes {scan['duration_min']:.0f} min, not "
                f"{astro['duration_min']:.0f} min.")
    else:
        text = (f"Both methods are feasible; holography's efficiency is {gap:.2f} better, more than the "
                f"{margin:.2f} that favours the quicker laser scan.")
    return [Reason("choice", "both", "info", text)]


def _headline(verdict: str, cands: dict, row: pd.Series, decisions: Decisions) -> str:
    targets = decisions.targets
    requirement = _requirement_text(targets)
    if verdict in METHODS:
        c = cands[verdict]
        fit = ("within " if c["meets_requirement"] else "which misses ") + requirement
        if verdict == "scan":
            return (f"Scan the reflector now: laser correction expected to leave {c['surface_rms_um']:.0f} µm rms "
                    f"(η {c['ruze_efficiency']:.2f}), {fit}.")
        cal = row.get("calibrator_name") or "a calibrator"
        return (f"Use the astronomical method on {cal}: expected {c['surface_rms_um']:.0f} µm rms "
                f"(η {c['ruze_efficiency']:.2f}), {fit}; take a fresh reference scan afterwards if the laser can see.")
    if verdict == "no_correction":
        return (f"No correction needed at {targets['freq_ghz']:g} GHz: the uncorrected surface "
                f"({decisions.site.astronomical.uncorrected_surface_rms_um:.0f} µm) already meets {requirement}.")
    if verdict == "postpone":
        if all(UNREACHABLE_BLOCK in decisions.candidates[m].blocks for m in METHODS):
            best = min(decisions.best_surface_rms_um.values())
            return (f"Not reachable at {targets['freq_ghz']:g} GHz: the best correction leaves {best:.0f} µm; "
                    f"no weather makes this frequency worthwhile.")
        return "Postpone: neither method can deliver a useful surface for this session now."
    return "Undetermined: the weather data cannot support a call. Do not scan on this advice."
