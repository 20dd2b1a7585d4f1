"""The advisor's words: methods, verdicts and rule effects, each declared once.

    METHODS            ("scan", "astronomical")
    VERDICTS           the four calls, in the order every table lists them
    VERDICT[v]         letter, screen label, style, exit status and legend words of one call
    METHOD_LABEL[m]    how a method is called in text ("laser scan")
    EFFECTS            what a rule may do (block | warn | add_error) and how each view says it

Every view, command and check imports these; nothing re-types them.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "METHODS",
    "VERDICTS",
    "Verdict",
    "VERDICT",
    "EXIT_CODES",
    "LETTERS",
    "METHOD_LABEL",
    "APPLIES_TO",
    "EFFECTS",
    "REASON_EFFECTS",
    "EFFECT_LABEL",
    "DEMO_BANNER",
    "MODEL_TRANSFORMS",
    "MODEL_DIRECTIONS",
]

#: The two ways to measure and correct the surface.
METHODS: tuple[str, ...] = ("scan", "astronomical")

#: How a method is named in sentences, tables and legends.
METHOD_LABEL: dict[str, str] = {"scan": "laser scan", "astronomical": "astronomical"}


@dataclass(frozen=True)
class Verdict:
    """One possible call and everything a view needs to show it."""

    name: str
    letter: str  # one character, for timeline strips and CSV summaries
    label: str  # headline word(s) on the screen
    style: str  # rich style of the headline badge
    exit_status: int  # exit status of ``advisor check``
    meaning: str  # one line for --help and the README
    words: str  # a few words for legends ("scan now")


_VERDICT_LIST = (
    Verdict("scan", "S", "SCAN NOW", "bold black on green", 0, "take a laser scan now", "scan now"),
    Verdict(
        "astronomical",
        "A",
        "ASTRONOMICAL",
        "bold black on cyan",
        10,
        "use the astronomical method (holography on a calibrator)",
        "astronomical method",
    ),
    Verdict("postpone", "P", "POSTPONE", "bold black on yellow", 11, "neither method is worth doing now", "postpone"),
    Verdict(
        "undetermined",
        "U",
        "UNDETERMINED",
        "bold white on red",
        12,
        'data missing, stale or implausible (never "scan")',
        "undetermined (data bad)",
    ),
    Verdict(
        "no_correction",
        "N",
        "NO CORRECTION NEEDED",
        "bold black on white",
        13,
        "the site's uncorrected surface already meets the requirement at this frequency",
        "no correction needed",
    ),
)
VERDICT: dict[str, Verdict] = {v.name: v for v in _VERDICT_LIST}
VERDICTS: tuple[str, ...] = tuple(VERDICT)
#: Exit status of ``advisor check`` per verdict.
EXIT_CODES: dict[str, int] = {v.name: v.exit_status for v in _VERDICT_LIST}
#: One letter per verdict (timeline strips, replay heat strips).
LETTERS: dict[str, str] = {v.name: v.letter for v in _VERDICT_LIST}

#: What a rule's ``applies_to`` may say.
APPLIES_TO: tuple[str, ...] = ("scan", "astronomical", "both")
#: What a rule may do when its condition holds.
EFFECTS: tuple[str, ...] = ("block", "warn", "add_error")
#: Effects a reason can carry: a rule's effect, or ``info`` for figures and notes.
REASON_EFFECTS: tuple[str, ...] = (*EFFECTS, "info")
#: How every view words each effect: the same words as the rule files and the JSON, so an
#: operator reading the screen, staff editing a rule and a script reading JSON share one vocabulary.
EFFECT_LABEL: dict[str, str] = {effect: effect for effect in REASON_EFFECTS}

#: Shown on every view whenever the invented demo site or its data are in use.
DEMO_BANNER = (
    "DEMO DATA — invented site and weather, for trying the tool (no site configured: --site, "
    "$ADVISOR_SITE or ~/.config/advisor/site.yaml)."
)

#: How a site-model term is made from its feature x: x, x², |x|, or max(0, knot - x).
MODEL_TRANSFORMS: tuple[str, ...] = ("identity", "square", "abs", "shortfall")
#: Which way a site-model term may push the odds of a usable result as the term grows.
MODEL_DIRECTIONS: dict[str, str] = {
    "lowers": "can only lower the odds",
    "raises": "can only raise the odds",
    "free": "may push the odds either way",
}
