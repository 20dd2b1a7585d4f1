"""One error family for everything a user can get wrong.

Every error carries where it happened (``source`` file, ``line``, ``column``,
``field``) and a ``hint`` saying how to fix it.  The CLI prints it as one line::

    advisor: error: site.yaml:12: thresholds.max_wind_ms: expected a number, got 'fast' (write e.g. 4.0)

and exits with status 2.  ``InsufficientData`` is the one exception that means
"the input is well formed but cannot support a call" (exit 12).
"""

from __future__ import annotations

from advisor.text import clean_text, shorten

#: Longest file name / field [characters] and message / hint shown in one error line.
MAX_SOURCE_CHARS = 160
MAX_MESSAGE_CHARS = 400


class AdvisorError(Exception):
    """Base class: a problem with the user's input, reported on one line."""

    def __init__(
        self,
        message: str,
        *,
        source: str | None = None,
        line: int | None = None,
        column: int | None = None,
        field: str | None = None,
        hint: str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.source = source
        self.line = line
        self.column = column
        self.field = field
        self.hint = hint

    def location(self) -> str:
        """``file:line:column`` (the parts that are known), or ``''``; a very long path is elided."""
        parts = [str(p) for p in (self.source, self.line, self.column) if p is not None]
        if self.source is not None:
            parts[0] = shorten(clean_text(self.source), MAX_SOURCE_CHARS)
        return ":".join(parts)

    def one_line(self) -> str:
        """The whole error as a single line, without the ``advisor: error:`` prefix.

        Control characters and escape sequences (which may come from the files being read) are
        removed, and over-long parts are elided in the middle, so the line is safe for a
        terminal or cron mail.
        """
        text = shorten(clean_text(self.message), MAX_MESSAGE_CHARS)
        if self.field:
            text = f"{shorten(clean_text(self.field), MAX_SOURCE_CHARS)}: {text}"
        loc = self.location()
        if loc:
            text = f"{loc}: {text}"
        if self.hint:
            text = f"{text} ({shorten(clean_text(self.hint), MAX_MESSAGE_CHARS)})"
        return " ".join(text.split())

    def __str__(self) -> str:  # pragma: no cover - trivial
        return self.one_line()


class UsageError(AdvisorError):
    """A command-line argument is malformed."""


class FeedError(AdvisorError):
    """A weather feed cannot be read or mapped."""


class SiteError(AdvisorError):
    """A site configuration file is invalid."""


class RegistryError(AdvisorError):
    """The reference-scan registry is invalid."""


class RulesError(AdvisorError):
    """A rule file is invalid."""


class ConditionError(RulesError):
    """A rule condition or expression does not parse or does not type-check.

    ``column`` is the 1-based character position within the condition text.
    """


class ModelError(AdvisorError):
    """A model file is malformed, truncated or does not match the features."""


class InsufficientData(AdvisorError):
    """Input is well formed but too little or too poor to support a call (exit 12)."""


def internal_error_text(exc: BaseException) -> str:
    """``Type: message`` of an unexpected exception on one line: no control characters, elided if long."""
    return shorten(" ".join(clean_text(f"{type(exc).__name__}: {exc}").split()), 300)
