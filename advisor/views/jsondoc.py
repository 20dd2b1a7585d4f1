"""The ``check --json`` object of one :class:`advisor.decision.Call` (a contract: bump
:data:`SCHEMA_VERSION` when a key changes meaning or goes away)."""

from __future__ import annotations

import math

import numpy as np

from advisor.catalogue import CATALOGUE
from advisor.decision import Call
from advisor.views.callparts import blocked_ids, cause_line
from advisor.views.context import CAUTIONS, Context

#: 2: verdict ``no_correction`` (exit 13); candidates carry ``meets_requirement`` and
#: ``requirement_margin_um``; ``blocked_by`` lists every block (rules, efficiency.min, target.unreachable,
#: model.<method>, data).
#: 3: every candidate carries ``extrapolated`` (the site model's odds lie outside its training range).
#: 4: ``cause``, the screen's line under the verdict (what decides the call, in words).
SCHEMA_VERSION = 4


def json_number(value, digits: int = 4):
    """A JSON-safe number: bools stay bools, NaN and infinities become None, floats are rounded."""
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if value is None:
        return None
    value = float(value)
    return None if not math.isfinite(value) else round(value, digits)


def to_json_dict(call: Call, ctx: Context, exit_status: int) -> dict:
    """The ``--json`` object: verdict, reasons, every catalogue feature, candidates, data quality."""
    features = {name: json_number(call.features.get(name)) for name in CATALOGUE}
    return {
        "schema_version": SCHEMA_VERSION,
        "verdict": call.verdict,
        "headline": call.headline,
        "cause": cause_line(call),
        "time_utc": call.time_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "target_freq_ghz": call.freq_ghz,
        "site": ctx.site_name,
        "demo_data": ctx.is_demo,
        "reasons": [r.as_dict() for r in call.reasons],
        "features": features,
        "calibrator": call.calibrator_name or None,
        "candidates": {m: {**c, "blocked_by": blocked_ids(call, m)} for m, c in call.candidates.items()},
        "data_quality": ctx.data_quality,
        "next_window": ctx.next_window,
        "notes": list(ctx.notes),
        "cautions": list(CAUTIONS),
        "exit_status": exit_status,
    }
