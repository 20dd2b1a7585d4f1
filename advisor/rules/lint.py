"""Lint findings for rule files: what a problem is, the report, and the checks of each value.

    >>> report = lint_files(rule_layers(site_files=["site_rules.yaml"]), CATALOGUE)   # doctest: +SKIP
    >>> for problem in report.problems:                                                 # doctest: +SKIP
    ...     print(problem.one_line())
    site_rules.yaml:4:16: error: rule gusts.condition: unknown name 'wind_gust' (did you mean 'wind_gust_ms'?)

(:func:`~advisor.rules.loader.lint_files` reads and layers the files; this module holds what it
reports.)  :class:`Problem` is one finding with file, line, column, the rule and key it concerns
and a hint; :class:`LintReport` gathers them with the rule set when there is no error.
:class:`ValueLint` checks the value of each key as written (errors unless marked *warning*):

* ``applies_to``/``effect``/``enabled`` outside their choices (:mod:`advisor.vocabulary`), with
  the closest choice suggested;
* conditions and ``error_um`` expressions: everything the condition language refuses (syntax,
  unknown features with the closest name, flag/number mix-ups, unit dimensions,
  :mod:`advisor.rules.condition`), ``error_um`` that is not a length or is negative, and
  thresholds that can never be true or are always true (:mod:`advisor.rules.thresholds`);
* messages: malformed templates, values the rule cannot have (not a feature), bad format
  specifications, a format applied to a flag (*warning*), an empty message (*warning*).

A problem inside a condition or message points at the character in the file: YAML plain,
quoted and folded scalars are all mapped back (:meth:`Field.at`).
"""

from __future__ import annotations

import difflib
import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import yaml

from advisor import units
from advisor.catalogue import FeatureSpec
from advisor.errors import ConditionError, RulesError
from advisor.rules.compiler import Compiled, compile_condition, compile_expression
from advisor.rules.interpret import evaluate_row
from advisor.rules.nodes import Number
from advisor.rules.ruleset import (
    MAX_FORMAT_PRECISION,
    MAX_FORMAT_WIDTH,
    MESSAGE_EXTRAS,
    RuleSet,
    format_spec_problem,
    message_fields,
)
from advisor.rules.thresholds import threshold_findings
from advisor.text import clean_text, shorten
from advisor.vocabulary import APPLIES_TO, EFFECTS

__all__ = ["Problem", "LintReport", "Field", "ValueLint", "did_you_mean", "close_match", "sorted_problems"]


@dataclass(frozen=True)
class Problem:
    """One lint finding: where it is, what is wrong, and how to fix it."""

    severity: str  # "error" | "warning"
    message: str
    source: str | None = None
    line: int | None = None
    column: int | None = None
    field: str | None = None  # e.g. "rule fog_blinds_laser.condition"
    hint: str | None = None

    def location(self) -> str:
        """``file:line:column`` (the parts that are known)."""
        return ":".join(str(p) for p in (self.source, self.line, self.column) if p is not None)

    def as_error(self) -> RulesError:
        """The same finding as a :class:`RulesError` (its ``one_line`` is what the CLI prints)."""
        return RulesError(
            self.message, source=self.source, line=self.line, column=self.column, field=self.field, hint=self.hint
        )

    def one_line(self) -> str:
        """``file:line:col: error: field: message (hint)`` on one line."""
        text = self.message if not self.field else f"{self.field}: {self.message}"
        if self.hint:
            text = f"{text} ({self.hint})"
        loc = self.location()
        return " ".join(clean_text(f"{loc + ': ' if loc else ''}{self.severity}: {text}").split())


@dataclass(frozen=True)
class LintReport:
    """All problems found, and the compiled rule set when there is no error."""

    problems: tuple[Problem, ...]
    ruleset: RuleSet | None
    files: tuple[str, ...]

    @property
    def errors(self) -> tuple[Problem, ...]:
        return tuple(p for p in self.problems if p.severity == "error")

    @property
    def warnings(self) -> tuple[Problem, ...]:
        return tuple(p for p in self.problems if p.severity == "warning")

    @property
    def ok(self) -> bool:
        """True when there is no error (warnings allowed)."""
        return not self.errors


def _scalar_position(node: yaml.Node, text: str, offset: int) -> tuple[int, int]:
    """1-based (line, column) in ``text`` of character ``offset`` of a scalar node's value.

    The value is matched greedily against the raw text (a folded line break reads as a space),
    which is exact for plain, quoted and block scalars without escapes; otherwise the start.
    """
    start = node.start_mark.index
    fallback = (node.start_mark.line + 1, node.start_mark.column + 1)
    value = node.value if isinstance(node, yaml.ScalarNode) else ""
    style = node.style if isinstance(node, yaml.ScalarNode) else None
    raw = text[start : node.end_mark.index]
    i = 0
    if style in ("|", ">"):
        i = raw.find("\n") + 1 if "\n" in raw else len(raw)
    elif style in ("'", '"'):
        i = 1
    offset = max(0, min(offset, len(value)))
    for k in range(offset + 1):
        if k == len(value):  # just after the last character
            break
        ch = value[k]
        while i < len(raw) and not (raw[i] == ch or (ch == " " and raw[i] == "\n")):
            i += 1
        if i >= len(raw):
            return fallback
        if k == offset:
            break
        i += 1
    pos = start + i
    line = text.count("\n", 0, pos) + 1
    column = pos - (text.rfind("\n", 0, pos) + 1) + 1
    return line, column


@dataclass
class Field:
    """One ``key: value`` of a rule as written, with where it is."""

    key: str
    value: Any
    source: str
    layer: str
    key_node: yaml.Node
    node: yaml.Node
    text: str
    compiled: Compiled | None = None
    ok: bool = True
    scale: float = 1.0  # error_um only: factor from the expression's length unit to µm

    @property
    def line(self) -> int:
        return self.key_node.start_mark.line + 1

    def at(self, offset: int | None = None) -> tuple[int, int]:
        """(line, column) of the value, or of character ``offset`` inside it."""
        if offset is None or not isinstance(self.node, yaml.ScalarNode):
            return self.node.start_mark.line + 1, self.node.start_mark.column + 1
        return _scalar_position(self.node, self.text, offset)


def close_match(word: str, choices: Iterable[str]) -> str | None:
    """The choice closest to ``word``, or None when none is close."""
    found = difflib.get_close_matches(str(word), list(choices), n=1)
    return found[0] if found else None


def did_you_mean(word: str, choices: Iterable[str], otherwise: str) -> str:
    """A hint naming the choice closest to ``word``, or ``otherwise``."""
    close = close_match(word, choices)
    return f"did you mean '{close}'?" if close else otherwise


#: A value of each kind, to try a message's format specification on.
_SAMPLE = {"flag": True, "number": 1.5}


class ValueLint:
    """The checks of each value as written; collects :class:`Problem` s in ``problems``."""

    def __init__(
        self, catalogue: Mapping[str, FeatureSpec], domains: Mapping[str, tuple[float, float, str]] | None = None
    ) -> None:
        self.catalogue = catalogue
        self.domains = domains
        self.problems: list[Problem] = []

    def add(
        self,
        severity: str,
        message: str,
        source: str | None,
        line: int | None = None,
        column: int | None = None,
        where: str | None = None,
        hint: str | None = None,
    ) -> None:
        """Record one finding."""
        self.problems.append(Problem(severity, message, source, line, column, where, hint))

    def at_field(
        self,
        severity: str,
        f: Field,
        rid: str,
        message: str,
        hint: str | None = None,
        offset: int | None = None,
        on_key: bool = False,
    ) -> None:
        """Record a finding at a field's value (character ``offset`` inside it) or at its key."""
        if on_key:
            line, column = f.key_node.start_mark.line + 1, f.key_node.start_mark.column + 1
        else:
            line, column = f.at(offset)
        self.add(severity, message, f.source, line, column, f"rule {rid}.{f.key}", hint)
        if severity == "error":
            f.ok = False

    def check_fields(self, rid: str, fields: Mapping[str, Field]) -> None:
        """Check the value of every key of one rule entry (``fields``: key → field as written)."""
        for key, f in fields.items():
            v = f.value
            if key == "applies_to" and v not in APPLIES_TO:
                self.at_field(
                    "error",
                    f,
                    rid,
                    f"applies_to {v!r} is not one of {', '.join(APPLIES_TO)}",
                    did_you_mean(str(v), APPLIES_TO, "scan: the laser; astronomical: holography; both"),
                )
            elif key == "effect" and v not in EFFECTS:
                self.at_field(
                    "error",
                    f,
                    rid,
                    f"effect {v!r} is not one of {', '.join(EFFECTS)}",
                    did_you_mean(
                        str(v),
                        EFFECTS,
                        "block stops the method, warn adds a caution, add_error adds error_um in quadrature",
                    ),
                )
            elif key == "enabled" and not isinstance(v, bool):
                self.at_field("error", f, rid, f"'enabled' must be true or false, got {v!r}", "write enabled: false")
            elif key == "condition":
                self.check_condition(f, rid)
            elif key == "error_um":
                self.check_error_term(f, rid)
            elif key == "message":
                self.check_message(f, rid)

    def condition_error(self, f: Field, rid: str, exc: ConditionError, what: str) -> None:
        """Record a ConditionError at the character of the field it points at."""
        offset = (exc.column - 1) if exc.column else 0
        self.at_field("error", f, rid, f"{what}{exc.message}", exc.hint, offset=offset)

    def check_condition(self, f: Field, rid: str) -> None:
        """Compile a condition (``f.compiled`` on success) and reason about its thresholds."""
        v = f.value
        if isinstance(v, bool):
            v = "true" if v else "false"
        if not isinstance(v, str):
            self.at_field(
                "error",
                f,
                rid,
                f"the condition must be text, got {type(v).__name__} {v!r:.40}",
                "write a condition such as wind_gust_ms > 8 m/s; quote it if it starts with a number",
            )
            return
        try:
            f.compiled = compile_condition(v, self.catalogue)
        except ConditionError as exc:
            self.condition_error(f, rid, exc, "")
            return
        for severity, message, offset, hint in threshold_findings(f.compiled, self.catalogue, self.domains):
            self.at_field(severity, f, rid, message, hint, offset=offset)

    def check_error_term(self, f: Field, rid: str) -> None:
        """Compile an ``error_um`` term (``f.compiled``, ``f.scale`` to µm on success)."""
        v = f.value
        if isinstance(v, bool) or not isinstance(v, (int, float, str)):
            self.at_field(
                "error",
                f,
                rid,
                f"'error_um' must be a number or an expression, got {v!r:.40}",
                "write e.g. error_um: 30 or error_um: 10 * (gust_factor - 1)",
            )
            return
        if isinstance(v, (int, float)) and not math.isfinite(v):
            self.at_field("error", f, rid, f"'error_um' must be finite, got {v!r}", "write a number of µm")
            return
        try:
            compiled = compile_expression(str(v), self.catalogue)
        except ConditionError as exc:
            self.condition_error(f, rid, exc, "")
            return
        unit = compiled.unit
        if (
            isinstance(compiled.ast, Number)
            and compiled.ast.unit is not None
            and units.dimension(compiled.ast.unit) != "length"
        ):
            self.at_field(
                "error",
                f,
                rid,
                f"'{v}' is {units.dimension(compiled.ast.unit).replace('_', ' ')}, "
                "but error_um is a surface error (a length)",
                "write µm, e.g. 30 or 30 um",
            )
            return
        if unit is not None and unit not in ("1", "um") and units.dimension(unit) == "length":
            scale = float(units.convert(1.0, unit, "um"))
        else:
            scale = 1.0
        if not compiled.names:  # a constant
            value = float(evaluate_row(compiled.ast, {})) * scale
            if value < 0:
                self.at_field(
                    "error",
                    f,
                    rid,
                    f"error_um is negative ({value:g} µm)",
                    "an error term is a size: write a positive number of µm",
                )
                return
        f.compiled = compiled
        f.scale = scale

    def check_message(self, f: Field, rid: str) -> None:
        """Check a message template: its syntax, the values it names and their formats."""
        v = f.value
        if not isinstance(v, str):
            self.at_field("error", f, rid, f"'message' must be text, got {v!r:.40}", "quote it")
            return
        if not v.strip():
            self.at_field("warning", f, rid, "the message is empty", "say what the rule means for the operator")
        try:
            message_fields(v)
        except ValueError as exc:
            offset = v.find("{") if "{" in v else 0
            self.at_field(
                "error",
                f,
                rid,
                f"malformed message template: {exc}",
                "write values as {feature_name} or {feature_name:.1f}; write a literal brace as {{ or }}",
                offset=offset,
            )
            return
        known = list(self.catalogue) + list(MESSAGE_EXTRAS)
        for match in re.finditer(r"(?<!\{)\{([^{}]*)\}", v.replace("{{", "\0\0").replace("}}", "\0\0")):
            name, _, spec = match.group(1).partition(":")
            offset = match.start()
            if name not in self.catalogue and name not in MESSAGE_EXTRAS:
                self.at_field(
                    "error",
                    f,
                    rid,
                    f"the message names '{{{name}}}', which the rule does not have (not a feature)",
                    did_you_mean(name, known, "see 'advisor rules features'"),
                    offset=offset,
                )
                continue
            if not spec:
                continue
            kind = self.catalogue[name].kind if name in self.catalogue else "text"
            if kind == "flag":
                self.at_field(
                    "warning",
                    f,
                    rid,
                    f"'{{{name}:{spec}}}' formats a flag, which is shown as yes/no",
                    f"write {{{name}}}",
                    offset=offset,
                )
                continue
            problem = format_spec_problem(spec)
            if problem:
                self.at_field(
                    "error",
                    f,
                    rid,
                    f"bad format '{shorten(spec, 40)}' for '{name}': {problem}",
                    f"a field at most {MAX_FORMAT_WIDTH} characters wide with at most "
                    f"{MAX_FORMAT_PRECISION} decimals, e.g. .1f or >8.1f",
                    offset=offset,
                )
                continue
            try:
                format(_SAMPLE.get(kind, "text"), spec)
            except (ValueError, TypeError) as exc:
                self.at_field(
                    "error",
                    f,
                    rid,
                    f"bad format '{spec}' for '{name}': {exc}",
                    "use e.g. .1f (one decimal), .0f (none) or +.1f (with sign)",
                    offset=offset,
                )


def sorted_problems(problems: Iterable[Problem], files: list[str]) -> tuple[Problem, ...]:
    """Problems in file order (as layered), then by line and column."""
    order = {name: i for i, name in enumerate(files)}
    last = len(order)
    return tuple(sorted(problems, key=lambda p: (order.get(p.source or "", last), p.line or 0, p.column or 0)))
