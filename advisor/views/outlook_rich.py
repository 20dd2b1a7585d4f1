"""The outlook in colour: a rich panel (strip, windows, next windows, spans) and its SVG picture.

rich is imported only when a view is drawn, so piped output stays light.
"""

from __future__ import annotations

import os

from advisor.evaluation.outlook import Outlook
from advisor.views.context import CAUTIONS, Context
from advisor.views.outlook_parts import (WIDE_TABLE_MIN, WINDOW_HEADERS, header_lines, next_window_lines,
                                         span_lines, sun_text, tz_abbrev, window_list_lines, window_rows,
                                         windows_heading)
from advisor.views.outlook_strip import LABEL_W, legend_entries, strip_lines, wrap_entries
from advisor.vocabulary import DEMO_BANNER, METHOD_LABEL

#: Columns of the window table that hold numbers (right-aligned).
NUMERIC_WINDOW_HEADERS = ("length", "wind max", "gust max", "spread min", "mean η", "advised")
#: Colour of each method's windows.
METHOD_STYLE = {"scan": "green", "astronomical": "cyan"}


def outlook_renderable(outlook: Outlook, ctx: Context, width: int = 100):
    """The rich view: a panel with the coloured strip, the windows table and the next windows."""
    from rich import box
    from rich.console import Group, RenderableType
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    head = header_lines(outlook, ctx)
    parts: list[RenderableType] = [Text(ctx.site_name, style="bold"), *(Text(line) for line in head[1:])]
    if ctx.is_demo:
        parts.append(Text(DEMO_BANNER, style="bold magenta"))
    for note in (*ctx.notes, *outlook.notes):
        parts.append(Text(note, style="italic"))
    parts.append(Text(""))
    inner = max(40, width - 4)
    for segs in strip_lines(outlook, inner):
        parts.append(Text.assemble(*[(t, s) if s else t for t, s in segs], no_wrap=True, overflow="crop"))
    for segs in wrap_entries(legend_entries(outlook), inner, plain=False):
        parts.append(Text.assemble(*[(t, s) if s else t for t, s in segs]))
    sun = sun_text(outlook)
    if sun:
        parts.append(Text(sun, style="dim"))
    parts.append(Text(""))
    parts.append(Text(windows_heading(outlook), style="bold underline"))
    rows = window_rows(outlook)
    if rows and width < WIDE_TABLE_MIN:
        for line in window_list_lines(outlook):
            lead = line.lstrip()
            style = next((METHOD_STYLE[m] for m, label in METHOD_LABEL.items() if lead.startswith(label)), "dim")
            parts.append(Text(line, style=style))
    elif rows:
        table = Table(box=box.SIMPLE_HEAD, pad_edge=False, expand=False)
        for h in WINDOW_HEADERS:
            table.add_column(h, justify="right" if h in NUMERIC_WINDOW_HEADERS else "left")
        for r in rows:
            method = next(m for m, label in METHOD_LABEL.items() if label == r[0])
            table.add_row(*r, style=METHOD_STYLE[method])
        parts.append(table)
    else:
        parts.append(Text("  none"))
    if not (rows and width >= WIDE_TABLE_MIN):
        parts.append(Text(""))
    parts.append(Text(f"Next window (local time {tz_abbrev(outlook.start_utc, outlook.site.time_zone)})",
                      style="bold underline"))
    for line in next_window_lines(outlook):
        parts.append(Text(line, style="bold"))
    parts.append(Text(""))
    parts.append(Text(f"Verdict spans (local time {tz_abbrev(outlook.start_utc, outlook.site.time_zone)})",
                      style="bold underline"))
    for line in span_lines(outlook):
        parts.append(Text(line))
    parts.append(Text(""))
    parts.append(Text(" ".join(CAUTIONS), style="dim italic"))
    return Panel(Group(*parts), title=f"advisor outlook · {outlook.freq_ghz:g} GHz", title_align="left",
                 border_style="blue",
                 subtitle=Text(f"feed: {ctx.feed_source}"), subtitle_align="left", width=width)


def outlook_svg(outlook: Outlook, ctx: Context) -> str:
    """The coloured outlook as an SVG picture, wide enough for the whole strip on one row (100..200 columns)."""
    from rich.console import Console

    width = int(min(200, max(100, LABEL_W + len(outlook.steps) + 4)))
    with open(os.devnull, "w") as sink:
        console = Console(record=True, width=width, file=sink, force_terminal=True, color_system="truecolor")
        console.print(outlook_renderable(outlook, ctx, width))
    return console.export_svg(title=f"advisor outlook · {ctx.site_name}")
