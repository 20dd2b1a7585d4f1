"""``advisor feed inspect``: what the advisor makes of a feed file, as plain text within 80 columns.

    text = render_feed_report(report, how, guess)

``report`` is :class:`advisor.evaluation.feedcheck.FeedReport`; ``how`` says which layout read
the file (a site file, or a guess); ``guess`` (optional) adds what was guessed and what a site
file must still say.
"""

from __future__ import annotations

import textwrap

from advisor.evaluation.feedcheck import FeedReport
from advisor.io.feedguess import Guess
from advisor.io.feedlayout import OPTIONAL_COLUMNS

__all__ = ["render_feed_report", "render_guess", "WIDTH"]

WIDTH = 80
#: Short words for the canonical inputs in the table.
SHORT = {
    "wind_mean_ms": "wind mean",
    "wind_gust_ms": "gusts",
    "air_temp_c": "air temp",
    "rel_humidity_pct": "humidity",
    "dew_point_c": "dew point",
    "pressure_hpa": "pressure",
    "precip_mm_h": "precip",
    "visibility_m": "visibility",
    "solar_wm2": "irradiance",
}
_UNIT = {"degC": "°C", "degF": "°F", "W/m2": "W/m²"}


def _wrap(text: str, indent: str = "", hang: str = "  ") -> list[str]:
    return textwrap.wrap(
        text,
        WIDTH,
        initial_indent=indent,
        subsequent_indent=indent + hang,
        break_on_hyphens=False,
        break_long_words=True,
    ) or [indent]


def _minutes(m: float | None) -> str:
    if m is None:
        return "n/a"
    if m >= 2 * 1440:
        return f"{m / 1440:,.0f} days"
    if m >= 120:
        return f"{m / 60:g} h"
    return f"{m:g} min"


def _number(v: float | None) -> str:
    if v is None:
        return "—"
    return f"{v:.0f}" if abs(v) >= 100 or v == int(v) else f"{v:.1f}"


def _table(report: FeedReport) -> list[str]:
    head = ("input", "logger column", "in", "values", "codes", "bad", "drops", "range (SI)")
    rows = []
    for c in report.columns:
        drops = f"{c.dropouts:,}" if c.canonical in OPTIONAL_COLUMNS else "—"
        span = f"{_number(c.low)}..{_number(c.high)}" if c.low is not None else "none"
        rows.append(
            (
                SHORT[c.canonical],
                c.source,
                _UNIT.get(c.unit, c.unit),
                f"{c.present:,}",
                f"{c.coded:,}",
                f"{c.implausible:,}",
                drops,
                span,
            )
        )
    widths = [max(len(r[k]) for r in [head, *rows]) for k in range(len(head))]
    room = WIDTH - (sum(widths) - widths[1]) - 2 * (len(head) - 1)
    widths[1] = max(10, min(widths[1], room))
    right = {3, 4, 5, 6}

    def fmt(r) -> str:
        cells = []
        for k, value in enumerate(r):
            if len(value) > widths[k]:
                value = value[: widths[k] - 1] + "…"
            cells.append(value.rjust(widths[k]) if k in right else value.ljust(widths[k]))
        return "  ".join(cells).rstrip()

    return [fmt(head), *(fmt(r) for r in rows)]


def render_feed_report(report: FeedReport, how: str, guess: Guess | None = None) -> str:
    """The inspection report (see the module docstring)."""
    lines = _wrap(f"feed: {report.source}")
    lines += _wrap(f"read with: {how}")
    span = "no rows"
    if report.first_utc is not None:
        span = f"{report.first_utc:%Y-%m-%d %H:%M} → {report.last_utc:%Y-%m-%d %H:%M} UTC"
    cadence = f"one sample every {_minutes(report.cadence_min)}" if report.cadence_min else "cadence unknown"
    lines += _wrap(f"rows: {report.rows:,} · {span} · {cadence}")
    lines += _wrap(
        f"gaps: {report.gaps:,} longer than {_minutes(report.gap_limit_min)} (longest "
        f"{_minutes(report.longest_gap_min)}) · out of order: {report.out_of_order:,} sorted in · "
        f"duplicates: {report.duplicates:,}"
    )
    lines += _wrap(
        f"limits: a call needs a sample ≤ {_minutes(report.age_limit_min)} old; steps over "
        f"{_minutes(report.gap_limit_min)} are gaps"
    )
    if report.partial_last_line:
        lines.append("last line: no newline yet — ignored as still being written")
    lines.append("")
    lines += _table(report)
    lines += _wrap(
        "in: the logger's unit · values: usable · codes: missing-value codes · bad: implausible "
        "(range or step) · drops: an optional sensor fell silent after reporting steadily · range: "
        "m/s, °C, %, hPa, mm/h, m, W/m²"
    )
    if report.absent:
        lines += _wrap(
            "not in the feed: "
            + ", ".join(SHORT[a] for a in report.absent)
            + " (never read as fine: calls name them as not seen)"
        )
    if report.coded_cells:
        cells = ", ".join(f"'{k}' {v:,}" for k, v in report.coded_cells.items())
        lines += _wrap(f"missing codes: {cells} cells; {report.rows_with_codes:,} rows affected")
    if guess is not None and "gust_factor" in guess.todos:
        lines += _wrap(
            f"gusts: no gust column; estimated here as {guess.layout.gust_factor:g} × mean wind only "
            "to read the file (the site file must set feed.gust_factor)"
        )
    elif report.gust_estimated:
        note = next((c.note for c in report.columns if c.canonical == "wind_gust_ms"), "")
        lines += _wrap(f"gusts: {note} (no gust sensor); every view marks them as estimated")
    zone = report.zone
    if zone is None:
        lines += _wrap("time zone: not checked (needs the site's position: --site)")
    elif zone.status == "ok":
        lines += _wrap(f"time zone: ok — {zone.sunlit_rows:,} sunlit samples agree with the computed sun")
    elif zone.status == "unchecked":
        lines += _wrap(f"time zone: not checked — {zone.message}")
    else:
        word = "REFUSED" if zone.status == "refuse" else "DOUBTFUL"
        lines += _wrap(f"time zone: {word} — {zone.message}")
    if guess is not None:
        lines.append("")
        lines.append(render_guess(guess).rstrip("\n"))
    return "\n".join(lines) + "\n"


def render_guess(guess: Guess) -> str:
    """What was guessed about a file's layout and what a site file must still say."""
    lines = ["guessed (no --site):"]
    for key, why in guess.notes.items():
        lines += _wrap(f"{key}: {why}", "  ")
    for col in guess.columns.values():
        hours = f" over the hours in '{col.over_hours_from}'" if col.over_hours_from else ""
        lines += _wrap(f"{col.canonical} ← '{col.source}' in {col.unit}{hours}", "  ")
    if guess.layout.missing:
        lines += _wrap(
            "missing codes: " + ", ".join(f"{c:g}" if not isinstance(c, str) else c for c in guess.layout.missing), "  "
        )
    for key, what in guess.todos.items():
        lines += _wrap(f"TODO {key}: {what}", "  ")
    lines += _wrap("write it down with: advisor site new --feed FILE --out site.yaml", "  ")
    return "\n".join(lines) + "\n"
