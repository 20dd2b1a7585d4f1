"""The type and unit checker of the condition language: a parsed tree → a checked tree.

A value is a *flag* (true/false) or a *number*.  Flags combine with ``and``/``or``/``not`` and
``==``/``!=``; numbers with arithmetic and comparisons; mixing them is a ConditionError with a
hint.  Every feature has a unit (:mod:`advisor.units`, from the catalogue's
:class:`~advisor.catalogue.FeatureSpec`); a number written with a unit is converted into the
unit of the feature it meets, a bare number takes the feature's unit, temperatures next to
temperature differences are read as differences, and quantities of different dimensions are
refused naming both units.

:func:`check_text` returns the checked tree: names carry their kind and unit, literals are in
the unit they are compared in, conversions between features are explicit :class:`Convert`
nodes and comparison chains are split into pairs joined by ``and``.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from dataclasses import dataclass, replace

from advisor import units
from advisor.catalogue import FeatureSpec
from advisor.errors import ConditionError
from advisor.rules.nodes import (
    Binary,
    Bool,
    Call,
    Compare,
    Convert,
    Logical,
    Name,
    Node,
    Number,
    Unary,
    error_at,
    iter_nodes,
)
from advisor.rules.syntax import FUNCTIONS, parse

__all__ = ["Checked", "check_text"]

_T, _D = "temperature", "temperature_difference"
_UNKNOWN = "?"  # internal: a number whose unit the checker cannot name (e.g. a product)


@dataclass(frozen=True)
class Checked:
    """A checked condition or expression.

    Attributes
    ----------
    node : Node
        The checked tree.
    kind : str
        ``"flag"`` or ``"number"``.
    unit : str or None
        The unit of a number where the checker knows it; None for a bare number, a product of
        quantities or a flag.
    kinds : dict
        Feature name → ``"flag"`` or ``"number"``, for every feature the tree reads.
    """

    node: Node
    kind: str
    unit: str | None
    kinds: dict[str, str]


def check_text(text: str, catalogue: Mapping[str, FeatureSpec], want: str) -> Checked:
    """Parse and check ``text``; ``want`` is ``"flag"`` (a condition) or ``"number"`` (an expression).

    Raises
    ------
    ConditionError
        For bad syntax, unknown names or units, type or unit mismatches, or a result of the
        other kind than ``want``.
    """
    tree = parse(text)
    checker = _Checker(text, catalogue)
    try:
        typed = checker.check(tree)
    except RecursionError:  # pragma: no cover - the depth limit prevents it
        raise ConditionError(
            "the condition is nested too deeply", column=1, hint="simplify it or split it into several rules"
        ) from None
    q = checker.q(typed.node)
    if want == "flag" and typed.kind != "flag":
        raise ConditionError(
            f"'{q}' is a number, but a condition must be true or false",
            column=1,
            hint=f"compare it, e.g. {checker.example(typed)}",
        )
    if want == "number" and typed.kind != "number":
        raise ConditionError(
            f"'{q}' is a condition (true/false), but a number is needed here",
            column=1,
            hint="write a number or an expression, e.g. 15 + 0.5 * reference_age_h",
        )
    kinds = {n.name: n.kind or "number" for n in iter_nodes(typed.node) if isinstance(n, Name)}
    unit = typed.unit if typed.kind == "number" and typed.unit != _UNKNOWN else None
    return Checked(typed.node, typed.kind, unit, kinds)


@dataclass(frozen=True)
class _Typed:
    node: Node
    kind: str  # "flag" | "number"
    unit: str | None = None  # canonical unit name; None for a bare number; _UNKNOWN
    literal: bool = False  # a Number written with a unit (its value may still be converted)


def _canonical(unit: str) -> str:
    return units.lookup(unit).name


def _dimension_words(unit: str) -> str:
    dim = units.dimension(unit).replace("_", " ")
    if dim == "dimensionless":
        return "dimensionless"
    return ("an " if dim[0] in "aeiou" else "a ") + dim


def _in_unit(unit: str) -> str:
    return "dimensionless" if units.dimension(unit) == "dimensionless" else f"in {unit}"


class _Checker:
    def __init__(self, source: str, catalogue: Mapping[str, FeatureSpec]) -> None:
        self.source = source
        self.catalogue = catalogue

    # messages
    def q(self, node: Node, limit: int = 40) -> str:
        text = " ".join(node.text_in(self.source).split())
        return text if len(text) <= limit else text[: limit - 3] + "..."

    def err(self, message: str, node: Node | int, hint: str | None = None) -> ConditionError:
        start = node if isinstance(node, int) else node.start
        return error_at(message, start, hint)

    def example(self, t: _Typed) -> str:
        text = self.q(t.node)
        if isinstance(t.node, (Binary, Logical, Compare)) and not text.startswith("("):
            text = f"({text})"
        unit = "" if t.unit in (None, _UNKNOWN, "1") else f" {t.unit}"
        return f"{text} > 4{unit}"

    def need_flag(self, t: _Typed) -> None:
        if t.kind != "flag":
            raise self.err(f"'{self.q(t.node)}' is a number, not a flag", t.node, f"compare it, e.g. {self.example(t)}")

    def need_number(self, t: _Typed, what: str) -> None:
        if t.kind != "number":
            raise self.err(
                f"'{self.q(t.node)}' is a flag (true/false), not a number",
                t.node,
                f"{what} needs numbers; combine flags with and / or / not",
            )

    # dispatch
    def check(self, node: Node) -> _Typed:
        if isinstance(node, Number):
            if node.unit is None:
                return _Typed(node, "number")
            unit = _canonical(node.unit)
            return _Typed(replace(node, unit=unit), "number", unit, literal=True)
        if isinstance(node, Bool):
            return _Typed(node, "flag")
        if isinstance(node, Name):
            return self.check_name(node)
        if isinstance(node, Unary):
            return self.check_unary(node)
        if isinstance(node, Binary):
            return self.check_binary(node)
        if isinstance(node, Logical):
            parts = [self.check(o) for o in node.operands]
            for part in parts:
                self.need_flag(part)
            return _Typed(replace(node, operands=tuple(p.node for p in parts)), "flag")
        if isinstance(node, Compare):
            return self.check_compare(node)
        if isinstance(node, Call):
            return self.check_call(node)
        raise self.err(f"unexpected element {type(node).__name__}", node)  # pragma: no cover

    def check_name(self, node: Name) -> _Typed:
        spec = self.catalogue.get(node.name)
        if spec is None:
            raise self.err(f"unknown name '{node.name}'", node, self.name_hint(node.name))
        if spec.kind == "flag":
            return _Typed(replace(node, kind="flag", unit=None), "flag")
        unit = _canonical(spec.unit)
        return _Typed(replace(node, kind="number", unit=unit), "number", unit)

    def name_hint(self, name: str) -> str:
        if name in FUNCTIONS:
            return f"{name} is a function: write {name}(x)"
        if name in units.known_units():
            return f"a unit follows its number directly, e.g. 8 {name}"
        known = sorted(self.catalogue)
        close = difflib.get_close_matches(name, known, n=3)
        if close:
            return "did you mean " + " or ".join(f"'{c}'" for c in close) + "?"
        if not known:
            return "the feature catalogue is empty"
        return "known names include " + ", ".join(known[:6]) + (", ..." if len(known) > 6 else "")

    def check_unary(self, node: Unary) -> _Typed:
        t = self.check(node.operand)
        if node.op == "not":
            self.need_flag(t)
            return _Typed(replace(node, operand=t.node), "flag")
        if t.kind != "number":
            raise self.err(
                f"'{self.q(t.node)}' is a flag (true/false), not a number",
                t.node,
                f"write not {self.q(t.node)} to negate a flag",
            )
        return _Typed(replace(node, operand=t.node), "number", t.unit)

    def check_binary(self, node: Binary) -> _Typed:
        a, b = self.check(node.left), self.check(node.right)
        self.need_number(a, f"'{node.op}'")
        self.need_number(b, f"'{node.op}'")
        if node.op in ("+", "-"):
            left, right, unit = self.unify_additive(node, a, b)
        else:
            left, right, unit = self.unify_product(node.op, a, b)
        return _Typed(replace(node, left=left, right=right), "number", unit)

    def check_compare(self, node: Compare) -> _Typed:
        typed = [self.check(o) for o in node.operands]
        pairs: list[Node] = []
        for i, op in enumerate(node.ops):
            a, b = typed[i], typed[i + 1]
            op_start = node.op_starts[i] if i < len(node.op_starts) else a.node.end
            if a.kind == "flag" or b.kind == "flag":
                if a.kind != b.kind:
                    flag, num = (a, b) if a.kind == "flag" else (b, a)
                    raise self.err(
                        f"'{self.q(flag.node)}' is a flag (true/false) and cannot be compared "
                        f"with the number '{self.q(num.node)}'",
                        flag.node,
                        f"use the flag itself ({self.q(flag.node)}), its negation, or compare it with true / false",
                    )
                if op not in ("==", "!="):
                    raise self.err(
                        f"flags can only be compared with == or !=, not {op}",
                        op_start,
                        "use the flag itself, not, or == true / == false",
                    )
                left, right = a.node, b.node
            else:
                left, right, _ = self.unify(a, b)
            pairs.append(
                Compare(start=a.node.start, end=b.node.end, ops=(op,), operands=(left, right), op_starts=(op_start,))
            )
        if len(pairs) == 1:
            return _Typed(replace(pairs[0], start=node.start, end=node.end), "flag")
        return _Typed(Logical(start=node.start, end=node.end, op="and", operands=tuple(pairs)), "flag")

    def check_call(self, node: Call) -> _Typed:
        typed = [self.check(a) for a in node.args]
        func = node.func
        if func == "missing":
            (t,) = typed
            if t.kind == "flag" and not isinstance(t.node, Name):
                raise self.err(
                    "missing() takes a number or a feature name",
                    t.node,
                    "write e.g. missing(fog) or missing(visibility_m)",
                )
            return _Typed(replace(node, args=(t.node,)), "flag")
        for t in typed:
            self.need_number(t, f"{func}()")
        if func == "abs":
            return _Typed(replace(node, args=(typed[0].node,)), "number", typed[0].unit)
        if func == "sqrt":
            unit = typed[0].unit if typed[0].unit in (None, "1") else _UNKNOWN
            return _Typed(replace(node, args=(typed[0].node,)), "number", unit)
        # min / max: bring every argument into the unit of the first measured one
        ref = next((t for t in typed if t.unit is not None and not t.literal), None) or next(
            (t for t in typed if t.unit is not None), typed[0]
        )
        args = []
        for t in typed:
            if t is ref:
                args.append(t.node)
            else:
                _, converted, _ = self.unify(ref, t)
                args.append(converted)
        return _Typed(replace(node, args=tuple(args)), "number", ref.unit)

    # units
    def to_unit(self, t: _Typed, unit: str) -> Node:
        """``t``'s node expressed in ``unit`` (literals converted now, others by a Convert node)."""
        if t.unit is None or t.unit == unit:  # a bare number takes the unit it meets
            return t.node
        if isinstance(t.node, Number):
            return replace(t.node, value=float(units.convert(t.node.value, t.unit, unit)), unit=unit)
        return Convert(start=t.node.start, end=t.node.end, operand=t.node, from_unit=t.unit, to_unit=unit)

    def mismatch(self, a: _Typed, b: _Typed) -> ConditionError:
        """The error for two quantities of different dimensions (``a`` preferably the literal)."""
        if b.literal and not a.literal:
            a, b = b, a
        assert a.unit is not None and b.unit is not None  # bare numbers never mismatch
        what = f"'{self.q(a.node)}' is {_dimension_words(a.unit)}"
        if b.literal:
            hint = "write both values in units of the same kind"
            return self.err(f"{what} but '{self.q(b.node)}' is {_dimension_words(b.unit)}", a.node, hint)
        if a.literal:
            hint = (
                "write a plain number"
                if units.dimension(b.unit) == "dimensionless"
                else f"write the value in {b.unit} or another unit of the same kind"
            )
        else:
            hint = "only quantities of the same kind can be compared, added or subtracted"
        return self.err(f"{what} but '{self.q(b.node)}' is {_in_unit(b.unit)}", a.node, hint)

    def unify(self, a: _Typed, b: _Typed) -> tuple[Node, Node, str | None]:
        """Bring two numbers into one unit for comparing (or min/max); returns the unit."""
        ua, ub = a.unit, b.unit
        if ua is None or ub is None:
            return a.node, b.node, ub if ua is None else ua
        if _UNKNOWN in (ua, ub):
            lit, other = (b, a) if (b.literal and ua == _UNKNOWN) else (a, b)
            if lit.literal and other.unit == _UNKNOWN:
                raise self.err(
                    f"cannot convert '{self.q(lit.node)}': the unit of '{self.q(other.node)}' is not known",
                    lit.node,
                    f"write a plain number in the unit of '{self.q(other.node)}'",
                )
            return a.node, b.node, _UNKNOWN
        if ua == ub:
            return a.node, b.node, ua
        try:
            if b.literal:  # a feature (or a first literal) sets the unit
                return a.node, self.to_unit(b, ua), ua
            if a.literal:
                return self.to_unit(a, ub), b.node, ub
            if units.dimension(ua) == units.dimension(ub):
                return a.node, self.to_unit(b, ua), ua
        except units.UnitError:
            pass
        raise self.mismatch(a, b)

    def unify_additive(self, node: Binary, a: _Typed, b: _Typed) -> tuple[Node, Node, str | None]:
        """Units for ``a + b`` / ``a - b``, with temperatures read as differences where meant."""
        ua, ub = a.unit, b.unit
        if ua is None or ub is None or _UNKNOWN in (ua, ub):
            return self.unify(a, b)
        da, db = units.dimension(ua), units.dimension(ub)
        if da == db == _T:
            if b.literal:  # air_temp_c - 2 degF: the literal is a difference
                return self.to_unit(a, "degC"), self.to_unit(b, "delta_degC"), "degC"
            if a.literal and node.op == "+":  # 2 degF + air_temp_c
                return self.to_unit(a, "delta_degC"), self.to_unit(b, "degC"), "degC"
            if node.op == "-":  # air_temp_c - dew_point_c: a difference
                return self.to_unit(a, "degC"), self.to_unit(b, "degC"), "delta_degC"
            raise self.err(
                "adding two temperatures has no meaning",
                node.op_start,
                "subtract them for a difference, e.g. air_temp_c - dew_point_c",
            )
        if {da, db} == {_T, _D}:
            absolute = a if da == _T else b
            if absolute.literal:  # a temperature next to a difference is a difference
                return self.to_unit(a, "delta_degC"), self.to_unit(b, "delta_degC"), "delta_degC"
            if da == _D and node.op == "-":
                raise self.err(
                    "subtracting a temperature from a temperature difference has no meaning",
                    node.op_start,
                    "write the temperature first, e.g. air_temp_c - 2 degC",
                )
            left = self.to_unit(a, "degC" if da == _T else "delta_degC")
            right = self.to_unit(b, "degC" if db == _T else "delta_degC")
            return left, right, "degC"
        return self.unify(a, b)

    def unify_product(self, op: str, a: _Typed, b: _Typed) -> tuple[Node, Node, str | None]:
        """Units for ``a * b`` / ``a / b``: a bare or dimensionless factor keeps the other's unit."""
        ua, ub = a.unit, b.unit
        left, right = a.node, b.node
        if (
            ua is not None
            and ub is not None
            and _UNKNOWN not in (ua, ub)
            and ua != ub
            and units.dimension(ua) == units.dimension(ub)
            and (a.literal or b.literal or op == "/")
        ):
            left, right, ua = self.unify(a, b)  # wind_mean_ms / 8 kn: one unit first, then divide
            ub = ua
        if op == "*":
            if ua is None:
                return left, right, ub
            if ub is None:
                return left, right, ua
            if ua == "1":
                return left, right, ub
            if ub == "1":
                return left, right, ua
            return left, right, _UNKNOWN
        if ub is None or ub == "1":
            return left, right, ua
        if ua == ub and ua != _UNKNOWN:
            return left, right, "1"
        return left, right, _UNKNOWN
