"""The session plan as a plain, self-contained SVG picture (no scripts, no external fonts or images).

    plan_svg(plan, ctx) -> str

Efficiency over the session for the plan and the simple alternatives, the corrections as bars,
night shaded, steps without usable weather hatched, the requirement λ/N as a dotted line, and
local hours on the axis.
"""

from __future__ import annotations

import textwrap
from xml.sax.saxutils import escape
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.evaluation.plan import PLAN_LABEL, Plan
from advisor.physics.aperture import ruze_efficiency
from advisor.physics.sun import SUNRISE_SUNSET_ALTITUDE_DEG
from advisor.views.context import Context
from advisor.views.plan_text import VERDICT_WORDS, session_line

WIDTH, HEIGHT = 900, 480
LEFT, RIGHT, TOP, BOTTOM = 60, 20, 104, 320  # plot box: x LEFT..WIDTH-RIGHT, y TOP..BOTTOM
FONT = 'font-family="sans-serif"'
METHOD_COLOUR = {"scan": "#1f6fb4", "astronomical": "#d9822b"}
LINE_STYLE = {
    "plan": ("#222222", ""),
    "scan_now": ("#1f6fb4", "6 4"),
    "astronomical_now": ("#d9822b", "6 4"),
    "wait_scan": ("#1f6fb4", "2 3"),
    "wait_astronomical": ("#d9822b", "2 3"),
    "no_correction": ("#888888", "1 3"),
}


def _x(k: float, n: int) -> float:
    return LEFT + (WIDTH - LEFT - RIGHT) * k / max(n, 1)


def _y(eta: float) -> float:
    return BOTTOM - (BOTTOM - TOP) * eta


def _text(x: float, y: float, text: str, size: int = 12, anchor: str = "start", extra: str = "") -> str:
    return (
        f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size}" text-anchor="{anchor}" {FONT} {extra}>{escape(text)}</text>'
    )


def _polyline(values: np.ndarray, n: int, colour: str, dash: str, width: float) -> list[str]:
    """One polyline per run of finite values (gaps while correcting or without weather)."""
    out = []
    finite = np.isfinite(values)
    k = 0
    while k < n:  # runs of finite steps (a handful)
        if not finite[k]:
            k += 1
            continue
        j = k
        while j < n and finite[j]:
            j += 1
        pts = []
        for i in range(k, j):
            pts.append(f"{_x(i, n):.1f},{_y(values[i]):.1f} {_x(i + 1, n):.1f},{_y(values[i]):.1f}")
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        out.append(
            f'<polyline points="{" ".join(pts)}" fill="none" stroke="{colour}" stroke-width="{width}"{dash_attr}/>'
        )
        k = j
    return out


def plan_svg(plan: Plan, ctx: Context) -> str:
    """The picture as SVG text."""
    steps = plan.steps
    n = len(steps)
    zone = ZoneInfo(plan.site.time_zone)
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}">',
        f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>',
        '<defs><pattern id="unknown" width="6" height="6" patternUnits="userSpaceOnUse">'
        '<path d="M0,6 L6,0" stroke="#bbbbbb" stroke-width="1"/></pattern></defs>',
        _text(LEFT, 22, f"advisor plan · {ctx.site_name} · {plan.freq_ghz:g} GHz", 15, extra='font-weight="bold"'),
        _text(LEFT, 40, session_line(plan), 11),
    ]
    headline = textwrap.wrap(f"{VERDICT_WORDS[plan.verdict]}: {plan.headline}", 135)
    for k, line in enumerate(headline[:2]):
        parts.append(_text(LEFT, 56 + 14 * k, line + (" ..." if k == 1 and len(headline) > 2 else ""), 11))
    if ctx.is_demo:
        parts.append(_text(WIDTH - RIGHT, 22, "DEMO DATA (invented)", 11, "end", 'fill="#aa00aa"'))

    sun = steps["sun_elevation_deg"].to_numpy(dtype=float)
    usable = steps["usable"].to_numpy(dtype=bool)
    for k in range(n):  # background per step (tens to hundreds of rectangles)
        x0, x1 = _x(k, n), _x(k + 1, n)
        if sun[k] < SUNRISE_SUNSET_ALTITUDE_DEG:
            parts.append(
                f'<rect x="{x0:.1f}" y="{TOP}" width="{x1 - x0 + 0.3:.1f}" height="{BOTTOM - TOP}" fill="#eef0f6"/>'
            )
        if not usable[k]:
            parts.append(
                f'<rect x="{x0:.1f}" y="{TOP}" width="{x1 - x0 + 0.3:.1f}" height="{BOTTOM - TOP}" '
                'fill="url(#unknown)"/>'
            )
    parts.append(
        f'<rect x="{LEFT}" y="{TOP}" width="{WIDTH - LEFT - RIGHT}" height="{BOTTOM - TOP}" fill="none" '
        'stroke="#444444"/>'
    )
    for eta in (0.0, 0.2, 0.4, 0.6, 0.8, 1.0):
        parts.append(f'<line x1="{LEFT - 4}" y1="{_y(eta):.1f}" x2="{LEFT}" y2="{_y(eta):.1f}" stroke="#444444"/>')
        parts.append(_text(LEFT - 7, _y(eta) + 4, f"{eta:.1f}", 10, "end"))
    parts.append(
        _text(
            16, (TOP + BOTTOM) / 2, "efficiency η", 11, "middle", f'transform="rotate(-90 16 {(TOP + BOTTOM) / 2:.1f})"'
        )
    )
    required = float(ruze_efficiency(plan.required_surface_rms_um, plan.freq_ghz))
    parts.append(
        f'<line x1="{LEFT}" y1="{_y(required):.1f}" x2="{WIDTH - RIGHT}" y2="{_y(required):.1f}" '
        'stroke="#2a8a2a" stroke-dasharray="1 3"/>'
    )
    parts.append(
        _text(
            LEFT + 4,
            _y(required) + 12,
            f"λ/{plan.site.thresholds.surface_requirement_fraction:g} (surface only)",
            10,
            "start",
            'fill="#2a8a2a"',
        )
    )

    local = pd.DatetimeIndex(steps["time"]).tz_convert(zone)
    hour = local.floor("h")
    last_label_x = -1e9
    for k in (int(i) for i in np.flatnonzero(np.concatenate(([True], hour[1:] != hour[:-1])))):
        x = _x(k, n)
        parts.append(f'<line x1="{x:.1f}" y1="{BOTTOM}" x2="{x:.1f}" y2="{BOTTOM + 4}" stroke="#444444"/>')
        if x - last_label_x >= 40:  # labels never overlap
            parts.append(_text(x, BOTTOM + 16, f"{local[k]:%H:%M}", 10, "middle"))
            last_label_x = x
    parts.append(_text((LEFT + WIDTH - RIGHT) / 2, BOTTOM + 32, f"local time ({local[0]:%Z})", 11, "middle"))

    for c in plan.corrections:
        k0 = (c.start_utc - plan.start_utc).total_seconds() / 60.0 / plan.step_min
        k1 = (c.end_utc - plan.start_utc).total_seconds() / 60.0 / plan.step_min
        colour = METHOD_COLOUR[c.method]
        parts.append(
            f'<rect x="{_x(k0, n):.1f}" y="{TOP - 14}" width="{max(_x(k1, n) - _x(k0, n), 2):.1f}" '
            f'height="10" fill="{colour}"/>'
        )
        parts.append(_text(_x(k0, n), TOP - 18, f"{PLAN_LABEL[c.method]} {c.start_utc.tz_convert(zone):%H:%M}", 10))

    legend_y = BOTTOM + 52
    x = LEFT
    for a in plan.alternatives:
        if a.path_efficiency is None:
            continue
        colour, dash = LINE_STYLE.get(a.key, ("#666666", "3 3"))
        width = 2.4 if a.key == "plan" else 1.4
        parts.extend(_polyline(np.asarray(a.path_efficiency, dtype=float), n, colour, dash, width))
        label = f"{a.label} (session η {a.efficiency:.2f})"
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        parts.append(
            f'<line x1="{x}" y1="{legend_y - 4}" x2="{x + 24}" y2="{legend_y - 4}" stroke="{colour}" '
            f'stroke-width="{width}"{dash_attr}/>'
        )
        parts.append(_text(x + 30, legend_y, label, 10))
        legend_y += 15
        if legend_y > HEIGHT - 8:
            break
    parts.append(
        _text(
            WIDTH - RIGHT,
            HEIGHT - 8,
            "shaded: night · hatched: no usable weather · advisory only",
            9,
            "end",
            'fill="#666666"',
        )
    )
    parts.append("</svg>")
    return "\n".join(parts) + "\n"


__all__ = ["plan_svg"]
