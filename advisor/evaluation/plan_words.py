"""A session plan in words: the notes and the headline of :func:`advisor.evaluation.plan.compute_plan`."""

from __future__ import annotations

from advisor import fmt
from advisor.evaluation.outlook import margin_text
from advisor.vocabulary import METHODS

#: The feature the plan divides each step's efficiency by for the atmosphere.
ATMOSPHERE_FEATURE = "integration_time_factor"
#: A correction by each method in a sentence.
PLAN_LABEL = {"scan": "laser scan", "astronomical": "holography"}


def _span_text(minutes: float) -> str:
    """'40 min', '1 h 20 min' (to the nearest 10 min)."""
    return fmt.duration_text(int(round(minutes / 10.0) * 10))


def _notes(
    disagreement,
    fs,
    used,
    hindsight,
    start_utc,
    n,
    step_min,
    hours,
    usable,
    atmosphere,
    odds,
    uncorrected_known,
    elevation_deg: float,
) -> list[str]:
    notes = []
    if disagreement is not None:
        notes.append(disagreement.text())
    if (used["kind"] == "forecast").any() and (fs.wind_margin_pct > 0 or fs.dew_point_margin_c > 0):
        notes.append(margin_text({"wind_pct": fs.wind_margin_pct, "dew_point_c": fs.dew_point_margin_c}))
    if hindsight:
        notes.append(f"Observed rows after {start_utc:%Y-%m-%d %H:%M} UTC are used as they came (hindsight).")
    covered_h = n * step_min / 60.0
    if covered_h < hours - 1e-9:
        notes.append(f"The weather rows end early: the plan covers {covered_h:.1f} h of the {hours:g} h asked for.")
    unknown = int((~usable).sum())
    if unknown:
        notes.append(
            f"{unknown} step(s) have no usable weather (gaps, stale or implausible rows): nothing observed "
            "there counts, and no correction is planned in them."
        )
    if atmosphere is None:
        notes.append(
            f"Atmosphere not counted: the features carry no '{ATMOSPHERE_FEATURE}' "
            "(advisor.evaluation.plan.atmosphere_factor); efficiencies are surface × pointing."
        )
    else:
        notes.append(
            f"Session efficiency counts the atmosphere at {elevation_deg:g}° elevation: η / √(integration-time "
            "factor), the factor against the site's dry reference night (--elevation for another)."
        )
    if odds is None:
        notes.append("No site model: every correction is taken to succeed.")
    if not uncorrected_known:
        notes.append(
            "The site gives no uncorrected surface (methods.astronomical.uncorrected_surface_rms_um): "
            "observing before the first correction is not counted."
        )
    return notes


def _headline(verdict, corrections, alternatives, decisions, targets, site, times, usable, start_ok, tz) -> str:
    freq = targets["freq_ghz"]
    best = alternatives[0]
    if verdict == "undetermined":
        return "No plan: the weather data cannot support one for this session (missing, stale or implausible)."
    if verdict == "no_correction":
        text = (
            f"No correction needed at {freq:g} GHz for the whole session: the uncorrected surface "
            f"({site.astronomical.uncorrected_surface_rms_um:.0f} µm) meets λ/{targets['surface_requirement_fraction']:g}"
            f" = {targets['required_surface_rms_um']:.0f} µm."
        )
        option = next((a for a in alternatives if a.key == "optional"), None)
        if option is not None and option.efficiency and best.efficiency:
            first_method, first_time = option.corrections[0]
            text += (
                f" Optional: {PLAN_LABEL[first_method]} at {first_time.tz_convert(tz):%H:%M} would raise the "
                f"session efficiency from {best.efficiency:.2f} to {option.efficiency:.2f} "
                f"({(best.efficiency / option.efficiency) ** 2:.2f}× the integration time)."
            )
        return text
    if verdict == "not_possible":
        blocks: dict[str, int] = {}
        for method in METHODS:
            for block_id, mask in decisions.blocking(method).items():
                hits = int((mask & usable).sum())
                if hits:
                    blocks[block_id] = blocks.get(block_id, 0) + hits
        named = ", ".join(sorted(blocks, key=lambda b: -blocks[b])[:3]) or "no method fits its whole duration"
        return f"No correction possible during the session ({named}): postpone."
    first = corrections[0]
    wait_min = (first.start_utc - times[0]).total_seconds() / 60.0
    parts = []
    for k, c in enumerate(corrections):
        when = f"{c.start_utc.tz_convert(tz):%H:%M}"
        parts.append(
            f"{PLAN_LABEL[c.method]} at {when}"
            if k == 0
            else f"again at {when}"
            if c.method == corrections[k - 1].method
            else f"{PLAN_LABEL[c.method]} at {when}"
        )
    text = (f"Wait {_span_text(wait_min)}, then " if wait_min >= 5 else "") + ", ".join(parts)
    text = text[0].upper() + text[1:]
    if len(corrections) == 1 and first.holds_until_utc is None:
        text += "; it holds for the whole session"
    simple = [a for a in alternatives[1:] if a.efficiency is not None]
    rival = max(simple, key=lambda a: a.efficiency) if simple else None
    text += f". Expected session efficiency {best.efficiency:.2f}"
    if rival is not None:
        text += f" (best simple alternative, {rival.label}: {rival.efficiency:.2f})"
    return text + "."
