"""What the site model knows, as a picture: one self-contained SVG (``advisor model show --svg``).

    text = model_svg(model, title="model.json")

Per method, a reliability diagram (the cross-validated odds binned against the fraction of
attempts that were usable; a calibrated model lies on the diagonal, each dot's area follows its
number of attempts) and one panel per term: the odds as that term's feature moves over the range
the model was trained on, every other term at its training mean.  Plain SVG 1.1: no scripts, no
links, no external fonts or images (the generic ``sans-serif`` family), so it opens anywhere
and can be mailed as it is.
"""

from __future__ import annotations

import math
from xml.sax.saxutils import escape

import numpy as np

from advisor.catalogue import CATALOGUE, unit_text
from advisor.model.inference import METHOD_LABELS, MethodModel, SiteModel
from advisor.vocabulary import MODEL_DIRECTIONS

WIDTH = 1180  # a reliability panel and three term panels side by side
PANEL = 200  # plot area side [px]
MARGIN_LEFT = 52
GAP = 78
HEADER = 84
SECTION = PANEL + 120
CURVE_POINTS = 80
FONT = 'font-family="sans-serif"'
INK, GRID, ACCENT, FAINT = "#222222", "#d0d0d0", "#1f6fb2", "#888888"


def _text(
    x: float,
    y: float,
    content: str,
    size: int = 11,
    anchor: str = "start",
    weight: str = "normal",
    fill: str = INK,
    rotate: float | None = None,
) -> str:
    turn = f' transform="rotate({rotate:g} {x:.1f} {y:.1f})"' if rotate is not None else ""
    return (
        f'<text x="{x:.1f}" y="{y:.1f}" {FONT} font-size="{size}" text-anchor="{anchor}" '
        f'font-weight="{weight}" fill="{fill}"{turn}>{escape(content)}</text>'
    )


def _axes(
    x0: float, y0: float, xlabel: str, ylabel: str, xticks: list[tuple[float, str]], yticks: list[tuple[float, str]]
) -> list[str]:
    """A square plot frame with ticks; ticks are (fraction 0..1, label)."""
    out = [
        f'<rect x="{x0:.1f}" y="{y0:.1f}" width="{PANEL}" height="{PANEL}" fill="none" stroke="{INK}" '
        'stroke-width="1"/>'
    ]
    for f, label in yticks:
        y = y0 + PANEL * (1 - f)
        out.append(
            f'<line x1="{x0:.1f}" y1="{y:.1f}" x2="{x0 + PANEL:.1f}" y2="{y:.1f}" stroke="{GRID}" stroke-width="0.5"/>'
        )
        out.append(_text(x0 - 4, y + 4, label, 10, "end"))
    for f, label in xticks:
        x = x0 + PANEL * f
        out.append(
            f'<line x1="{x:.1f}" y1="{y0 + PANEL:.1f}" x2="{x:.1f}" y2="{y0 + PANEL + 4:.1f}" '
            f'stroke="{INK}" stroke-width="1"/>'
        )
        out.append(_text(x, y0 + PANEL + 16, label, 10, "middle"))
    out.append(_text(x0 + PANEL / 2, y0 + PANEL + 32, xlabel, 11, "middle"))
    out.append(_text(x0 - 36, y0 + PANEL / 2, ylabel, 11, "middle", rotate=-90))
    return out


_P_TICKS = [(v, f"{v:.1f}") for v in (0.0, 0.2, 0.4, 0.6, 0.8, 1.0)]


def reliability_panel(x0: float, y0: float, metrics: dict) -> list[str]:
    """Held-out predicted odds against the observed usable fraction, per bin."""
    out = [_text(x0, y0 - 10, "reliability (cross-validated)", 12, weight="bold")]
    out += _axes(x0, y0, "predicted odds of a usable result", "observed usable fraction", _P_TICKS, _P_TICKS)
    out.append(
        f'<line x1="{x0:.1f}" y1="{y0 + PANEL:.1f}" x2="{x0 + PANEL:.1f}" y2="{y0:.1f}" stroke="{FAINT}" '
        'stroke-width="1" stroke-dasharray="4 3"/>'
    )
    rows = [r for r in metrics.get("reliability", []) if r.get("attempts") and r.get("mean_predicted") is not None]
    biggest = max((r["attempts"] for r in rows), default=1)
    for r in rows:
        cx = x0 + PANEL * float(r["mean_predicted"])
        cy = y0 + PANEL * (1 - float(r["observed_usable"]))
        radius = 3 + 9 * math.sqrt(r["attempts"] / biggest)
        out.append(
            f'<circle cx="{cx:.1f}" cy="{cy:.1f}" r="{radius:.1f}" fill="{ACCENT}" fill-opacity="0.55" '
            f'stroke="{ACCENT}"><title>{escape(str(r["attempts"]))} attempts</title></circle>'
        )
        out.append(_text(cx + radius + 2, cy + 4, str(r["attempts"]), 9, fill=FAINT))
    if not rows:
        out.append(_text(x0 + PANEL / 2, y0 + PANEL / 2, "no reliability table recorded", 11, "middle", fill=FAINT))
    return out


def _tick(value: float, span: float) -> str:
    """A tick label with as many decimals as the axis span needs (never "-0")."""
    decimals = max(0, 2 - int(math.floor(math.log10(span)))) if span > 0 else 2
    text = f"{value:.{decimals}f}"
    return text[1:] if text.startswith("-") and float(text) == 0 else text


def effect_curve(m: MethodModel, k: int, n: int = CURVE_POINTS) -> tuple[np.ndarray, np.ndarray] | None:
    """(feature values over the trained range, p_usable with every other term at its training mean)."""
    if m.feature_min is None or m.feature_max is None:
        return None
    lo, hi = float(m.feature_min[k]), float(m.feature_max[k])
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return None
    if hi <= lo:
        hi = lo + 1.0
    x = np.linspace(lo, hi, n)
    term = m.terms[k]
    logit = m.intercept + m.coef[k] * (term.values(x) - m.mean[k]) / m.scale[k]
    return x, 1.0 / (1.0 + np.exp(-logit))


def term_panel(x0: float, y0: float, m: MethodModel, k: int) -> list[str]:
    """The odds over the trained range of term ``k``'s feature."""
    term = m.terms[k]
    spec = CATALOGUE[term.feature]
    out = [
        _text(x0, y0 - 22, term.describe(), 12, weight="bold"),
        _text(x0, y0 - 8, f"declared: {MODEL_DIRECTIONS.get(term.direction, term.direction)}", 10, fill=FAINT),
    ]
    curve = effect_curve(m, k)
    unit = unit_text(spec.unit)
    xlabel = f"{spec.label or term.feature}" + (f" [{unit}]" if unit else "")
    if curve is None:
        out += _axes(x0, y0, xlabel, "odds of a usable result", [], _P_TICKS)
        out.append(_text(x0 + PANEL / 2, y0 + PANEL / 2, "training range not recorded", 11, "middle", fill=FAINT))
        return out
    x, p = curve
    lo, hi = float(x[0]), float(x[-1])
    ticks = [(f, _tick(lo + f * (hi - lo), hi - lo)) for f in (0.0, 0.5, 1.0)]
    out += _axes(x0, y0, xlabel, "odds of a usable result", ticks, _P_TICKS)
    points = " ".join(f"{x0 + PANEL * (xi - lo) / (hi - lo):.1f},{y0 + PANEL * (1 - pi):.1f}" for xi, pi in zip(x, p))
    out.append(f'<polyline points="{points}" fill="none" stroke="{ACCENT}" stroke-width="2"/>')
    w = m.coef[k] / m.scale[k]
    base = unit_text(spec.unit)
    per = f"({base})²" if term.transform == "square" else base
    out.append(_text(x0 + PANEL - 4, y0 + 14, f"{w:+.3g} log-odds per {per}".rstrip(), 10, "end", fill=FAINT))
    return out


def model_svg(model: SiteModel, title: str = "site model") -> str:
    """The whole picture as SVG text."""
    per_row = max(1, (WIDTH - MARGIN_LEFT) // (PANEL + GAP))
    body: list[str] = []
    y = HEADER
    for method, m in model.methods.items():
        label = METHOD_LABELS[method]
        metrics = m.metrics
        summary = label
        if "roc_auc" in metrics:
            summary += (
                f": {metrics.get('attempts')} attempts, cross-validated ROC AUC {metrics['roc_auc']:.2f}, "
                f"Brier {metrics.get('brier', float('nan')):.3f}"
            )
        body.append(_text(12, y, summary, 14, weight="bold"))
        for n in range(len(m.terms) + 1):  # the reliability panel, then one per term
            if n and n % per_row == 0:
                y += SECTION
            x0 = MARGIN_LEFT + (n % per_row) * (PANEL + GAP)
            body += reliability_panel(x0, y + 48, metrics) if n == 0 else term_panel(x0, y + 48, m, n - 1)
        dropped = metrics.get("dropped_terms") or []
        if dropped:
            names = ", ".join(d["term"] for d in dropped)
            body.append(
                _text(12, y + 48 + PANEL + 52, f"left out (against its declared direction): {names}", 10, fill=FAINT)
            )
        y += SECTION + 20
    height = y + 10
    head = [
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{WIDTH}" height="{height}" '
        f'viewBox="0 0 {WIDTH} {height}">',
        f"<title>{escape(title)}: what the site model knows</title>",
        f'<rect x="0" y="0" width="{WIDTH}" height="{height}" fill="#ffffff"/>',
        _text(12, 24, f"Site model {title}", 16, weight="bold"),
        _text(
            12,
            42,
            "Odds of a usable surface map; each term over the range it was trained on, the others at "
            "their training mean.",
            11,
            fill=FAINT,
        ),
    ]
    return "\n".join(head + body + ["</svg>"]) + "\n"
