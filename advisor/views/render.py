"""Three views of one :class:`advisor.decision.Call`: a rich panel, plain text, and JSON.

Nothing is computed here beyond formatting: the call is finished before it is rendered.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from zoneinfo import ZoneInfo

from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from advisor.decision import Call

if TYPE_CHECKING:  # rich is imported only when a panel is drawn: piped output stays light
    from rich.panel import Panel
from advisor.catalogue import CATALOGUE, KEY_FEATURES
from advisor.vocabulary import DEMO_BANNER, EFFECT_LABEL, METHOD_LABEL, VERDICT

SCHEMA_VERSION = 1

CAUTIONS = (
    "Advisory only — not a safety system.",
    "Stow the antenna at the site's wind limits regardless of this tool.",
    "Laser scanners can be hazardous to eyes: follow the site's laser-safety procedure and keep "
    "people off the structure during scans and surface moves.",
    "Defer to local rules and the site's responsible staff.",
)

VERDICT_STYLE = {v.name: (v.label, v.style) for v in VERDICT.values()}



@dataclass(frozen=True)
class Context:
    """What the call was made on, for titles and JSON."""

    site_name: str
    time_zone: str
    feed_source: str
    is_demo: bool
    data_quality: dict
    next_window: dict | None = None
    notes: tuple[str, ...] = ()


def _num(value):
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if value is None:
        return None
    value = float(value)
    return None if not math.isfinite(value) else round(value, 4)


def to_json_dict(call: Call, ctx: Context, exit_status: int) -> dict:
    """The ``--json`` object of DESIGN §7."""
    features = {spec: _num(call.features.get(spec)) for spec in CATALOGUE}
    return {
        "schema_version": SCHEMA_VERSION,
        "verdict": call.verdict,
        "headline": call.headline,
        "time_utc": call.time_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "target_freq_ghz": call.freq_ghz,
        "site": ctx.site_name,
        "demo_data": ctx.is_demo,
        "reasons": [r.as_dict() for r in call.reasons],
        "features": features,
        "calibrator": call.calibrator_name or None,
        "candidates": call.candidates,
        "data_quality": ctx.data_quality,
        "next_window": ctx.next_window,
        "notes": list(ctx.notes),
        "cautions": list(CAUTIONS),
        "exit_status": exit_status,
    }


def _times(call: Call, ctx: Context) -> str:
    local = call.time_utc.tz_convert(ZoneInfo(ctx.time_zone))
    return f"{call.time_utc:%Y-%m-%d %H:%M} UTC ({local:%H:%M %Z} local)"


def key_features(features: dict):
    """(label, text) pairs of the key conditions; hours since sunrise by day, since sunset by night."""
    rows = []
    for spec in KEY_FEATURES:
        if spec.name == "hours_since_sunset" and not features.get("is_night", True):
            spec = CATALOGUE["hours_since_sunrise"]
        name, label, fmt = spec.name, spec.label, spec.display_format
        rows.append((label, _fmt_feature(name, fmt, features)))
    return rows


def _fmt_feature(name: str, fmt: str, features: dict) -> str:
    value = features.get(name)
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    if name == "visibility_m" and value >= 10_000:
        return f"{value / 1000:.0f} km"
    if name == "calibrator_minutes_up" and value >= 1440:
        return "all day (circumpolar)"
    text = fmt.format(value)
    number = text.split()[0].rstrip("°")
    if number.startswith("-") and number.lstrip("-+").replace(".", "").strip("0") == "":
        text = text[1:]  # no "-0.0 °C"
    return text


def _candidate_rows(call: Call):
    for method, label in METHOD_LABEL.items():
        c = call.candidates[method]
        rms = "n/a" if c["surface_rms_um"] is None else f"{c['surface_rms_um']:.0f} µm"
        eta = "n/a" if c["ruze_efficiency"] is None else f"{c['ruze_efficiency']:.2f}"
        p = "—" if c["p_usable"] is None else f"{c['p_usable']:.0%}"
        yield (label, "yes" if c["feasible"] else "no", rms, eta, p, f"{c['duration_min']:.0f} min",
               ", ".join(c["blocked_by"]) or "—")


CANDIDATE_HEADERS = ("method", "feasible", "surface rms", "Ruze η", "p usable", "takes", "blocked by")


_EFFECT_ORDER = {"block": 0, "add_error": 1, "warn": 2, "info": 3}


def ordered_reasons(call: Call):
    """Reasons, most severe first (stable within one severity)."""
    return sorted(call.reasons, key=lambda r: _EFFECT_ORDER.get(r.effect, 9))


def render_panel(call: Call, ctx: Context) -> Panel:
    """The terminal view: verdict first, then candidates, reasons, key features, cautions."""
    from rich import box
    from rich.console import Group
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    label, style = VERDICT_STYLE[call.verdict]
    parts = []
    head = Text()
    head.append(f" {label} ", style=style)
    head.append(f"  {call.headline}")
    parts.append(head)
    parts.append(Text(f"{_times(call, ctx)} · target {call.freq_ghz:g} GHz", style="bold"))
    if ctx.is_demo:
        parts.append(Text(DEMO_BANNER, style="bold magenta"))
    for note in ctx.notes:
        parts.append(Text(note, style="italic"))

    table = Table(box=box.SIMPLE_HEAD, expand=False, pad_edge=False)
    for h in CANDIDATE_HEADERS[:-1]:  # blocking rules are listed under Reasons
        table.add_column(h, justify="right" if h in ("surface rms", "Ruze η", "p usable", "takes") else "left",
                         no_wrap=True)
    for row in _candidate_rows(call):
        table.add_row(*row[:-1], style="green" if row[1] == "yes" else "dim")
    parts.append(table)

    reasons = Table(box=None, show_header=False, pad_edge=False, expand=False)
    reasons.add_column("effect", style="bold", no_wrap=True)
    reasons.add_column("message")
    effect_style = {"block": "red", "warn": "yellow", "add_error": "magenta", "info": "cyan"}
    for r in ordered_reasons(call):
        message = Text(r.message)
        message.append(f"  [{r.rule} · {r.applies_to}]", style="dim")
        reasons.add_row(Text(EFFECT_LABEL.get(r.effect, r.effect), style=effect_style.get(r.effect, "")), message)
    parts.append(Text("Reasons", style="bold underline"))
    parts.append(reasons)

    feats = Table(box=None, show_header=False, pad_edge=False, expand=False)
    for _ in range(2):
        feats.add_column(style="dim")
        feats.add_column(justify="right")
    cells = key_features(call.features)
    if call.calibrator_name:
        cells.append(("best calibrator", call.calibrator_name))
    for k in range(0, len(cells), 2):
        pair = cells[k:k + 2] + [("", "")] * (2 - len(cells[k:k + 2]))
        feats.add_row(pair[0][0], pair[0][1], "  " + pair[1][0], pair[1][1])
    parts.append(Text(""))
    parts.append(Text("Key conditions", style="bold underline"))
    parts.append(feats)
    if ctx.next_window:
        parts.append(Text(""))
        parts.append(Text(_next_window_text(ctx.next_window, ctx.time_zone), style="bold"))
    parts.append(Text(""))
    parts.append(Text(" ".join(CAUTIONS), style="dim italic"))
    title = f"advisor · {ctx.site_name}"
    return Panel(Group(*parts), title=title, title_align="left", border_style=style.split()[-1],
                 subtitle=f"feed: {ctx.feed_source}", subtitle_align="left")


def _next_window_text(next_window: dict, time_zone: str) -> str:
    """'Next window: laser scan 10:29–11:44 MST (17:29–18:44 UTC, 75 min); astronomical ...'."""
    zone = ZoneInfo(time_zone)
    bits = []
    for method, w in next_window.items():
        label = METHOD_LABEL[method]
        if not w:
            bits.append(f"{label}: none in the forecast")
            continue
        start, end = (pd.Timestamp(w[k]) for k in ("start_utc", "end_utc"))
        ls, le = start.tz_convert(zone), end.tz_convert(zone)
        day = "" if ls.date() == le.date() else f" {le:%d %b}"
        bits.append(f"{label} {ls:%d %b %H:%M}–{le:%H:%M}{day} {le:%Z} ({start:%H:%M}–{end:%H:%M} UTC, "
                    f"{w.get('length_min', (end - start).total_seconds() / 60):.0f} min)")
    return "Next window: " + "; ".join(bits)


def render_plain(call: Call, ctx: Context) -> str:
    """Plain text for pipes, logs and advisory.txt."""
    label, _ = VERDICT_STYLE[call.verdict]
    lines = [f"advisor · {ctx.site_name} · {_times(call, ctx)} · {call.freq_ghz:g} GHz",
             f"VERDICT: {label} — {call.headline}"]
    if ctx.is_demo:
        lines.append(DEMO_BANNER)
    lines.extend(ctx.notes)
    lines.append("")
    rows = [CANDIDATE_HEADERS, *_candidate_rows(call)]
    widths = [max(len(str(r[k])) for r in rows) for k in range(len(CANDIDATE_HEADERS))]
    for r in rows:
        lines.append("  ".join(str(v).ljust(w) for v, w in zip(r, widths)).rstrip())
    lines.append("")
    lines.append("Reasons:")
    for r in ordered_reasons(call):
        lines.append(f"  - {EFFECT_LABEL.get(r.effect, r.effect)} [{r.rule}, {r.applies_to}]: {r.message}")
    lines.append("")
    lines.append("Key conditions:")
    for lbl, text in key_features(call.features):
        lines.append(f"  {lbl}: {text}")
    if call.calibrator_name:
        lines.append(f"  best calibrator: {call.calibrator_name}")
    if ctx.next_window:
        lines.append("")
        lines.append(_next_window_text(ctx.next_window, ctx.time_zone))
    lines.append("")
    lines.append(f"feed: {ctx.feed_source}")
    lines.append("Cautions: " + " ".join(CAUTIONS))
    return "\n".join(lines) + "\n"
