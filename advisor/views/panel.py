"""The terminal view of one :class:`advisor.decision.Call`: a rich panel, verdict first.

rich is imported only when a panel is drawn, so piped output stays light.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from advisor.decision import Call
from advisor.views.callparts import (CANDIDATE_HEADERS, NUMERIC_HEADERS, candidate_rows, key_features,
                                     next_window_text, ordered_reasons, when_text)
from advisor.views.context import CAUTIONS, Context
from advisor.vocabulary import DEMO_BANNER, EFFECT_LABEL, VERDICT

if TYPE_CHECKING:
    from rich.panel import Panel

#: Colour of each effect's word in the reasons table.
EFFECT_STYLE = {"block": "red", "warn": "yellow", "add_error": "magenta", "info": "cyan"}


def render_panel(call: Call, ctx: Context) -> Panel:
    """The terminal view: verdict first, then candidates, reasons, key features, cautions."""
    from rich import box
    from rich.console import Group, RenderableType
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    verdict = VERDICT[call.verdict]
    parts: list[RenderableType] = []
    head = Text()
    head.append(f" {verdict.label} ", style=verdict.style)
    head.append(f"  {call.headline}")
    parts.append(head)
    parts.append(Text(f"{when_text(call, ctx)} · target {call.freq_ghz:g} GHz", style="bold"))
    if ctx.is_demo:
        parts.append(Text(DEMO_BANNER, style="bold magenta"))
    for note in ctx.notes:
        parts.append(Text(note, style="italic"))

    table = Table(box=box.SIMPLE_HEAD, expand=False, pad_edge=False)
    for h in CANDIDATE_HEADERS[:-1]:  # blocking rules are listed under Reasons
        table.add_column(h, justify="right" if h in NUMERIC_HEADERS else "left", no_wrap=True)
    for row in candidate_rows(call):
        table.add_row(*row[:-1], style="green" if row[1] == "yes" else "dim")
    parts.append(table)

    reasons = Table(box=None, show_header=False, pad_edge=False, expand=False)
    reasons.add_column("effect", style="bold", no_wrap=True)
    reasons.add_column("message")
    for r in ordered_reasons(call):
        message = Text(r.message)
        message.append(f"  [{r.rule} · {r.applies_to}]", style="dim")
        reasons.add_row(Text(EFFECT_LABEL.get(r.effect, r.effect), style=EFFECT_STYLE.get(r.effect, "")), message)
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
        parts.append(Text(next_window_text(ctx.next_window, ctx.time_zone), style="bold"))
    parts.append(Text(""))
    parts.append(Text(" ".join(CAUTIONS), style="dim italic"))
    # Text, not markup: a site name or path with [brackets] is shown as written, never parsed.
    return Panel(Group(*parts), title=Text(f"advisor · {ctx.site_name}"), title_align="left",
                 border_style=verdict.style.split()[-1], subtitle=Text(f"feed: {ctx.feed_source}"),
                 subtitle_align="left")
