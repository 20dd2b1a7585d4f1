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

from advisor.budget import best_surface_rms_um
from advisor.io.site import Site
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
    p_usable: np.ndarray  # NaN where no model
    duration_min: float
    blocked: np.ndarray
    feasible: np.ndarray
    meets_requirement: np.ndarray
    blocks: dict[str, np.ndarray] = field(default_factory=dict)  # non-rule block id -> mask


@dataclass(frozen=True)
class Decisions:
    """Vectorised decisions over a feature frame."""

    features: pd.DataFrame  # row features (``time``, ..., ``source_row``)
    targets: dict[str, float]  # target features: one number each
    verdict: np.ndarray  # object array of VERDICTS
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
    unseen_inputs: tuple[str, ...] = ()  # optional inputs (canonical names) missing at the sample in use


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


def decide(
    features: pd.DataFrame,
    targets: Mapping[str, float],
    rule_eval: RuleEvaluation,
    rules: RuleSet,
    site: Site,
    odds: Mapping[str, np.ndarray] | None = None,
) -> Decisions:
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
        candidates[method] = Candidates(
            rms,
            eta,
            p,
            durations[method],
            blocked,
            feasible,
            rms <= required,
            {k: v for k, v in blocks.items() if v.any()},
        )

    scan, astro = candidates["scan"], candidates["astronomical"]
    session_min = 60.0 * th.session_hours
    if session_min > 0:  # the session's economics, on the figures as displayed
        prefer_scan = (
            session_value(_as_shown(scan.ruze_efficiency), _as_shown(scan.p_usable), scan.duration_min, session_min)
            >= session_value(
                _as_shown(astro.ruze_efficiency), _as_shown(astro.p_usable), astro.duration_min, session_min
            )
            - 1e-12
        )
    else:
        prefer_scan = (
            _as_shown(scan.ruze_efficiency) >= _as_shown(astro.ruze_efficiency) - th.laser_preference_efficiency - 1e-9
        )
    verdict = np.full(n, "postpone", dtype=object)
    verdict[astro.feasible] = "astronomical"
    verdict[scan.feasible & (~astro.feasible | prefer_scan)] = "scan"
    uncorrected = site.astronomical.uncorrected_surface_rms_um
    if uncorrected is not None and uncorrected <= required:
        verdict[:] = "no_correction"
    verdict[data_bad] = "undetermined"
    # An odds mapping may carry per-row explanations (advisor.model.inference.ModelOdds.notes).
    return Decisions(
        features,
        dict(targets),
        verdict,
        candidates,
        rule_eval,
        rules,
        site,
        dict(getattr(odds, "notes", None) or {}),
        best,
        model_extrapolated=dict(getattr(odds, "extrapolated", None) or {}),
        model_extrapolation=dict(getattr(odds, "extrapolation", None) or {}),
    )
