"""The session plan as plain text: headline, schedule, the alternatives in one table, a timeline strip.

render_plain_plan(plan, ctx, width=100)
alternative_rows(plan)      the table's rows (also used by the SVG legend)
schedule_lines(plan)        one line per planned correction
"""

from __future__ import annotations

from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor import fmt
from advisor.evaluation.plan import PLAN_LABEL, Plan
from advisor.views.context import CAUTIONS, Context
from advisor.views.panel import short_path
from advisor.vocabulary import DEMO_BANNER

ALTERNATIVE_HEADERS = ("alternative", "corrections", "session η", "time lost", "time ×")
#: One letter per step in the timeline: a correction by each method, observing, no usable weather.
STEP_LETTER = {"scan": "L", "astronomical": "H", "observe": "o", "unknown": "?"}
VERDICT_WORDS = {
    "correct": "PLAN",
    "no_correction": "NO CORRECTION NEEDED",
    "not_possible": "POSTPONE",
    "undetermined": "UNDETERMINED",
}


def _zone(plan: Plan) -> ZoneInfo:
    return ZoneInfo(plan.site.time_zone)


def _clock(ts: pd.Timestamp, plan: Plan) -> str:
    return f"{pd.Timestamp(ts).tz_convert(_zone(plan)):%H:%M}"


def minutes_text(minutes: float | None) -> str:
    """'54 min', '2 h 10 min'; '—' for None."""
    return "—" if minutes is None else fmt.duration_text(int(round(minutes)))


def session_line(plan: Plan) -> str:
    """'Session 30 Nov 20:00 → 1 Dec 02:00 MST (03:00 → 09:00 UTC), 6 h in 36 steps of 10 min; elevation 45°'."""
    zone = _zone(plan)
    s, e = plan.start_utc.tz_convert(zone), plan.end_utc.tz_convert(zone)
    end_day = "" if s.date() == e.date() else f"{e:%-d %b} "
    hours = len(plan.steps) * plan.step_min / 60.0
    return (
        f"Session {s:%-d %b %H:%M} → {end_day}{e:%H:%M %Z} ({plan.start_utc:%H:%M} → {plan.end_utc:%H:%M} UTC), "
        f"{hours:g} h in {len(plan.steps)} steps of {plan.step_min:g} min; requirement "
        f"λ/{plan.site.thresholds.surface_requirement_fraction:g} = {plan.required_surface_rms_um:.0f} µm"
    )


def schedule_lines(plan: Plan) -> list[str]:
    """One line per correction: times, method, surface and η, odds, how long it holds, the fallback."""
    lines = []
    for c in plan.corrections:
        odds = "" if c.p_usable is None else f", odds {fmt.odds_text(c.p_usable)}"
        holds = (
            "holds to the session's end"
            if c.holds_until_utc is None
            else f"holds until about {_clock(c.holds_until_utc, plan)}"
        )
        fallback = (
            ""
            if c.if_fails is None
            else (f"; if it fails: {PLAN_LABEL[c.if_fails[0]]} at {_clock(c.if_fails[1], plan)}")
        )
        lines.append(
            f"{_clock(c.start_utc, plan)}–{_clock(c.end_utc, plan)}  {PLAN_LABEL[c.method]:<10}  "
            f"{c.surface_rms_um:.0f} µm → η {c.ruze_efficiency:.2f}{odds}; {holds}{fallback}"
        )
    return lines


def alternative_rows(plan: Plan) -> list[tuple[str, ...]]:
    """One row per alternative: label, corrections, session η, time lost, integration time relative to the plan."""
    best = plan.alternatives[0].efficiency or 0.0
    rows: list[tuple[str, ...]] = []
    for a in plan.alternatives:
        if a.efficiency is None:
            continue
        corrections = ", ".join(f"{PLAN_LABEL[m]} {_clock(t, plan)}" for m, t in a.corrections) or "none"
        factor = "—" if a.efficiency <= 0 else f"{(best / a.efficiency) ** 2:.2f}×"
        rows.append((a.label, corrections, f"{a.efficiency:.2f}", minutes_text(a.lost_min), factor))
    return rows


def strip_line(plan: Plan) -> tuple[str, str]:
    """The timeline: local hour marks over one letter per step."""
    letters = "".join(STEP_LETTER.get(a, "?") for a in plan.steps["activity"])
    local = pd.DatetimeIndex(plan.steps["time"]).tz_convert(_zone(plan))
    hour = local.floor("h")
    new_hour = np.concatenate(([True], hour[1:] != hour[:-1]))
    marks = [" "] * (len(letters) + 5)
    for k in (int(i) for i in np.flatnonzero(new_hour)):  # one mark per hour, where it fits
        if all(c == " " for c in marks[max(0, k - 1) : k + 5]):
            marks[k : k + 5] = list(f"{local[k]:%H:%M}")
    return "".join(marks).rstrip(), letters


def efficiency_line(plan: Plan) -> str:
    """The plan's η per step as one digit (tenths: 6 = 0.6x), '·' while correcting or unknown."""
    eta = plan.steps["efficiency"].to_numpy(dtype=float)
    return "".join("·" if not np.isfinite(v) else str(min(9, int(v * 10))) for v in eta)


def _wrap(text: str, width: int, indent: str = "  ") -> list[str]:
    return fmt.wrap(text, max(40, width), indent) or [""]


def render_plain_plan(plan: Plan, ctx: Context, width: int = 100) -> str:
    """The plan as plain text (no colour), folded to ``width`` columns."""
    lines: list[str] = [f"advisor plan · {ctx.site_name} · {plan.freq_ghz:g} GHz"]
    lines.extend(_wrap(session_line(plan), width))
    lines.extend(_wrap(f"{VERDICT_WORDS[plan.verdict]}: {plan.headline}", width))
    if ctx.is_demo:
        lines.extend(_wrap(DEMO_BANNER, width))
    lines.append("")
    tz = pd.Timestamp(plan.start_utc).tz_convert(_zone(plan)).strftime("%Z")
    if plan.corrections:
        lines.append(f"Schedule (local time {tz}; as planned if every correction succeeds):")
        for line in schedule_lines(plan):
            lines.extend(_wrap("  " + line, width, "      "))
        lines.append("")
    lines.extend(
        _wrap(
            "Alternatives (expected over the session; time ×: the integration time each needs to reach "
            "the plan's sensitivity):",
            width,
        )
    )
    table = [ALTERNATIVE_HEADERS, *alternative_rows(plan)]
    widths = [max(len(r[k]) for r in table) for k in range(len(ALTERNATIVE_HEADERS))]
    for r in table:
        lines.append(("  " + "  ".join(v.ljust(w) for v, w in zip(r, widths))).rstrip())
    for a in plan.alternatives:
        if a.efficiency is None:
            lines.extend(_wrap(f"  {a.label.split(',')[0]}: not possible ({a.why_not})", width, "      "))
    lines.append("")
    marks, letters = strip_line(plan)
    lines.append(f"{tz:<5} {marks}")
    lines.append(f"      {letters}")
    lines.append(f"η     {efficiency_line(plan)}")
    lines.extend(
        _wrap(
            "      L laser scan  H holography  o observing  ? no usable weather;  η row: tenths (6 = 0.6)",
            width,
            "      ",
        )
    )
    lines.append("")
    for note in (*ctx.notes, *plan.notes):
        lines.extend(_wrap(note, width))
    lines.extend(
        _wrap("feed: " + " + ".join(short_path(source, width - 8) for source in ctx.feed_source.split(" + ")), width)
    )
    lines.extend(_wrap("Cautions: " + " ".join(CAUTIONS), width))
    return "\n".join(lines) + "\n"


__all__ = [
    "ALTERNATIVE_HEADERS",
    "STEP_LETTER",
    "VERDICT_WORDS",
    "minutes_text",
    "session_line",
    "schedule_lines",
    "alternative_rows",
    "strip_line",
    "efficiency_line",
    "render_plain_plan",
]
