"""Thresholds that can never matter: impossible conditions and conditions always true.

    >>> compiled = compile_condition("wind_gust_ms > 5 and wind_gust_ms < 3", CATALOGUE)
    >>> for severity, message, offset, hint in threshold_findings(compiled, CATALOGUE):
    ...     print(severity, offset, message)
    error 0 the condition can never be true: 'wind_gust_ms > 5' and 'wind_gust_ms < 3' cannot all hold

Interval reasoning over the checked syntax tree: for each alternative (a disjunction of
per-feature states) the set of reals, NaN or not, and the flag values a feature may take where
the condition is true, met with the feature's possible range (the catalogue's
:attr:`~advisor.catalogue.FeatureSpec.domain`).  A condition with no alternative can never be
true (an error); a part that alone can never be true, and a condition that is never false, are
warnings.  Comparisons of one feature (or ``abs`` of one) with a constant, flags, ``missing()``,
``and``/``or``/``not`` are understood; anything else counts as "may be either".  At most
:data:`MAX_BRANCHES` alternatives are tracked, beyond which no verdict is given.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

from advisor.catalogue import FeatureSpec
from advisor.rules.compiler import Compiled
from advisor.rules.interpret import evaluate_row
from advisor.rules.nodes import Bool, Call, Compare, Logical, Name, Node, Unary, condition_parts, names_in

__all__ = ["threshold_findings", "catalogue_domains", "MAX_BRANCHES"]

#: Most alternatives tracked while reasoning about one condition (beyond that: no verdict).
MAX_BRANCHES = 256


def catalogue_domains(catalogue: Mapping[str, FeatureSpec]) -> dict[str, tuple[float, float, str]]:
    """Feature name → (lowest, highest, why) for every feature of ``catalogue`` that declares a domain."""
    return {name: spec.domain for name, spec in catalogue.items() if spec.domain is not None}


@dataclass(frozen=True)
class _Iv:
    """An interval of reals with open or closed ends."""

    lo: float
    hi: float
    lo_in: bool
    hi_in: bool

    def empty(self) -> bool:
        return self.lo > self.hi or (self.lo == self.hi and not (self.lo_in and self.hi_in))

    def meet(self, other: _Iv) -> _Iv:
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
    return {
        "<": (_Iv(-inf, c, False, False),),
        "<=": (_Iv(-inf, c, False, True),),
        ">": (_Iv(c, inf, False, False),),
        ">=": (_Iv(c, inf, True, False),),
        "==": (_Iv(c, c, True, True),),
        "!=": (_Iv(-inf, c, False, False), _Iv(c, inf, False, False)),
    }[op]


_FLIP = {"<": ">", "<=": ">=", ">": "<", ">=": "<=", "==": "==", "!=": "!="}


@dataclass(frozen=True)
class _State:
    """What one feature may be in one alternative: a set of reals, NaN or not, or a flag's values."""

    reals: tuple[_Iv, ...] = _REAL
    nan: bool = True
    flags: frozenset = frozenset({True, False})
    parts: tuple[Node, ...] = ()

    def meet(self, other: _State) -> _State:
        return _State(
            _meet(self.reals, other.reals),
            self.nan and other.nan,
            self.flags & other.flags,
            self.parts + tuple(p for p in other.parts if p not in self.parts),
        )

    def empty(self, is_flag: bool) -> bool:
        return not self.flags if is_flag else (not self.reals and not self.nan)


@dataclass
class _Conflict:
    name: str
    parts: tuple[Node, ...]
    domain: bool  # the feature's range took part
    alone: bool = False  # one part that no value at all satisfies


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
            out: list[dict]
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
        nan_holds = op == "!="  # NaN: every comparison is false except !=
        if not truth:
            reals, nan_holds = _complement(reals), not nan_holds
        return self.atom(name, _State(reals=reals, nan=nan_holds, parts=(node,)))


def _constant(node: Node) -> bool:
    return not names_in(node)


def _range_text(name: str, domains, catalogue) -> str:
    lo, hi, why = domains[name]
    unit = catalogue[name].unit if name in catalogue else ""
    unit = "" if unit in ("1", "flag") else f" {unit}"
    if hi == math.inf:
        return f"{name} is never below {lo:g}{unit}: {why.removeprefix('it is never negative: ')}"
    return f"{name} is always within {lo:g}..{hi:g}{unit} ({why})"


def threshold_findings(
    compiled: Compiled,
    catalogue: Mapping[str, FeatureSpec],
    domains: Mapping[str, tuple[float, float, str]] | None = None,
) -> list[tuple[str, str, int, str]]:
    """Impossible or trivial thresholds in a compiled condition.

    ``domains`` (feature → lowest, highest, why) defaults to the domains the catalogue's
    features declare (:func:`catalogue_domains`).  Returns ``(severity, message, offset, hint)``
    tuples; ``offset`` is 0-based in the text.
    """
    domains = catalogue_domains(catalogue) if domains is None else domains
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
                why = (
                    f"whatever the value of {c.name}"
                    if c.alone or c.name not in domains
                    else _range_text(c.name, domains, catalogue)
                )
                findings.append(
                    (
                        "warning",
                        f"'{q(atom)}' can never be true: {why}",
                        atom.start,
                        "this part of the condition never matters; fix or remove it",
                    )
                )
        except _TooMany:  # pragma: no cover - one atom is one alternative
            pass
    try:
        when_false = _Reasoner(kinds, domains).alternatives(compiled.ast, False)
    except _TooMany:
        return findings
    if not when_false:
        findings.append(
            (
                "warning",
                f"the condition '{q(compiled.ast)}' is always true: the rule applies at every instant",
                0,
                "check the threshold; a rule meant to always apply can say so in its message",
            )
        )
    return findings
