"""The terminal view of one :class:`advisor.decision.Call`: a rich panel, verdict first and last.

The lines are :func:`advisor.views.screen.screen_lines`; this module only draws them in a panel
whose top border names the site and whose bottom border names the feed (shortened, not cut).
rich is imported only when a panel is drawn, so piped output stays light.
"""

from __future__ import annotations

import contextlib
import os
from pathlib import Path, PurePath
from typing import TYPE_CHECKING

from advisor.decision import Call
from advisor.io.bundled import demo_dir
from advisor.views.context import Context
from advisor.views.screen import COMPACT_LINES, DETAILS_HINT, screen_lines
from advisor.vocabulary import VERDICT

if TYPE_CHECKING:
    from rich.panel import Panel

#: Columns the panel's borders and padding take.
PANEL_FRAME = 4


def short_path(path: str, max_len: int) -> str:
    """``path`` within ``max_len`` characters: ``bundled demo: larch_basin_mast.csv`` (or ``demo:
    larch_basin_mast.csv`` where that is too long) for the demo's own files, relative to the
    working folder when below it, whole when it fits, else ``…/`` and as many trailing folders as
    fit (``…/weather/mast_feed.csv``), else the file name's end."""
    with contextlib.suppress(ValueError, OSError):
        name = str(Path(path).resolve().relative_to(demo_dir().resolve()))
        return next((label for label in (f"bundled demo: {name}", f"demo: {name}") if len(label) <= max_len), name)
    with contextlib.suppress(ValueError):
        path = str(PurePath(path).relative_to(os.getcwd()))
    if len(path) <= max_len:
        return path
    parts = PurePath(path).parts
    for k in range(len(parts) - 1, 0, -1):
        tail = "…/" + "/".join(parts[-k:])
        if len(tail) <= max_len:
            return tail
    return "…" + path[-(max_len - 1) :]


def feed_title(source: str, width: int) -> str:
    """The bottom border's feed note (one or several sources joined by ' + ')."""
    sources = source.split(" + ")
    room = max(12, (width - 12) // len(sources) - 3)
    return "feed: " + " + ".join(short_path(s, room) for s in sources)


def render_panel(
    call: Call,
    ctx: Context,
    width: int = 80,
    height: int = 24,
    details: bool = False,
    status: int | None = None,
    hint: str = DETAILS_HINT,
) -> Panel:
    """The terminal view, ``width`` columns wide; the compact default fits ``height`` lines."""
    from rich.console import Group
    from rich.panel import Panel
    from rich.text import Text

    inner = max(40, width - PANEL_FRAME)
    # a taller terminal shows more of the reasons; the borders, the command and the prompt take four lines
    lines = screen_lines(
        call, ctx, inner, max_lines=max(COMPACT_LINES, height - 4), details=details, status=status, hint=hint
    )
    body = [Text.assemble(*[(t, s) if s else t for t, s in line], no_wrap=True, overflow="ellipsis") for line in lines]
    verdict = VERDICT[call.verdict]
    return Panel(
        Group(*body),
        title=Text(f"advisor · {ctx.site_name}"),
        title_align="left",
        border_style=verdict.style.split()[-1],
        subtitle=Text(feed_title(ctx.feed_source, width)),
        subtitle_align="left",
        width=width,
    )
