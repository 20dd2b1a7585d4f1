"""Rules and rule sets: what a loaded rule is, evaluating a rule set over features, messages.

A rule file holds ``rules:``, a list of mappings::

    - id: fog_blinds_laser
      applies_to: scan                 # scan | astronomical | both
      condition: fog                   # the condition language (advisor.rules.condition)
      effect: block                    # block | warn | add_error
      error_um: 40                     # only with add_error: a number or an expression [µm]
      message: "Fog likely (spread {dew_point_spread_c:.1f} °C): the laser cannot see the surface."
      enabled: true                    # optional; false disables a rule of an earlier layer

Reading and layering the files is :mod:`advisor.rules.loader`; this module holds the result
(:class:`Rule`, :class:`RuleSet`), evaluates it over columns of features
(:meth:`RuleSet.evaluate`, vectorised, scalar target features broadcast) and fills a rule's
message for one row (:func:`format_message`).  It reads no file.
"""

from __future__ import annotations

import re
import string
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from advisor.rules.compiler import Compiled
from advisor.rules.nodes import Number, iter_nodes
from advisor.text import clean_text, shorten

__all__ = [
    "Rule",
    "RuleSet",
    "RuleEvaluation",
    "format_message",
    "format_spec_problem",
    "message_fields",
    "RULE_KEYS",
    "REQUIRED_KEYS",
    "MAX_RULES",
    "MESSAGE_EXTRAS",
    "MAX_FORMAT_WIDTH",
    "MAX_FORMAT_PRECISION",
    "MAX_MESSAGE_CHARS",
]

#: The keys a rule mapping may have.
RULE_KEYS = ("id", "applies_to", "condition", "effect", "error_um", "message", "enabled")
#: The keys every rule must have once its layers are merged.
REQUIRED_KEYS = ("id", "applies_to", "condition", "effect", "message")
#: Most rules in one file.
MAX_RULES = 2000
#: Most thresholds a message can name: ``{limit}`` (the condition's first number, as written),
#: ``{limit_2}`` ... ``{limit_9}``.
MAX_LIMITS = 9
LIMIT_FIELDS = ("limit", *(f"limit_{k}" for k in range(2, MAX_LIMITS + 1)))
#: Non-feature values a message may name.
MESSAGE_EXTRAS = ("calibrator_name", *LIMIT_FIELDS)
#: Widest field and most digits after the point a message format may ask for (``{x:>8.1f}``):
#: plenty for any figure, and a message can never print megabytes (lint refuses more).
MAX_FORMAT_WIDTH = 40
MAX_FORMAT_PRECISION = 12
#: Longest filled message [characters]; a longer one is elided in the middle.
MAX_MESSAGE_CHARS = 1000
# [[fill]align][sign][z][#][0][width][grouping][.precision][type] (Python's format mini-language)
_FORMAT_SPEC = re.compile(r"(?:.?[<>=^])?[-+ ]?z?#?0?(?P<width>\d*)[,_]?(?:\.(?P<precision>\d*))?[A-Za-z%]?", re.DOTALL)
_UNIT_WORDS = (("delta_degC", "°C"), ("degC/h", "°C/h"), ("degC", "°C"), ("degF", "°F"), ("deg", "°"), ("um", "µm"))


def limit_texts(condition: Compiled) -> tuple[str, ...]:
    """The numbers of a condition as written, in reading order ("8 m/s", "2 °C/h", "97 %")."""
    numbers = sorted((n for n in iter_nodes(condition.ast) if isinstance(n, Number)), key=lambda n: n.start)
    texts = []
    for node in numbers:
        text = " ".join(node.text_in(condition.source).split())
        for word, shown in _UNIT_WORDS:
            text = re.sub(rf"(?<![A-Za-z_/]){re.escape(word)}(?![A-Za-z_])", shown, text)
        texts.append(text)
    return tuple(texts)


@dataclass(frozen=True)
class Rule:
    """One validated, compiled rule."""

    id: str
    applies_to: str
    condition_text: str
    condition: Compiled
    effect: str
    message: str
    error_text: str | None = None
    error: Compiled | None = None
    source: str = "<built-in>"
    line: int | None = None
    layer: str = "default"
    error_scale: float = 1.0  # error expression's length unit → µm (1 for a plain number)
    #: Earlier entries this rule was merged over: (file, line, layer), oldest first.
    overrides: tuple[tuple[str, int | None, str], ...] = ()

    def applies(self, method: str) -> bool:
        """Whether the rule concerns ``method`` (``scan`` or ``astronomical``)."""
        return self.applies_to in (method, "both")

    def limit_values(self) -> dict[str, str]:
        """``{limit}``, ``{limit_2}``, ... of the message: the condition's numbers as written, so a
        message can never show a threshold the condition no longer uses."""
        return dict(zip(LIMIT_FIELDS, limit_texts(self.condition)))

    def message_for(self, values: Mapping[str, Any]) -> str:
        """The message filled with one row's values and the rule's own thresholds."""
        return format_message(self.message, {**values, **self.limit_values()})


@dataclass(frozen=True)
class RuleEvaluation:
    """Per-rule boolean ``fired`` arrays and ``error_um`` arrays (0 where not fired).

    ``unknown`` holds, for the rules that have any, the rows where the condition could not be
    decided because an optional input it needs was missing: such a rule neither fired nor cleared.
    """

    fired: dict[str, np.ndarray]
    error_um: dict[str, np.ndarray]
    unknown: dict[str, np.ndarray] = field(default_factory=dict)


@dataclass(frozen=True)
class RuleSet:
    """The effective rules after layering, in order, with the files they came from."""

    rules: tuple[Rule, ...]
    sources: tuple[str, ...] = field(default=())
    #: Rules switched off by ``enabled: false``: (id, file, line, layer) of the entry that did it.
    disabled: tuple[tuple[str, str, int | None, str], ...] = field(default=())

    def __iter__(self):
        return iter(self.rules)

    def __len__(self) -> int:
        return len(self.rules)

    def evaluate(self, columns: Mapping[str, Any], n: int) -> RuleEvaluation:
        """Evaluate every rule over ``columns``, vectorised; every result has length ``n``.

        ``columns`` maps feature names to arrays (or Series) of length ``n`` or to scalars (the
        target-scope features, such as ``freq_ghz``, travel as one value).  Scalars broadcast and
        are never widened to ``n``: a rule takes its results (``fired``, and ``error_um`` for
        ``add_error``) plus the temporaries of its own expression, whatever the columns hold.
        """
        fired: dict[str, np.ndarray] = {}
        errors: dict[str, np.ndarray] = {}
        unknown: dict[str, np.ndarray] = {}
        for rule in self.rules:
            mask = np.asarray(rule.condition.evaluate(columns, length=n), dtype=bool)
            undecided = rule.condition.unknown(columns, length=n)
            if undecided is not None and undecided.any():
                unknown[rule.id] = undecided
                mask = mask & ~undecided  # an undecided rule neither fires nor clears
            fired[rule.id] = mask
            if rule.error is not None:
                value = np.asarray(rule.error.evaluate(columns, length=n), dtype=float) * rule.error_scale
                errors[rule.id] = np.where(mask, np.nan_to_num(value, nan=0.0), 0.0)
        return RuleEvaluation(fired, errors, unknown)


def message_fields(template: str) -> list[str]:
    """Field names in a message template; ValueError on a malformed template."""
    names = []
    for _, name, _spec, conversion in string.Formatter().parse(template):
        if name is None:
            continue
        if not name.isidentifier() or conversion:
            raise ValueError(f"'{{{name}}}' is not a plain value name")
        names.append(name)
    return names


def format_spec_problem(spec: str) -> str | None:
    """What is wrong with a message format's width or precision (``>1000000``, ``.500f``), or None.

    Other faults of a specification are left to ``format`` itself.
    """
    m = _FORMAT_SPEC.fullmatch(spec or "")
    if not m:
        return None
    for what, digits, most in (
        ("width", m.group("width"), MAX_FORMAT_WIDTH),
        ("precision", m.group("precision"), MAX_FORMAT_PRECISION),
    ):
        if digits and (len(digits) > 4 or int(digits) > most):
            shown = digits if len(digits) <= 12 else f"{digits[:6]}… ({len(digits)} digits)"
            return f"format {what} {shown} is above {most}"
    return None


def format_message(template: str, row: Mapping[str, Any]) -> str:
    """Fill a message template with one row's values; NaN → 'n/a', flags → yes/no.

    The result is safe to print: terminal control characters and escape sequences are removed
    (:func:`advisor.text.clean_text`), a width or precision beyond :data:`MAX_FORMAT_WIDTH` /
    :data:`MAX_FORMAT_PRECISION` (which lint refuses) is ignored, and the whole is at most
    :data:`MAX_MESSAGE_CHARS` long.
    """
    parts = []
    drop_unit = False
    for literal, name, spec, _ in string.Formatter().parse(template):
        if drop_unit:  # "visibility n/a", not "visibility n/a m"
            literal = _UNIT_AFTER_VALUE.sub("", literal, count=1)
        parts.append(literal)
        drop_unit = False
        if name is None:
            continue
        value = row.get(name)
        if isinstance(value, (bool, np.bool_)):
            parts.append("yes" if value else "no")
        elif value is None or (isinstance(value, (float, np.floating)) and not np.isfinite(value)):
            parts.append("n/a")
            drop_unit = True
        else:
            if spec and format_spec_problem(spec):
                spec = ""
            try:
                text = format(value, spec or "")
                if (
                    isinstance(value, (float, np.floating))
                    and text.startswith("-")
                    and text.lstrip("-") == format(0.0, spec or "")
                ):
                    text = text[1:]  # no "-0.0 °C"
                parts.append(text)
            except (ValueError, TypeError):
                parts.append(str(value))
    return shorten(clean_text("".join(parts)), MAX_MESSAGE_CHARS)


_UNIT_AFTER_VALUE = re.compile(r"^ ?(?:[°µ%]\S{0,4}|[A-Za-z]{1,3}(?:/[A-Za-z0-9²]{1,3})?²?)(?=$|[\s,;:.)])")
