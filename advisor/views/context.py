"""What every view shows around a result: the :class:`Context` it was made in and the cautions."""

from __future__ import annotations

from dataclasses import dataclass, replace

__all__ = ["CAUTIONS", "CAUTION_SHORT", "Context", "with_note"]

CAUTIONS = (
    "Advisory only — not a safety system.",
    "Stow the antenna at the site's wind limits regardless of this tool.",
    "Keep the dish away from the Sun by the site's own limits and interlocks: the calibrator choice "
    "avoids the Sun, but does not replace them.",
    "Laser scanners can be hazardous to eyes: follow the site's laser-safety procedure and keep "
    "people off the structure during scans and surface moves.",
    "Defer to local rules and the site's responsible staff.",
)
#: The cautions in one line, for the compact screen (the full text is in --details, JSON and HTML).
CAUTION_SHORT = "Advisory only — not a safety system; site procedures come first."


@dataclass(frozen=True)
class Context:
    """What the call was made on, for titles and JSON."""

    site_name: str
    time_zone: str
    feed_source: str
    is_demo: bool
    data_quality: dict
    next_window: dict | None = None
    notes: tuple[str, ...] = ()
    look_ahead: dict | None = None  # how long a correction holds, until when a postpone lasts, forecast check


def with_note(ctx: Context, note: str | None) -> Context:
    """``ctx`` with one more note line (a Context is frozen); ``ctx`` itself when ``note`` is empty."""
    return ctx if not note else replace(ctx, notes=tuple(ctx.notes) + (note,))
