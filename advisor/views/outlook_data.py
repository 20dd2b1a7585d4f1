"""The outlook as data: the ``outlook --json`` object and the ``outlook --csv`` frame.

``outlook_csv_text`` writes the frame with ``true``/``false`` booleans.  The JSON object is a contract: bump :data:`OUTLOOK_SCHEMA_VERSION` when a key changes meaning or
goes away.
"""

from __future__ import annotations

from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.catalogue import STEP_FEATURES
from advisor.evaluation.outlook import Outlook
from advisor.evaluation.windows import window_dict
from advisor.views.context import CAUTIONS, Context
from advisor.views.jsondoc import json_number
from advisor.views.outlook_parts import rows_of
from advisor.vocabulary import METHODS, VERDICTS

OUTLOOK_SCHEMA_VERSION = 1


def _iso_local(times: pd.DatetimeIndex, tz: str) -> np.ndarray:
    """ISO 8601 local times with a ``±HH:MM`` offset (vectorised string work)."""
    text = pd.Series(times.tz_convert(ZoneInfo(tz)).strftime("%Y-%m-%dT%H:%M:%S%z"))
    return (text.str[:-2] + ":" + text.str[-2:]).to_numpy(dtype=object)


def outlook_csv_frame(outlook: Outlook) -> pd.DataFrame:
    """One row per step: ``time`` (ISO 8601 UTC), ``verdict``, flags, conditions, per-method figures."""
    steps = outlook.steps
    out = pd.DataFrame(
        {
            "time": pd.DatetimeIndex(steps["time"]).strftime("%Y-%m-%dT%H:%M:%SZ"),
            "verdict": steps["verdict"].to_numpy(),
            "local_time": _iso_local(pd.DatetimeIndex(steps["time"]), outlook.site.time_zone),
        }
    )
    for name in ("gap", "beyond_horizon", "source", *STEP_FEATURES):
        out[name] = steps[name].to_numpy()
    for method in METHODS:
        for suffix in ("feasible", "surface_rms_um", "ruze_efficiency", "p_usable"):
            out[f"{method}_{suffix}"] = steps[f"{method}_{suffix}"].to_numpy()
        out[f"in_{method}_window"] = steps[f"in_{method}_window"].to_numpy()
    return out.round(4)


def outlook_csv_text(outlook: Outlook) -> str:
    """The CSV of :func:`outlook_csv_frame`, booleans written ``true``/``false``, empty cells where
    a value is missing."""
    frame = outlook_csv_frame(outlook)
    for name in frame.columns:
        if frame[name].dtype == bool:
            frame[name] = np.where(frame[name].to_numpy(), "true", "false")
    return frame.to_csv(index=False, lineterminator="\n")


def outlook_json(outlook: Outlook, ctx: Context) -> dict:
    """The ``outlook --json`` object: per-step verdicts, windows, next windows, spans and notes."""
    csv = outlook_csv_frame(outlook)
    step_records = []
    columns = list(csv.columns)
    values = csv.to_numpy(dtype=object)
    for row in values:  # JSON records need Python objects
        rec = {}
        for k, v in zip(columns, row):
            rec["time_utc" if k == "time" else k] = v if isinstance(v, str) else json_number(v)
        step_records.append(rec)
    windows = []
    for method in METHODS:
        for _, w in outlook.windows[method].iterrows():
            windows.append({"method": method, **window_dict(w)})
    spans = [
        {
            "verdict": "undetermined" if r.category == "gap" else r.category,
            "gap": r.category == "gap",
            "start_utc": r.start_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "end_utc": r.end_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "steps": int(r.steps),
            **{f"{m}_blocked_by": list(getattr(r, f"{m}_blocked_by")) for m in METHODS},
        }
        for r in rows_of(outlook.spans)
    ]
    counts = {v: int((outlook.steps["verdict"] == v).sum()) for v in VERDICTS}
    counts["gap"] = int(outlook.steps["gap"].sum())
    return {
        "schema_version": OUTLOOK_SCHEMA_VERSION,
        "command": "outlook",
        "site": ctx.site_name,
        "demo_data": ctx.is_demo,
        "target_freq_ghz": outlook.freq_ghz,
        "from_utc": outlook.start_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "to_utc": outlook.end_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "step_min": outlook.step_min,
        "time_zone": outlook.site.time_zone,
        "forecast": {
            "issued_utc": [t.strftime("%Y-%m-%dT%H:%M:%SZ") for t in outlook.issued_utc],
            "horizon_h": outlook.horizon_h,
            "margins": outlook.margins,
            "steps_beyond_horizon": int(outlook.steps["beyond_horizon"].sum()),
        },
        "counts": counts,
        "min_window_min": outlook.min_window_min,
        "next_window": outlook.next_window,
        "windows": windows,
        "spans": spans,
        "sun_events": [
            {"event": e, "time_utc": t.strftime("%Y-%m-%dT%H:%M:%SZ")}
            for e, t in zip(outlook.sun_events["event"], outlook.sun_events["time_utc"])
        ],
        "steps": step_records,
        "data_quality": ctx.data_quality,
        "notes": [*ctx.notes, *outlook.notes],
        "cautions": list(CAUTIONS),
    }
