"""The ``plan --json`` object (a contract: bump :data:`PLAN_SCHEMA_VERSION` when a key changes meaning
or goes away)."""

from __future__ import annotations

import pandas as pd

from advisor.evaluation.plan import Plan
from advisor.views.context import CAUTIONS, Context
from advisor.views.jsondoc import json_number
from advisor.vocabulary import METHODS

PLAN_SCHEMA_VERSION = 1


def _iso(ts) -> str | None:
    return None if ts is None else pd.Timestamp(ts).strftime("%Y-%m-%dT%H:%M:%SZ")


def plan_json(plan: Plan, ctx: Context) -> dict:
    """Verdict, headline, the corrections, every alternative with its expected figures, and the steps."""
    best = plan.alternatives[0].efficiency or 0.0
    steps = plan.steps
    step_rows = []
    columns = {name: steps[name].to_numpy() for name in steps.columns if name != "time"}
    times = pd.DatetimeIndex(steps["time"]).strftime("%Y-%m-%dT%H:%M:%SZ")
    for k, t in enumerate(times):  # JSON rows for at most a few hundred steps
        row: dict = {"time_utc": t}
        for name, values in columns.items():
            v = values[k]
            row[name] = v if isinstance(v, str) else json_number(v)
        step_rows.append(row)
    return {
        "schema_version": PLAN_SCHEMA_VERSION,
        "site": ctx.site_name,
        "demo_data": ctx.is_demo,
        "target_freq_ghz": plan.freq_ghz,
        "start_utc": _iso(plan.start_utc),
        "end_utc": _iso(plan.end_utc),
        "requested_hours": plan.requested_hours,
        "step_min": plan.step_min,
        "elevation_deg": plan.elevation_deg,
        "required_surface_rms_um": json_number(plan.required_surface_rms_um, 1),
        "verdict": plan.verdict,
        "headline": plan.headline,
        "corrections": [
            {
                "method": c.method,
                "start_utc": _iso(c.start_utc),
                "end_utc": _iso(c.end_utc),
                "surface_rms_um": json_number(c.surface_rms_um, 1),
                "ruze_efficiency": json_number(c.ruze_efficiency),
                "p_usable": json_number(c.p_usable),
                "holds_until_utc": _iso(c.holds_until_utc),
                "if_fails": None if c.if_fails is None else {"method": c.if_fails[0], "start_utc": _iso(c.if_fails[1])},
            }
            for c in plan.corrections
        ],
        "alternatives": [
            {
                "key": a.key,
                "label": a.label,
                "possible": a.efficiency is not None,
                "why_not": a.why_not or None,
                "corrections": [{"method": m, "start_utc": _iso(t)} for m, t in a.corrections],
                "session_efficiency": json_number(a.efficiency),
                "lost_min": json_number(a.lost_min, 1),
                "expected_corrections": json_number(a.expected_corrections, 3),
                "integration_time_factor": (json_number((best / a.efficiency) ** 2, 3) if a.efficiency else None),
            }
            for a in plan.alternatives
        ],
        "methods": list(METHODS),
        "steps": step_rows,
        "sun_events": [
            {"event": e, "time_utc": _iso(t)} for e, t in zip(plan.sun_events["event"], plan.sun_events["time_utc"])
        ],
        "notes": [*ctx.notes, *plan.notes],
        "cautions": list(CAUTIONS),
    }


__all__ = ["PLAN_SCHEMA_VERSION", "plan_json"]
