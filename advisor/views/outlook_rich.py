"""The outlook in colour: a rich panel (strip, windows, next windows, spans) and its SVG picture.

rich is imported only when a view is drawn, so piped output stays light.
"""

from __future__ import annotations

import os

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
from advisor.views.outlook_strip import LABEL_W, legend_entries, strip_lines, wrap_entries
from advisor.views.panel import feed_title
from advisor.vocabulary import DEMO_BANNER, METHOD_LABEL

#: Columns of the window table that hold numbers (right-aligned).
NUMERIC_WINDOW_HEADERS = ("length", "wind max", "gust max", "spread min", "mean η", "advised")
#: Colour of each method's windows.
METHOD_STYLE = {"scan": "green", "astronomical": "cyan"}


def _folded(text: str, inner: int, style: str = "", indent: str = "  "):
    """``text`` folded here (never between a number and its unit), so rich does not fold it again."""
    from rich.text import Text

    lead = text[: len(text) - len(text.lstrip())]
    rows = fmt.wrap(text.lstrip(), inner, indent=lead + indent, first_indent=lead) if len(text) > inner else [text]
    return Text("\n".join(rows), style=style, no_wrap=True, overflow="ellipsis")


def outlook_renderable(outlook: Outlook, ctx: Context, width: int = 100):
    """The rich view: a panel with the coloured strip, the windows table and the next windows."""
    from rich import box
    from rich.console import Group, RenderableType
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    inner = max(40, width - 4)
    head = header_lines(outlook, ctx)
    parts: list[RenderableType] = [Text(ctx.site_name, style="bold"), *(_folded(line, inner) for line in head[1:])]
    if ctx.is_demo:
        parts.append(_folded(DEMO_BANNER, inner, "bold magenta"))
    for note in (*ctx.notes, *outlook.notes):
        parts.append(_folded(note, inner, "italic"))
    parts.append(Text(""))
    for segs in strip_lines(outlook, inner):
        parts.append(Text.assemble(*[(t, s) if s else t for t, s in segs], no_wrap=True, overflow="crop"))
    for segs in wrap_entries(legend_entries(outlook), inner, plain=False):
        parts.append(Text.assemble(*[(t, s) if s else t for t, s in segs]))
    sun = sun_text(outlook)
    if sun:
        parts.append(_folded(sun, inner, "dim"))
    parts.append(Text(""))
    parts.append(_folded(windows_heading(outlook), inner, "bold underline"))
    rows = window_rows(outlook)
    if rows and width < WIDE_TABLE_MIN:
        for line in window_list_lines(outlook):
            lead = line.lstrip()
            style = next((METHOD_STYLE[m] for m, label in METHOD_LABEL.items() if lead.startswith(label)), "dim")
            parts.append(_folded(line, inner, style))
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
    parts.append(
        Text(f"Next window (local time {tz_abbrev(outlook.start_utc, outlook.site.time_zone)})", style="bold underline")
    )
    for line in next_window_lines(outlook):
        parts.append(_folded(line, inner, "bold"))
    parts.append(Text(""))
    parts.append(
        Text(
            f"Verdict spans (local time {tz_abbrev(outlook.start_utc, outlook.site.time_zone)})", style="bold underline"
        )
    )
    for line in span_lines(outlook):
        parts.append(_folded(line, inner, indent="    "))
    parts.append(Text(""))
    parts.append(_folded(" ".join(CAUTIONS), inner, "dim italic", indent=""))
    return Panel(
        Group(*parts),
        title=f"advisor outlook · {fmt.freq_wave_text(outlook.freq_ghz)}",
        title_align="left",
        border_style="blue",
        subtitle=Text(feed_title(ctx.feed_source, width)),
        subtitle_align="left",
        width=width,
    )


#: The SVG around rich's drawing: the text area only (no imitation window, no title bar) and
#: fonts the viewer already has (no font loaded from the network: control rooms are often offline).
SVG_TEMPLATE = """<svg class="advisor-outlook" viewBox="0 0 {terminal_width} {terminal_height}" \
xmlns="http://www.w3.org/2000/svg">
<title>{title}</title>
<style>
.{unique_id}-matrix {{
    font-family: "DejaVu Sans Mono", Menlo, Consolas, "Liberation Mono", monospace;
    font-size: {char_height}px;
    line-height: {line_height}px;
    font-variant-east-asian: full-width;
}}
{styles}
</style>
<defs>
<clipPath id="{unique_id}-clip-terminal">
  <rect x="0" y="0" width="{terminal_width}" height="{terminal_height}" />
</clipPath>
{lines}
</defs>
<rect x="0" y="0" width="{terminal_width}" height="{terminal_height}" fill="{background}" />
<g clip-path="url(#{unique_id}-clip-terminal)">
{backgrounds}
<g class="{unique_id}-matrix">
{matrix}
</g>
</g>
</svg>
"""


def outlook_svg(outlook: Outlook, ctx: Context) -> str:
    """The coloured outlook as a self-contained SVG picture, wide enough for the whole strip on one
    row (100..200 columns): the text area alone, in fonts the viewer has."""
    import html

    from rich.console import Console
    from rich.terminal_theme import SVG_EXPORT_THEME

    width = int(min(200, max(100, LABEL_W + len(outlook.steps) + 4)))
    with open(os.devnull, "w") as sink:
        console = Console(record=True, width=width, file=sink, force_terminal=True, color_system="truecolor")
        console.print(outlook_renderable(outlook, ctx, width))
    title = html.escape(f"advisor outlook · {ctx.site_name}").replace("{", "{{").replace("}", "}}")
    template = SVG_TEMPLATE.replace("{title}", title).replace("{background}", SVG_EXPORT_THEME.background_color.hex)
    svg = console.export_svg(theme=SVG_EXPORT_THEME, code_format=template)
    return _with_margin(svg, SVG_MARGIN_PX)


#: Space around the drawing [px], so the panel's border is not flush with the picture's edge.
SVG_MARGIN_PX = 12


def _with_margin(svg: str, margin: float) -> str:
    """The picture with ``margin`` pixels of background on every side (view box and background grown)."""
    import re

    match = re.search(r'viewBox="0 0 ([\d.]+) ([\d.]+)"', svg)
    if not match:
        return svg
    w, h = (float(v) for v in match.groups())
    box = f"{-margin:g} {-margin:g} {w + 2 * margin:g} {h + 2 * margin:g}"
    svg = svg.replace(match.group(0), f'viewBox="{box}"', 1)
    return svg.replace(
        f'<rect x="0" y="0" width="{match.group(1)}" height="{match.group(2)}" fill=',
        f'<rect x="{-margin:g}" y="{-margin:g}" width="{w + 2 * margin:g}" height="{h + 2 * margin:g}" fill=',
        1,
    )
