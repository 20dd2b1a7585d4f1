"""Lint for rule files: every problem in every file at once, each with file:line:column and a fix.

    >>> report = lint_files([(path, "default") for path in default_rule_files()], CATALOGUE)
    >>> report.ok, len(report.ruleset)                                  # doctest: +SKIP
    (True, 21)
    >>> for problem in report.problems:                                 # doctest: +SKIP
    ...     print(problem.one_line())
    site_rules.yaml:4:16: error: rule gusts.condition: unknown name 'wind_gust' (did you mean 'wind_gust_ms'?)

Files are layered in the order given (package defaults, the site's, then ``--rules``): a rule
whose id already exists is merged over it key by key, ``enabled: false`` switches it off.
Problems found (errors unless marked *warning*):

* the file: not readable, not YAML, YAML tags/aliases/tabs (via :mod:`advisor.io.yamlio`), not a
  ``rules:`` list, a file with no rules (*warning*);
* each rule: unknown or duplicated keys (closest known key suggested), a missing or malformed
  id, an id used twice in one file, values of ``applies_to``/``effect``/``enabled`` outside
  their choices, missing keys after layering (a partial entry whose id no earlier file defines
  gets the closest existing id suggested), ``error_um`` missing for ``add_error``, stray
  ``error_um`` (*warning* when a later layer changed the effect), disabling an unknown id
  (*warning*);
* conditions and ``error_um`` expressions: everything :mod:`advisor.rules.condition` refuses
  (syntax, unknown features with the closest name, flag/number mix-ups, unit dimensions);
* thresholds: a condition that can never be true — parts that contradict each other
  (``x > 5 and x < 3``) or a feature's possible range (:data:`FEATURE_DOMAINS`) — found by
  interval reasoning over the checked syntax tree; a part that can never be true and a
  condition that is always true (*warnings*);
* messages: malformed templates, values the rule cannot have (not a feature), bad format
  specifications, a format applied to a flag (*warning*).

A problem inside a condition or message points at the character in the file (YAML plain,
quoted and folded scalars are all mapped back).  The loader (:func:`advisor.rules.ruleset.load_rules`)
runs exactly this and refuses a rule set with any error.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Iterable, Mapping

import yaml

from advisor import units
from advisor.catalogue import FEATURE_DOMAINS
from advisor.errors import ConditionError, RulesError
from advisor.io.yamlio import load_yaml, parse_yaml_text
from advisor.rules.condition import (Bool, Call, Compare, Compiled, FeatureSpec, Logical, Name, Node, Number, Unary,
                        compile_condition, compile_expression, evaluate_row, names_in)
from advisor.rules.ruleset import (APPLIES_TO, EFFECTS, MAX_RULES, MESSAGE_EXTRAS, RULE_KEYS, Rule, RuleSet,
                      message_fields)

__all__ = ["Problem", "LintReport", "lint_files", "lint_texts", "threshold_findings", "condition_parts",
           "FEATURE_DOMAINS", "REQUIRED_KEYS"]

REQUIRED_KEYS = ("id", "applies_to", "condition", "effect", "message")
_ID_RE = re.compile(r"[A-Za-z0-9_-]+\Z")
#: The fastest safe composer available (libyaml when installed); it builds nodes, never objects.
_COMPOSER = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
#: Most alternatives tracked while reasoning about one condition (beyond that: no verdict).
MAX_BRANCHES = 256


# --------------------------------------------------------------------------- feature domains




# --------------------------------------------------------------------------- problems


@dataclass(frozen=True)
class Problem:
    """One lint finding: where it is, what is wrong, and how to fix it."""

    severity: str                 # "error" | "warning"
    message: str
    source: str | None = None
    line: int | None = None
    column: int | None = None
    field: str | None = None      # e.g. "rule fog_blinds_laser.condition"
    hint: str | None = None

    def location(self) -> str:
        """``file:line:column`` (the parts that are known)."""
        return ":".join(str(p) for p in (self.source, self.line, self.column) if p is not None)

    def as_error(self) -> RulesError:
        """The same finding as a :class:`RulesError` (its ``one_line`` is what the CLI prints)."""
        return RulesError(self.message, source=self.source, line=self.line, column=self.column,
                          field=self.field, hint=self.hint)

    def one_line(self) -> str:
        """``file:line:col: error: field: message (hint)`` on one line."""
        text = self.message if not self.field else f"{self.field}: {self.message}"
        if self.hint:
            text = f"{text} ({self.hint})"
        loc = self.location()
        return " ".join(f"{loc + ': ' if loc else ''}{self.severity}: {text}".split())


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


# --------------------------------------------------------------------------- positions in the file


def _scalar_position(node: yaml.Node, text: str, offset: int) -> tuple[int, int]:
    """1-based (line, column) in ``text`` of character ``offset`` of a scalar node's value.

    The value is matched greedily against the raw text (a folded line break reads as a space),
    which is exact for plain, quoted and block scalars without escapes; otherwise the start.
    """
    start = node.start_mark.index
    fallback = (node.start_mark.line + 1, node.start_mark.column + 1)
    value = node.value if isinstance(node, yaml.ScalarNode) else ""
    raw = text[start:node.end_mark.index]
    i = 0
    if getattr(node, "style", None) in ("|", ">"):
        i = raw.find("\n") + 1 if "\n" in raw else len(raw)
    elif getattr(node, "style", None) in ("'", '"'):
        i = 1
    offset = max(0, min(offset, len(value)))
    for k in range(offset + 1):
        if k == len(value):        # just after the last character
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
class _Field:
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
    scale: float = 1.0            # error_um only: factor from the expression's length unit to µm

    @property
    def line(self) -> int:
        return self.key_node.start_mark.line + 1

    def at(self, offset: int | None = None) -> tuple[int, int]:
        """(line, column) of the value, or of character ``offset`` inside it."""
        if offset is None or not isinstance(self.node, yaml.ScalarNode):
            return self.node.start_mark.line + 1, self.node.start_mark.column + 1
        return _scalar_position(self.node, self.text, offset)


@dataclass
class _Entry:
    """One rule mapping as written in one file."""

    rid: str
    source: str
    layer: str
    line: int
    column: int
    fields: dict[str, _Field]


@dataclass
class _Merged:
    """A rule id after layering: the latest field for each key, and every entry that touched it."""

    rid: str
    fields: dict[str, _Field] = field(default_factory=dict)
    entries: list[_Entry] = field(default_factory=list)
    enabled: bool = True


# --------------------------------------------------------------------------- interval reasoning


@dataclass(frozen=True)
class _Iv:
    """An interval of reals with open or closed ends."""

    lo: float
    hi: float
    lo_in: bool
    hi_in: bool

    def empty(self) -> bool:
        return self.lo > self.hi or (self.lo == self.hi and not (self.lo_in and self.hi_in))

    def meet(self, other: "_Iv") -> "_Iv":
        if self.lo > other.lo:
            lo, lo_in = self.lo, self.lo_in
        elif other.lo > self.lo:
            lo, lo_in = other.lo, other.lo_in
        else:
            lo, lo_in = self.lo, self.lo_in and other.lo_in
        if self.hi < other.hi:
            hi, hi_in = self.hi, self.hi_in
        elif other.hi < self.hi:
            hi, hi_in = other.hi, other.hi_in
        else:
            hi, hi_in = self.hi, self.hi_in and other.hi_in
        return _Iv(lo, hi, lo_in, hi_in)


_REAL = (_Iv(-math.inf, math.inf, False, False),)


def _meet(a: tuple[_Iv, ...], b: tuple[_Iv, ...]) -> tuple[_Iv, ...]:
    return tuple(m for x in a for y in b if not (m := x.meet(y)).empty())


def _complement(ivs: tuple[_Iv, ...]) -> tuple[_Iv, ...]:
    out, lo, lo_in = [], -math.inf, False
    for iv in sorted(ivs, key=lambda v: (v.lo, not v.lo_in)):
        gap = _Iv(lo, iv.lo, lo_in, not iv.lo_in)
        if not gap.empty():
            out.append(gap)
        if iv.hi > lo or (iv.hi == lo and iv.hi_in):
            lo, lo_in = iv.hi, not iv.hi_in
    tail = _Iv(lo, math.inf, lo_in, False)
    if not tail.empty():
        out.append(tail)
    return tuple(out)


def _compare_set(op: str, c: float) -> tuple[_Iv, ...]:
    """The reals x for which ``x op c`` holds."""
    inf = math.inf
    return {"<": (_Iv(-inf, c, False, False),), "<=": (_Iv(-inf, c, False, True),),
            ">": (_Iv(c, inf, False, False),), ">=": (_Iv(c, inf, True, False),),
            "==": (_Iv(c, c, True, True),),
            "!=": (_Iv(-inf, c, False, False), _Iv(c, inf, False, False))}[op]


_FLIP = {"<": ">", "<=": ">=", ">": "<", ">=": "<=", "==": "==", "!=": "!="}


@dataclass(frozen=True)
class _State:
    """What one feature may be in one alternative: a set of reals, NaN or not, or a flag's values."""

    reals: tuple[_Iv, ...] = _REAL
    nan: bool = True
    flags: frozenset = frozenset({True, False})
    parts: tuple[Node, ...] = ()

    def meet(self, other: "_State") -> "_State":
        return _State(_meet(self.reals, other.reals), self.nan and other.nan, self.flags & other.flags,
                      self.parts + tuple(p for p in other.parts if p not in self.parts))

    def empty(self, is_flag: bool) -> bool:
        return not self.flags if is_flag else (not self.reals and not self.nan)


@dataclass
class _Conflict:
    name: str
    parts: tuple[Node, ...]
    domain: bool                  # the feature's range took part
    alone: bool = False           # one part that no value at all satisfies


class _TooMany(Exception):
    pass


class _Reasoner:
    """Alternatives (a disjunction of per-feature states) where a checked condition is true/false."""

    def __init__(self, kinds: Mapping[str, str], domains: Mapping[str, tuple[float, float, str]]):
        self.kinds = kinds
        self.domains = domains
        self.conflicts: list[_Conflict] = []

    def domain_state(self, name: str) -> _State:
        if name in self.domains:
            lo, hi, _ = self.domains[name]
            return _State(reals=(_Iv(lo, hi, True, True),))
        return _State()

    def atom(self, name: str, state: _State) -> list[dict]:
        """One alternative constraining ``name``, met with its domain (empty → conflict)."""
        if state.empty(self.kinds.get(name) == "flag"):
            self.conflicts.append(_Conflict(name, state.parts, False, alone=True))
            return []
        met = self.domain_state(name).meet(state)
        if met.empty(self.kinds.get(name) == "flag"):
            self.conflicts.append(_Conflict(name, state.parts, True))
            return []
        return [{name: met}]

    def both(self, left: list[dict], right: list[dict]) -> list[dict]:
        out = []
        for a in left:
            for b in right:
                merged, dead = dict(a), False
                for name, state in b.items():
                    if name in merged:
                        met = merged[name].meet(state)
                        if met.empty(self.kinds.get(name) == "flag"):
                            self.conflicts.append(_Conflict(name, met.parts, False))
                            dead = True
                            break
                        merged[name] = met
                    else:
                        merged[name] = state
                if not dead:
                    out.append(merged)
                    if len(out) > MAX_BRANCHES:
                        raise _TooMany
        return out

    def alternatives(self, node: Node, truth: bool) -> list[dict]:
        """Where ``node`` evaluates to ``truth``; ``[{}]`` means "anything", ``[]`` "never"."""
        if isinstance(node, Bool):
            return [{}] if node.value == truth else []
        if isinstance(node, Unary) and node.op == "not":
            return self.alternatives(node.operand, not truth)
        if isinstance(node, Logical):
            conjunctive = (node.op == "and") == truth
            if conjunctive:
                out = [{}]
                for operand in node.operands:
                    out = self.both(out, self.alternatives(operand, truth))
                    if not out:
                        return []
                return out
            out = []
            for operand in node.operands:
                out.extend(self.alternatives(operand, truth))
                if len(out) > MAX_BRANCHES:
                    raise _TooMany
            return out
        if isinstance(node, Name) and node.kind == "flag":
            return self.atom(node.name, _State(flags=frozenset({truth}), parts=(node,)))
        if isinstance(node, Call) and node.func == "missing":
            (arg,) = node.args
            if isinstance(arg, Name) and arg.kind == "number":
                state = _State(reals=(), nan=True) if truth else _State(nan=False)
                return self.atom(arg.name, replace(state, parts=(node,)))
            return [{}]
        if isinstance(node, Compare) and len(node.ops) == 1:
            return self.compare(node, truth)
        return [{}]

    def compare(self, node: Compare, truth: bool) -> list[dict]:
        (op,), (left, right) = node.ops, node.operands
        if _constant(left) and _constant(right):
            return [{}] if bool(evaluate_row(node, {})) == truth else []
        flag_side = next((s for s in (left, right) if isinstance(s, Name) and s.kind == "flag"), None)
        if flag_side is not None:
            other = right if flag_side is left else left
            if not isinstance(other, Bool):
                return [{}]
            holds = {v for v in (True, False) if ((v == other.value) == (op == "==")) == truth}
            return self.atom(flag_side.name, _State(flags=frozenset(holds), parts=(node,)))
        if _constant(left):
            op, left, right = _FLIP[op], right, left
        if not _constant(right):
            return [{}]
        c = float(evaluate_row(right, {}))
        if isinstance(left, Name):
            name, reals = left.name, _compare_set(op, c)
        elif isinstance(left, Call) and left.func == "abs" and isinstance(left.args[0], Name):
            name = left.args[0].name
            # |x| op c holds where |x| lies in the set of op c: that set's non-negative part, mirrored
            nonneg = _meet(_compare_set(op, c), (_Iv(0.0, math.inf, True, False),))
            reals = nonneg + tuple(_Iv(-iv.hi, -iv.lo, iv.hi_in, iv.lo_in) for iv in nonneg)
        else:
            return [{}]
        nan_holds = op == "!="           # NaN: every comparison is false except !=
        if not truth:
            reals, nan_holds = _complement(reals), not nan_holds
        return self.atom(name, _State(reals=reals, nan=nan_holds, parts=(node,)))


def _constant(node: Node) -> bool:
    return not names_in(node)


def condition_parts(node: Node, keep_not: bool = False) -> list[Node]:
    """The comparisons, flags, constants and missing() tests of a checked tree, in source order.

    With ``keep_not`` a ``not`` directly in front of one of them stays part of it.
    """
    out, stack = [], [node]
    while stack:
        n = stack.pop()
        if isinstance(n, Logical):
            stack.extend(reversed(n.operands))
        elif isinstance(n, Unary) and n.op == "not":
            if keep_not and not isinstance(n.operand, (Logical, Unary)):
                out.append(n)
            else:
                stack.append(n.operand)
        else:
            out.append(n)
    return sorted(out, key=lambda n: n.start)



def _range_text(name: str, domains, catalogue) -> str:
    lo, hi, why = domains[name]
    unit = catalogue[name].unit if name in catalogue else ""
    unit = "" if unit in ("1", "flag") else f" {unit}"
    if hi == math.inf:
        return f"{name} is never below {lo:g}{unit}: {why.removeprefix('it is never negative: ')}"
    return f"{name} is always within {lo:g}..{hi:g}{unit} ({why})"


def threshold_findings(compiled: Compiled, catalogue: Mapping[str, FeatureSpec],
                       domains: Mapping[str, tuple[float, float, str]] | None = None
                       ) -> list[tuple[str, str, int, str]]:
    """Impossible or trivial thresholds in a compiled condition.

    Returns ``(severity, message, offset, hint)`` tuples; ``offset`` is 0-based in the text.
    """
    domains = FEATURE_DOMAINS if domains is None else domains
    text = compiled.source
    kinds = {name: spec.kind for name, spec in catalogue.items()}
    q = lambda n: " ".join(n.text_in(text).split())  # noqa: E731
    reasoner = _Reasoner(kinds, domains)
    try:
        when_true = reasoner.alternatives(compiled.ast, True)
    except _TooMany:
        return []
    if not when_true:
        conflict = reasoner.conflicts[0] if reasoner.conflicts else None
        hint = "fix the threshold, or switch the rule off with enabled: false"
        if conflict is None or not conflict.parts:
            return [("error", f"the condition '{q(compiled.ast)}' is always false", 0, hint)]
        first = min(conflict.parts, key=lambda n: n.start)
        shown = " and ".join(f"'{q(p)}'" for p in sorted(conflict.parts, key=lambda n: n.start))
        if conflict.alone:
            message = f"{shown} can never be true, whatever the value of {conflict.name}"
        elif conflict.domain and len(conflict.parts) == 1:
            message = f"{shown} can never be true: {_range_text(conflict.name, domains, catalogue)}"
        elif conflict.domain:
            message = f"{shown} cannot all hold within the range of {conflict.name}"
        else:
            message = f"the condition can never be true: {shown} cannot all hold"
        if len(reasoner.conflicts) > 1:
            message += " (and no other alternative of the condition can be true either)"
        return [("error", message, first.start, hint)]
    findings = []
    for atom in condition_parts(compiled.ast):
        alone = _Reasoner(kinds, domains)
        try:
            if not alone.alternatives(atom, True) and alone.conflicts:
                c = alone.conflicts[0]
                why = (f"whatever the value of {c.name}" if c.alone or c.name not in domains
                       else _range_text(c.name, domains, catalogue))
                findings.append(("warning", f"'{q(atom)}' can never be true: {why}",
                                 atom.start, "this part of the condition never matters; fix or remove it"))
        except _TooMany:  # pragma: no cover - one atom is one alternative
            pass
    try:
        when_false = _Reasoner(kinds, domains).alternatives(compiled.ast, False)
    except _TooMany:
        return findings
    if not when_false:
        findings.append(("warning", f"the condition '{q(compiled.ast)}' is always true: the rule applies at "
                                    "every instant", 0, "check the threshold; a rule meant to always apply "
                                                        "can say so in its message"))
    return findings


# --------------------------------------------------------------------------- the linter


def _close(word: str, choices: Iterable[str]) -> str | None:
    found = difflib.get_close_matches(str(word), list(choices), n=1)
    return found[0] if found else None


def _did_you_mean(word: str, choices: Iterable[str], otherwise: str) -> str:
    close = _close(word, choices)
    return f"did you mean '{close}'?" if close else otherwise


#: A value of each kind, to try a message's format specification on.
_SAMPLE = {"flag": True, "number": 1.5}


class _Linter:
    def __init__(self, catalogue: Mapping[str, FeatureSpec], domains) -> None:
        self.catalogue = catalogue
        self.domains = domains
        self.problems: list[Problem] = []
        self.merged: dict[str, _Merged] = {}
        self.files: list[str] = []
        self.constructor = yaml.SafeLoader("")

    # reporting
    def add(self, severity: str, message: str, source: str | None, line: int | None = None,
            column: int | None = None, where: str | None = None, hint: str | None = None) -> None:
        self.problems.append(Problem(severity, message, source, line, column, where, hint))

    def at_field(self, severity: str, f: _Field, rid: str, message: str, hint: str | None = None,
                 offset: int | None = None, on_key: bool = False) -> None:
        if on_key:
            line, column = f.key_node.start_mark.line + 1, f.key_node.start_mark.column + 1
        else:
            line, column = f.at(offset)
        self.add(severity, message, f.source, line, column, f"rule {rid}.{f.key}", hint)
        if severity == "error":
            f.ok = False

    # documents
    def add_document(self, source: str, layer: str, text: str) -> None:
        self.files.append(source)
        root = yaml.compose(text, Loader=_COMPOSER)  # already vetted by yamlio: this only keeps the nodes
        if root is None:
            self.add("warning", "the file has no rules", source, 1, 1, hint="add 'rules:' and a list of rules")
            return
        if not isinstance(root, yaml.MappingNode):
            self.add("error", "expected a mapping with a single key 'rules:'", source,
                     root.start_mark.line + 1, root.start_mark.column + 1,
                     hint="start the file with 'rules:' and a list of rules")
            return
        rules_node = None
        for key_node, value_node in root.value:
            if key_node.value == "rules" and rules_node is None:
                rules_node = value_node
            else:
                what = "key 'rules' given twice" if key_node.value == "rules" else f"unknown key '{key_node.value}'"
                self.add("error", what, source, key_node.start_mark.line + 1, key_node.start_mark.column + 1,
                         hint="a rule file holds only 'rules:' and a list of rules" if key_node.value != "rules"
                         else "keep one 'rules:' list")
        if rules_node is None or (isinstance(rules_node, yaml.ScalarNode) and rules_node.value in ("", "null", "~")):
            self.add("warning", "the file has no rules", source, root.start_mark.line + 1, 1,
                     hint="add a list of rules under 'rules:'")
            return
        if not isinstance(rules_node, yaml.SequenceNode):
            self.add("error", "'rules' must be a list", source, rules_node.start_mark.line + 1,
                     rules_node.start_mark.column + 1, hint="write each rule as '- id: ...'")
            return
        if not rules_node.value:
            self.add("warning", "the file has no rules", source, rules_node.start_mark.line + 1, 1)
        if len(rules_node.value) > MAX_RULES:
            self.add("error", f"{len(rules_node.value)} rules in one file, more than {MAX_RULES}", source, 1, 1,
                     hint="a rule set this large cannot be reviewed; split or generate fewer")
            return
        seen: dict[str, int] = {}
        for item in rules_node.value:
            entry = self.read_entry(item, source, layer, text)
            if entry is None:
                continue
            if entry.rid in seen:
                self.add("error", f"duplicate rule id '{entry.rid}' in this file (first at line {seen[entry.rid]})",
                         source, entry.line, entry.column, f"rule {entry.rid}", hint="give each rule its own id")
                continue
            seen[entry.rid] = entry.line
            self.check_fields(entry)
            self.merge(entry)

    def read_entry(self, item: yaml.Node, source: str, layer: str, text: str) -> _Entry | None:
        line, column = item.start_mark.line + 1, item.start_mark.column + 1
        if not isinstance(item, yaml.MappingNode):
            self.add("error", "each rule must be a mapping with id, applies_to, condition, effect, message",
                     source, line, column, hint="write '- id: name' followed by the other keys, indented")
            return None
        fields: dict[str, _Field] = {}
        rid_hint = None
        for key_node, value_node in item.value:
            key = key_node.value if isinstance(key_node, yaml.ScalarNode) else None
            if key == "id" and isinstance(value_node, yaml.ScalarNode):
                rid_hint = value_node.value
            kline, kcol = key_node.start_mark.line + 1, key_node.start_mark.column + 1
            where = f"rule {rid_hint or '?'}"
            if key not in RULE_KEYS:
                self.add("error", f"unknown key '{key if key is not None else '?'}'", source, kline, kcol, where,
                         _did_you_mean(key or "", RULE_KEYS, f"the keys are {', '.join(RULE_KEYS)}"))
                continue
            if key in fields:
                self.add("error", f"key '{key}' given twice in one rule (first at line {fields[key].line})",
                         source, kline, kcol, where, hint="keep one; YAML would silently use the last")
                continue
            value = self.constructor.construct_object(value_node, deep=True)
            fields[key] = _Field(key, value, source, layer, key_node, value_node, text)
        if "id" not in fields:
            self.add("error", "rule without an 'id'", source, line, column, hint="add id: some_name")
            return None
        rid = fields["id"].value
        if not isinstance(rid, str) or not _ID_RE.match(rid):
            f = fields["id"]
            line_, col_ = f.at()
            self.add("error", f"id {rid!r} must be a word of letters, digits, '_' or '-'", source, line_, col_,
                     "rule ?.id", hint="e.g. id: frost_on_panels")
            return None
        return _Entry(rid, source, layer, fields["id"].line, fields["id"].key_node.start_mark.column + 1, fields)

    # checks of the values as written
    def check_fields(self, entry: _Entry) -> None:
        rid = entry.rid
        for key, f in entry.fields.items():
            v = f.value
            if key == "applies_to" and v not in APPLIES_TO:
                self.at_field("error", f, rid, f"applies_to {v!r} is not one of {', '.join(APPLIES_TO)}",
                              _did_you_mean(str(v), APPLIES_TO, "scan: the laser; astronomical: holography; both"))
            elif key == "effect" and v not in EFFECTS:
                self.at_field("error", f, rid, f"effect {v!r} is not one of {', '.join(EFFECTS)}",
                              _did_you_mean(str(v), EFFECTS, "block stops the method, warn adds a caution, "
                                                             "add_error adds error_um in quadrature"))
            elif key == "enabled" and not isinstance(v, bool):
                self.at_field("error", f, rid, f"'enabled' must be true or false, got {v!r}", "write enabled: false")
            elif key == "condition":
                self.check_condition(f, rid)
            elif key == "error_um":
                self.check_error_term(f, rid)
            elif key == "message":
                self.check_message(f, rid)

    def condition_error(self, f: _Field, rid: str, exc: ConditionError, what: str) -> None:
        offset = (exc.column - 1) if exc.column else 0
        self.at_field("error", f, rid, f"{what}{exc.message}", exc.hint, offset=offset)

    def check_condition(self, f: _Field, rid: str) -> None:
        v = f.value
        if isinstance(v, bool):
            v = "true" if v else "false"
        if not isinstance(v, str):
            self.at_field("error", f, rid, f"the condition must be text, got {type(v).__name__} {v!r:.40}",
                          "write a condition such as wind_gust_ms > 8 m/s; quote it if it starts with a number")
            return
        try:
            f.compiled = compile_condition(v, self.catalogue)
        except ConditionError as exc:
            self.condition_error(f, rid, exc, "")
            return
        for severity, message, offset, hint in threshold_findings(f.compiled, self.catalogue, self.domains):
            self.at_field(severity, f, rid, message, hint, offset=offset)

    def check_error_term(self, f: _Field, rid: str) -> None:
        v = f.value
        if isinstance(v, bool) or not isinstance(v, (int, float, str)):
            self.at_field("error", f, rid, f"'error_um' must be a number or an expression, got {v!r:.40}",
                          "write e.g. error_um: 30 or error_um: 10 * (gust_factor - 1)")
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
        if isinstance(compiled.ast, Number) and compiled.ast.unit is not None \
                and units.dimension(compiled.ast.unit) != "length":
            self.at_field("error", f, rid, f"'{v}' is {units.dimension(compiled.ast.unit).replace('_', ' ')}, "
                          "but error_um is a surface error (a length)", "write µm, e.g. 30 or 30 um")
            return
        if unit is not None and unit not in ("1", "um") and units.dimension(unit) == "length":
            scale = float(units.convert(1.0, unit, "um"))
        else:
            scale = 1.0
        if _constant(compiled.ast):
            value = float(evaluate_row(compiled.ast, {})) * scale
            if value < 0:
                self.at_field("error", f, rid, f"error_um is negative ({value:g} µm)",
                              "an error term is a size: write a positive number of µm")
                return
        f.compiled = compiled
        f.scale = scale

    def check_message(self, f: _Field, rid: str) -> None:
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
            self.at_field("error", f, rid, f"malformed message template: {exc}", "write values as {feature_name} "
                          "or {feature_name:.1f}; write a literal brace as {{ or }}", offset=offset)
            return
        known = list(self.catalogue) + list(MESSAGE_EXTRAS)
        for match in re.finditer(r"(?<!\{)\{([^{}]*)\}", v.replace("{{", "\0\0").replace("}}", "\0\0")):
            name, _, spec = match.group(1).partition(":")
            offset = match.start()
            if name not in self.catalogue and name not in MESSAGE_EXTRAS:
                self.at_field("error", f, rid, f"the message names '{{{name}}}', which the rule does not have "
                              "(not a feature)", _did_you_mean(name, known, "see 'advisor rules features'"),
                              offset=offset)
                continue
            if not spec:
                continue
            kind = self.catalogue[name].kind if name in self.catalogue else "text"
            if kind == "flag":
                self.at_field("warning", f, rid, f"'{{{name}:{spec}}}' formats a flag, which is shown as yes/no",
                              f"write {{{name}}}", offset=offset)
                continue
            try:
                format(_SAMPLE.get(kind, "text"), spec)
            except (ValueError, TypeError) as exc:
                self.at_field("error", f, rid, f"bad format '{spec}' for '{name}': {exc}",
                              "use e.g. .1f (one decimal), .0f (none) or +.1f (with sign)", offset=offset)

    # layering
    def merge(self, entry: _Entry) -> None:
        rid = entry.rid
        enabled_field = entry.fields.get("enabled")
        exists = rid in self.merged
        if enabled_field is not None and enabled_field.value is False and not exists and len(entry.fields) <= 2:
            self.add("warning", f"disables rule '{rid}', which no earlier file defines", entry.source,
                     *enabled_field.at(), f"rule {rid}.enabled",
                     _did_you_mean(rid, self.merged, "check the id with 'advisor rules show'"))
        merged = self.merged.setdefault(rid, _Merged(rid))
        merged.entries.append(entry)
        merged.fields.update({k: f for k, f in entry.fields.items()})
        # as written in this entry; an entry that does not say is enabled (so it re-enables)
        merged.enabled = enabled_field.value if enabled_field is not None and isinstance(
            enabled_field.value, bool) else True
        merged.fields.pop("enabled", None)

    def finish(self) -> RuleSet | None:
        rules, disabled = [], []
        for rid, m in self.merged.items():
            last = m.entries[-1]
            if not m.enabled:
                disabled.append((rid, last.source, last.line, last.layer))
                continue
            missing = [k for k in REQUIRED_KEYS if k not in m.fields]
            if missing:
                if len(m.entries) == 1 and len(last.fields) < 4:
                    close = _close(rid, [r for r in self.merged if r != rid])
                    hint = (f"no earlier file defines '{rid}'" + (f" - did you mean '{close}'?" if close else ";")
                            + " a new rule needs id, applies_to, condition, effect and message")
                else:
                    hint = "every rule needs id, applies_to, condition, effect and message"
                self.add("error", f"missing {', '.join(repr(k) for k in missing)}", last.source, last.line,
                         last.column, f"rule {rid}", hint)
                continue
            effect, err = m.fields["effect"], m.fields.get("error_um")
            if effect.value == "add_error" and err is None:
                self.at_field("error", effect, rid, "effect add_error needs 'error_um' (a number or expression in µm)",
                              "add e.g. error_um: 30")
            elif err is not None and effect.value != "add_error" and effect.value in EFFECTS:
                if _entry_index(m, err) >= _entry_index(m, effect):
                    self.at_field("error", err, rid, "'error_um' is only used with effect add_error",
                                  "remove it, or set effect: add_error", on_key=True)
                else:
                    self.at_field("warning", err, rid, f"'error_um' is ignored: a later file set effect "
                                  f"{effect.value} ({effect.source}:{effect.line})", "nothing to do if intended",
                                  on_key=True)
                    err = None
            if not all(f.ok for f in m.fields.values()):
                continue
            rules.append(self.build(m, err))
        if any(p.severity == "error" for p in self.problems):
            return None
        return RuleSet(tuple(rules), tuple(self.files), tuple(disabled))

    def build(self, m: _Merged, err: _Field | None) -> Rule:
        f = m.fields
        last = m.entries[-1]
        cond = f["condition"].compiled
        error_text = None if err is None else str(err.value)
        earlier = tuple((e.source, e.line, e.layer) for e in m.entries[:-1])
        return Rule(id=m.rid, applies_to=f["applies_to"].value, condition_text=cond.source, condition=cond,
                    effect=f["effect"].value, message=f["message"].value,
                    error_text=error_text,
                    error=None if err is None else err.compiled, error_scale=1.0 if err is None else err.scale,
                    source=last.source, line=last.line, layer=last.layer, overrides=earlier)


def _entry_index(m: _Merged, f: _Field) -> int:
    return next(i for i, e in enumerate(m.entries) if any(x is f for x in e.fields.values()))


def _sorted(problems: list[Problem], files: list[str]) -> tuple[Problem, ...]:
    order = {name: i for i, name in enumerate(files)}
    return tuple(sorted(problems, key=lambda p: (order.get(p.source, len(order)), p.line or 0, p.column or 0)))


def lint_files(files: Iterable[tuple[Path | str, str]], catalogue: Mapping[str, FeatureSpec],
               domains: Mapping[str, tuple[float, float, str]] | None = None) -> LintReport:
    """Lint ``(path, layer)`` rule files layered in order; return every problem and the rule set."""
    linter = _Linter(catalogue, FEATURE_DOMAINS if domains is None else domains)
    for path, layer in files:
        source = str(path)
        try:
            load_yaml(path, RulesError)          # size, encoding, tabs, tags, aliases, syntax
            text = Path(path).read_text(encoding="utf-8")
        except RulesError as exc:
            linter.files.append(source)
            linter.add("error", exc.message, exc.source or source, exc.line, exc.column, exc.field, exc.hint)
            continue
        except (OSError, UnicodeDecodeError) as exc:  # pragma: no cover - raced with a change on disk
            linter.files.append(source)
            linter.add("error", f"cannot read file: {exc}", source)
            continue
        linter.add_document(source, layer, text)
    ruleset = linter.finish()
    return LintReport(_sorted(linter.problems, linter.files), ruleset, tuple(linter.files))


def lint_texts(documents: Iterable[tuple[str, str, str]], catalogue: Mapping[str, FeatureSpec],
               domains: Mapping[str, tuple[float, float, str]] | None = None) -> LintReport:
    """As :func:`lint_files` for ``(text, source name, layer)`` documents already in memory."""
    linter = _Linter(catalogue, FEATURE_DOMAINS if domains is None else domains)
    for text, source, layer in documents:
        try:
            parse_yaml_text(text, source, RulesError)
        except RulesError as exc:
            linter.files.append(source)
            linter.add("error", exc.message, source, exc.line, exc.column, exc.field, exc.hint)
            continue
        linter.add_document(source, layer, text)
    ruleset = linter.finish()
    return LintReport(_sorted(linter.problems, linter.files), ruleset, tuple(linter.files))
