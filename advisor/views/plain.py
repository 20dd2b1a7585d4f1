"""Plain text of one :class:`advisor.decision.Call`, for pipes, logs and ``advisory.txt``."""

from __future__ import annotations

from advisor.decision import Call
from advisor.views.callparts import (CANDIDATE_HEADERS, candidate_rows, key_features, next_window_text,
                                     ordered_reasons, when_text)
from advisor.views.context import CAUTIONS, Context
from advisor.vocabulary import DEMO_BANNER, EFFECT_LABEL, VERDICT


def render_plain(call: Call, ctx: Context) -> str:
    """The call as text: verdict line, candidate table, reasons, key conditions, next window, cautions."""
    lines = [f"advisor · {ctx.site_name} · {when_text(call, ctx)} · {call.freq_ghz:g} GHz",
             f"VERDICT: {VERDICT[call.verdict].label} — {call.headline}"]
    if ctx.is_demo:
        lines.append(DEMO_BANNER)
    lines.extend(ctx.notes)
    lines.append("")
    rows = [CANDIDATE_HEADERS, *candidate_rows(call)]
    widths = [max(len(str(r[k])) for r in rows) for k in range(len(CANDIDATE_HEADERS))]
    for r in rows:
        lines.append("  ".join(str(v).ljust(w) for v, w in zip(r, widths)).rstrip())
    lines.append("")
    lines.append("Reasons:")
    for r in ordered_reasons(call):
        lines.append(f"  - {EFFECT_LABEL.get(r.effect, r.effect)} [{r.rule}, {r.applies_to}]: {r.message}")
    lines.append("")
    lines.append("Key conditions:")
    for label, text in key_features(call.features):
        lines.append(f"  {label}: {text}")
    if call.calibrator_name:
        lines.append(f"  best calibrator: {call.calibrator_name}")
    if ctx.next_window:
        lines.append("")
        lines.append(next_window_text(ctx.next_window, ctx.time_zone))
    lines.append("")
    lines.append(f"feed: {ctx.feed_source}")
    lines.append("Cautions: " + " ".join(CAUTIONS))
    return "\n".join(lines) + "\n"
