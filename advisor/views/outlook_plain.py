"""The outlook as plain text, for pipes and logs: letters carry the verdicts, no colour needed."""

from __future__ import annotations

from advisor import fmt
from advisor.evaluation.outlook import Outlook
from advisor.views.context import CAUTIONS, Context
from advisor.views.outlook_parts import (
    WIDE_TABLE_MIN,
    WINDOW_HEADERS,
    header_lines,
    next_window_lines,
    span_lines,
    sun_text,
    tz_abbrev,
    window_list_lines,
    window_rows,
    windows_heading,
)
from advisor.views.outlook_strip import legend_entries, strip_lines, wrap_entries
from advisor.views.panel import short_path
from advisor.vocabulary import DEMO_BANNER


def _plain_segments(segs) -> str:
    return "".join(text for text, _ in segs).rstrip()


def _wrap(text: str, width: int, indent: str = "") -> list[str]:
    """``text`` folded at word boundaries to ``width`` columns (never between a number and its
    unit); continuation lines get ``indent``."""
    if len(text) <= width:
        return [text]
    lead = text[: len(text) - len(text.lstrip())]
    return fmt.wrap(text.lstrip(), max(40, width), indent=lead + indent, first_indent=lead)


def render_plain_outlook(outlook: Outlook, ctx: Context, width: int = 100) -> str:
    """Plain text for pipes and logs: letters carry the verdicts, no colour needed; folded to ``width``."""
    tzname = tz_abbrev(outlook.start_utc, outlook.site.time_zone)
    lines: list[str] = []

    def add(text: str, indent: str = "") -> None:
        lines.extend(_wrap(text, width, indent))

    for text in header_lines(outlook, ctx):
        add(text)
    if ctx.is_demo:
        add(DEMO_BANNER)
    for note in (*ctx.notes, *outlook.notes):
        add(note, "  ")
    lines.append("")
    lines.extend(_plain_segments(segs) for segs in strip_lines(outlook, width))
    lines.extend(wrap_entries(legend_entries(outlook), width))
    sun = sun_text(outlook)
    if sun:
        add(sun, "  ")
    lines.append("")
    add(windows_heading(outlook) + ":", "  ")
    rows = window_rows(outlook)
    if rows and width < WIDE_TABLE_MIN:
        for line in window_list_lines(outlook):
            add(line, "  ")
    elif rows:
        table = [WINDOW_HEADERS, *rows]
        widths = [max(len(r[k]) for r in table) for k in range(len(WINDOW_HEADERS))]
        lines.extend("  " + "  ".join(v.ljust(wd) for v, wd in zip(r, widths)).rstrip() for r in table)
    else:
        lines.append("  none")
    lines.append("")
    lines.append(f"Next window (local time {tzname}):")
    for line in next_window_lines(outlook):
        add(line, "  ")
    lines.append("")
    lines.append(f"Verdict spans (local time {tzname}):")
    for line in span_lines(outlook):
        add(line, "    ")
    lines.append("")
    add("feed: " + " + ".join(short_path(source, width - 8) for source in ctx.feed_source.split(" + ")), "  ")
    add("Cautions: " + " ".join(CAUTIONS), "  ")
    return "\n".join(lines) + "\n"
