"""Plain text of one :class:`advisor.decision.Call`, for pipes, logs, mail and ``advisory.txt``.

The same lines as the panel (:func:`advisor.views.screen.screen_lines`) without colour or
borders: a title line, the verdict as ``VERDICT: ...`` (easy to grep), ..., the feed, and the
verdict again on the last line.
"""

from __future__ import annotations

from advisor.decision import Call
from advisor.views.context import Context
from advisor.views.panel import short_path
from advisor.views.screen import COMPACT_LINES, DETAILS_HINT, Line, plain_text, screen_lines


def render_plain(
    call: Call,
    ctx: Context,
    width: int = 80,
    details: bool = False,
    status: int | None = None,
    hint: str = DETAILS_HINT,
) -> str:
    """The call as text folded to ``width`` columns; the compact default fits 80×24."""
    lines = screen_lines(
        call, ctx, width, max_lines=COMPACT_LINES, details=details, status=status, hint=hint, plain=True
    )
    title: Line = [(f"advisor · {ctx.site_name}", None)]
    parts = ctx.feed_source.split(" + ")
    room = max(12, (width - len("feed: ") - 3 * (len(parts) - 1)) // len(parts))
    sources = " + ".join(short_path(s, room) for s in parts)
    feed: list[Line] = [] if details else [[(f"feed: {sources}", None)]]
    return plain_text([title, *lines[:-1], *feed, lines[-1]])
