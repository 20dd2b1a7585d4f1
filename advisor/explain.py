"""One row's decision in words: the call, its reasons for and against each method, and its headline.

    call = explain(decisions, i)     # a Call, ready for any view

Pure: :class:`advisor.decision.Decisions` in, :class:`advisor.decision.Call` out.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from advisor import fmt
from advisor.decision import (
    DATA_BLOCK,
    DROPOUT_BLOCK,
    EFFICIENCY_BLOCK,
    UNREACHABLE_BLOCK,
    UNSEEN_REASON,
    Call,
    Decisions,
    Reason,
    model_block,
)
from advisor.fmt import duration_text, freq_text, odds_text
from advisor.io.site import CANONICAL_COLUMNS, Site
from advisor.physics.aperture import ruze_efficiency
from advisor.vocabulary import EXIT_CODES, METHOD_LABEL, METHODS, VERDICTS  # noqa: F401 (re-exported)


def _data_reasons(row: pd.Series, site: Site) -> list[Reason]:
    """Why the data cannot support a call."""
    reasons = []
    age = row["data_age_min"]
    limit = float(site.feed.age_limit_min(row.get("feed_cadence_min", np.nan)))
    if not np.isfinite(age):
        reasons.append(Reason(DATA_BLOCK, "both", "block", "No good weather sample at or before this time."))
    elif age > limit:
        reasons.append(
            Reason(
                DATA_BLOCK,
                "both",
                "block",
                f"Last good weather sample is {duration_text(age)} old "
                f"(limit {duration_text(limit)}): "
                "the feed looks stale; the figures below are from that sample.",
            )
        )
    if not reasons:
        reasons.append(
            Reason(
                DATA_BLOCK,
                "both",
                "block",
                "The latest weather sample is implausible or incomplete; no call is made on bad data.",
            )
        )
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
    return Reason(
        UNREACHABLE_BLOCK,
        "both",
        "block",
        f"Not reachable at {t['freq_ghz']:g} GHz: the best surface, {best:.0f} µm, gives η {eta:.2f}; "
        f"the site minimum η {th.min_ruze_efficiency:.2f} needs ≤ {need:.0f} µm. No weather changes that: "
        "observe at a lower frequency.",
    )


def explain(decisions: Decisions, i: int) -> Call:
    """The call for row ``i`` with its reasons for and against each method."""
    f = decisions.features
    row = f.iloc[i]
    site = decisions.site
    th = site.thresholds
    targets = decisions.targets
    verdict = str(decisions.verdict[i])
    values = {
        k: (bool(v) if isinstance(v, (bool, np.bool_)) else v)
        for k, v in row.items()
        if k not in ("time", "source_row")
    }
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
            msg = (
                f"{label}: expected {rms:.0f} µm rms → Ruze efficiency {eta:.2f} at {freq_text(freq)} "
                f"({meets} {_requirement_text(targets)})"
            )
            blocked_low = EFFICIENCY_BLOCK in c.blocks and c.blocks[EFFICIENCY_BLOCK][i]
            if blocked_low:
                msg += f"; below the site minimum η {th.min_ruze_efficiency:.2f}"
            reasons.append(
                Reason(
                    EFFICIENCY_BLOCK if blocked_low else f"budget.{method}",
                    method,
                    "block" if blocked_low else "info",
                    msg,
                )
            )
        if np.isfinite(p) and p < th.min_p_usable:
            reasons.append(
                Reason(
                    model_block(method),
                    method,
                    "block",
                    f"{label}: site model gives only {odds_text(p)} odds of a usable result "
                    f"(threshold {th.min_p_usable:.0%})",
                )
            )
        for note in decisions.model_notes.get(method, [])[i : i + 1]:
            if note:
                reasons.append(Reason(f"model.{method}", method, "info", note))
        for warning in decisions.model_extrapolation.get(method, [])[i : i + 1]:
            if warning:
                reasons.append(Reason(f"model.{method}", method, "warn", warning))
        extrapolated = decisions.model_extrapolated.get(method)
        cands[method] = {
            "feasible": bool(c.feasible[i]) and verdict != "undetermined",
            "surface_rms_um": None if not np.isfinite(rms) else round(rms, 1),
            "ruze_efficiency": None if not np.isfinite(eta) else round(eta, 4),
            "meets_requirement": bool(c.meets_requirement[i]) if np.isfinite(rms) else None,
            "requirement_margin_um": None
            if not np.isfinite(rms)
            else round(targets["required_surface_rms_um"] - rms, 1),
            "p_usable": None if not np.isfinite(p) else round(p, 4),
            "extrapolated": bool(extrapolated[i]) if extrapolated is not None and np.isfinite(p) else False,
            "duration_min": c.duration_min,
            "blocked_by": decisions.blocked_by(method, i),
        }
    reasons.extend(_choice_reasons(verdict, cands, site))
    headline = _headline(verdict, cands, row, decisions)
    return Call(
        verdict=verdict,
        time_utc=row["time"],
        freq_ghz=freq,
        reasons=reasons,
        features=values,
        candidates=cands,
        calibrator_name=str(row.get("calibrator_name", "")),
        headline=headline,
        unseen_inputs=unseen,
    )


#: Features computed from the gusts: a reason reading them says when the gusts are estimated.
GUST_FEATURES = frozenset(
    {
        "wind_gust_ms",
        "gust_factor",
        "wind_pointing_error_arcsec",
        "pointing_beam_fraction",
        "scan_surface_rms_um",
        "astronomical_surface_rms_um",
        "scan_surface_margin_um",
        "astronomical_surface_margin_um",
    }
)
#: The optional inputs a call can be made without, as the reasons name them.
OPTIONAL_INPUT_WORDS = {
    "visibility_m": "visibility",
    "precip_mm_h": "precipitation",
    "pressure_hpa": "pressure",
    "solar_wm2": "irradiance",
}


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
        reasons.append(
            Reason(
                DROPOUT_BLOCK,
                "scan",
                "block",
                f"{_named(dropped, site)} stopped reporting at the sample in use after reporting "
                "steadily: a sensor dropout; no laser scan until it reports again (fog or rain cannot "
                "be ruled out).",
            )
        )
    if unseen:
        fog_note = " Fog is judged from the dew-point spread alone." if "visibility_m" in unseen else ""
        reasons.append(
            Reason(
                UNSEEN_REASON,
                "both",
                "info",
                f"Not seen at this time: {_named(unseen, site)}. The call rests on the other inputs.{fog_note}",
            )
        )
    for rule in decisions.rules:
        undecided = decisions.rule_eval.unknown.get(rule.id)
        if undecided is None or not undecided[i]:
            continue
        missing = [n for n in sorted(rule.condition.needs_inputs) if n in unseen]
        words = ", ".join(OPTIONAL_INPUT_WORDS.get(n, n) for n in missing) or "an optional input"
        would = {"block": "block", "warn": "warn about", "add_error": "add an error to"}.get(rule.effect, "affect")
        applies = "both methods" if rule.applies_to == "both" else METHOD_LABEL.get(rule.applies_to, rule.applies_to)
        reasons.append(
            Reason(
                rule.id,
                rule.applies_to,
                "warn" if rule.effect == "block" else "info",
                f"Not checked: needs {words}, not seen at this time; this rule could {would} "
                f"{applies} and cannot be ruled out.",
            )
        )
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
        text = (
            f"{label[verdict].capitalize()} is quicker ({chosen['duration_min']:.0f} min, not "
            f"{alt['duration_min']:.0f} min) and {label[other]}'s surface would not shorten the integration "
            f"over the {session} ({figures})."
        )
    elif g_chosen > g_alt:  # better per minute, and longer: its extra minutes pay back
        ratio = g_chosen / g_alt if g_alt > 0 else float("inf")
        payback = -extra / (ratio - 1.0) if np.isfinite(ratio) else 0.0
        text = (
            f"Over the {session} {label[verdict]}'s extra {-extra:.0f} min pay back after "
            f"{_minutes_text(payback)} of observing: with {label[other]}'s surface "
            f"({figures.replace('against', 'instead of', 1)}) the session would need {ratio:.2f}× the "
            "integration time."
        )
    else:  # the other is better per minute but takes longer: not paid back in this session
        ratio = g_alt / g_chosen if g_chosen > 0 else float("inf")
        payback = extra / (ratio - 1.0) if ratio > 1.0 else float("inf")
        saving = 1.0 - 1.0 / ratio if ratio > 0 else 0.0
        when = f"only after {_minutes_text(payback)} of observing" if np.isfinite(payback) else "never"
        text = (
            f"{label[other].capitalize()}'s extra {extra:.0f} min would pay back {when}, more than the "
            f"{session} leaves: its surface would save {saving:.0%} of the integration time ({figures})."
        )
    return [Reason("choice", "both", "info", text)]


def _margin_choice_reasons(verdict: str, cands: dict, site: Site) -> list[Reason]:
    """The choice without a session length: the laser within a fixed efficiency margin."""
    scan, astro = cands["scan"], cands["astronomical"]
    margin = site.thresholds.laser_preference_efficiency
    gap = round(astro["ruze_efficiency"], 2) - round(scan["ruze_efficiency"], 2)
    if verdict == "scan" and gap <= 0:
        text = (
            f"Both methods are feasible; the laser's efficiency is as good or better, and it takes "
            f"{scan['duration_min']:.0f} min, not {astro['duration_min']:.0f} min."
        )
    elif verdict == "scan":
        text = (
            f"Both methods are feasible; holography is only {gap:.2f} better (within the {margin:.2f} that "
            f"favours the laser), and the laser takes {scan['duration_min']:.0f} min, not "
            f"{astro['duration_min']:.0f} min."
        )
    else:
        text = (
            f"Both methods are feasible; holography's efficiency is {gap:.2f} better, more than the "
            f"{margin:.2f} that favours the quicker laser scan."
        )
    return [Reason("choice", "both", "info", text)]


def _headline(verdict: str, cands: dict, row: pd.Series, decisions: Decisions) -> str:
    targets = decisions.targets
    requirement = _requirement_text(targets)
    if verdict in METHODS:
        c = cands[verdict]
        fit = ("within " if c["meets_requirement"] else "which misses ") + requirement
        if verdict == "scan":
            return (
                f"Scan the reflector now: laser correction expected to leave {c['surface_rms_um']:.0f} µm rms "
                f"(η {c['ruze_efficiency']:.2f}), {fit}."
            )
        cal = row.get("calibrator_name") or "a calibrator"
        return (
            f"Use the astronomical method on {cal}: expected {c['surface_rms_um']:.0f} µm rms "
            f"(η {c['ruze_efficiency']:.2f}), {fit}; take a fresh reference scan afterwards if the laser can see."
        )
    if verdict == "no_correction":
        return (
            f"No correction needed at {targets['freq_ghz']:g} GHz: the uncorrected surface "
            f"({decisions.site.astronomical.uncorrected_surface_rms_um:.0f} µm) already meets {requirement}."
        )
    if verdict == "postpone":
        if all(UNREACHABLE_BLOCK in decisions.candidates[m].blocks for m in METHODS):
            best = min(decisions.best_surface_rms_um.values())
            return (
                f"Not reachable at {targets['freq_ghz']:g} GHz: the best correction leaves {best:.0f} µm; "
                f"no weather makes this frequency worthwhile."
            )
        return "Postpone: neither method can deliver a useful surface for this session now."
    return "Undetermined: the weather data cannot support a call. Do not scan on this advice."
