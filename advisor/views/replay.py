"""The ``advisor replay`` summary for the terminal: hours per verdict, per month, a heat strip,
scores against recorded attempts and the rule-set comparison.

    replay_renderable(summary, dominant, width)

``summary`` is the dict ``replay --json`` prints; ``dominant`` is
:func:`advisor.evaluation.replay.dominant_by_month_hour`.  rich is imported only when drawn.
"""

from __future__ import annotations

import pandas as pd

from advisor import fmt
from advisor.fmt import plural
from advisor.vocabulary import METHOD_LABEL, VERDICT, VERDICTS

#: Shown in the heat strip where a month has no hours at that hour of day.
NO_HOURS_LETTER = "·"


def pct(rate: float | None) -> str:
    """``45%``, or ``n/a`` when there was nothing to divide by."""
    return "n/a" if rate is None else f"{rate:.0%}"


def heat_strip(dominant: pd.DataFrame):
    """One line per month, one cell per local hour: the letter of the verdict with most hours."""
    from rich.text import Text

    strip = Text("Dominant verdict by local hour of day\n", style="bold")
    for v in VERDICTS:
        strip.append(f" {VERDICT[v].letter} ", style=VERDICT[v].style)
        strip.append(f" {v}  ")
    strip.append("\n")
    strip.append("         " + "".join(f"{h:<3d}" for h in range(0, 24, 3)).rstrip() + "\n", style="dim")
    for month, row in dominant.iterrows():  # one line per month
        strip.append(f"{month}  ")
        for verdict in row:
            if verdict:
                strip.append(VERDICT[verdict].letter, style=VERDICT[verdict].style)
            else:
                strip.append(NO_HOURS_LETTER, style="dim")
        strip.append("\n")
    return strip


def _attempt_parts(attempts: dict) -> list:
    from rich import box
    from rich.table import Table
    from rich.text import Text

    parts: list = [
        Text("Against recorded attempts", style="bold underline"),
        f"  {attempts['attempts_covered']} of {plural(attempts['attempts'], 'attempt')} fall in the replayed period.",
        "  go: the advice allowed the method (its call, or feasible with the other preferred); false go: go, and "
        "the attempt failed; missed: the advice ruled the method out, and the attempt was usable.",
    ]
    table = Table(box=box.SIMPLE_HEAD)
    for h in ("method", "attempts", "usable", "go", "false go", "missed"):
        table.add_column(h, justify="left" if h == "method" else "right", no_wrap=True)
    for method, m in attempts["methods"].items():
        table.add_row(
            METHOD_LABEL[method],
            str(m["attempts"]),
            str(m["usable"]),
            str(m["allowed"]),
            f"{m['false_go']} ({pct(m['false_go_rate'])})",
            f"{m['missed']} ({pct(m['missed_rate'])})",
        )
    parts.append(table)
    for method, m in attempts["methods"].items():
        if not m["per_rule"]:
            continue
        rules = Table(
            title=f"{METHOD_LABEL[method]}: rules that fired at its attempts", box=box.SIMPLE_HEAD, title_justify="left"
        )
        for h in ("rule", "fired at", "failed", "false go", "missed"):
            rules.add_column(h, justify="left" if h == "rule" else "right", no_wrap=True)
        for r in m["per_rule"]:
            rules.add_row(
                r["rule"],
                str(r["attempts_when_fired"]),
                str(r["failed_when_fired"]),
                str(r["false_go_when_fired"]),
                str(r["missed_when_fired"]),
            )
        parts.append(rules)
    return parts


def _comparison_parts(comparison: dict, attempts: dict | None) -> list:
    from rich.text import Text

    parts: list = [
        Text("Compared rule set", style="bold underline"),
        f"  {comparison['hours_changed']:.1f} h change verdict",
    ]
    parts += [f"    {t['from']} → {t['to']}: {t['hours']:.1f} h" for t in comparison["transitions"]]
    parts += [f"    by {r['rule']}: {r['hours_changed']:.1f} h" for r in comparison["by_rule"]]
    if "attempts_b" in comparison and attempts:
        for method, a in attempts["methods"].items():
            b = comparison["attempts_b"]["methods"][method]
            parts.append(
                f"  {METHOD_LABEL[method]}: false-go rate {pct(a['false_go_rate'])} → "
                f"{pct(b['false_go_rate'])}; missed rate {pct(a['missed_rate'])} → {pct(b['missed_rate'])}"
            )
    return parts


_WEATHER_WORDS = {
    "wind_above_limit": "mean wind above the limit",
    "fog": "fog likely",
    "precipitation": "precipitation",
    "night": "night",
    "gusts_estimated": "gusts estimated",
    "sensor_dropout": "sensor dropout",
}
_INPUT_WORDS = {
    "precip_mm_h": "precipitation",
    "visibility_m": "visibility",
    "pressure_hpa": "pressure",
    "solar_wm2": "irradiance",
}


def _weather_parts(summary: dict) -> list:
    """Hours of the weather behind the verdicts and of the inputs not seen (never silently fine)."""
    weather, not_seen = summary.get("weather"), summary.get("not_seen")
    if not weather:
        return []
    parts: list = ["Weather hours: " + " · ".join(f"{_WEATHER_WORDS.get(k, k)} {v:.1f} h" for k, v in weather.items())]
    for name, h in (not_seen or {}).items():
        parts.append(
            f"Not seen: {_INPUT_WORDS.get(name, name)} {h['hours']:.1f} h (scan advised in "
            f"{h['scan_hours']:.1f} h of them; each such call names it as not seen)"
        )
    return parts


def replay_renderable(summary: dict, dominant: pd.DataFrame, width: int = 80):
    """The summary as one rich renderable (print it with a Console; markup in plain strings is rich's)."""
    from rich import box
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    total = sum(summary["hours"].values()) or 1.0
    hours = ", ".join(f"{v} {summary['hours'][v]:.1f} h ({summary['hours'][v] / total:.0%})" for v in VERDICTS)
    # folded here, never between a number and its unit, so a pipe shows the same as a terminal
    line = Text("\n".join(fmt.wrap(f"Hours per verdict: {hours}", width, indent="  ")), no_wrap=True)
    parts: list = [
        f"Replay of {summary['feed']}",
        f"{summary['from_utc']} → {summary['to_utc']} · {summary['rows']} rows · "
        f"{summary['target_freq_ghz']:g} GHz · {summary['rules']} rules",
        line,
    ]
    for warning in summary.get("warnings") or []:
        parts.append(Text(f"Warning: {warning}", style="bold yellow"))

    months = Table(title="Hours per month (site local time)", box=box.SIMPLE_HEAD, title_justify="left")
    months.add_column("month")
    for v in VERDICTS:
        months.add_column(v, justify="right")
    for month, row in summary["by_month"].items():
        months.add_row(month, *(f"{row[v]:.1f}" for v in VERDICTS))
    parts += [months, heat_strip(dominant)]
    parts += _weather_parts(summary)
    if summary["attempts"]:
        parts += _attempt_parts(summary["attempts"])
    if summary["comparison"]:
        parts += _comparison_parts(summary["comparison"], summary["attempts"])
    return Group(*parts)
