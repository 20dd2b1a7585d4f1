"""The reference interpreter of the condition language: a checked tree, one row of plain values.

    >>> evaluate_row(compile_condition("wind_mean_ms > 8 kn", CATALOGUE).ast, {"wind_mean_ms": 5.0})
    True

The straightforward per-row twin of :meth:`advisor.rules.compiler.Compiled.evaluate`, written
without numpy: same NaN rules (comparisons with NaN are false except ``!=``), same division by
zero (inf or NaN), flags holding a missing value read as false.  Tests compare the two on
random trees; ``rules explain`` and lint's threshold reasoning use it on single values.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from advisor import units
from advisor.rules.nodes import Binary, Bool, Call, Compare, Convert, Logical, Name, Node, Number, Unary

__all__ = ["evaluate_row"]


def _is_na(value: Any) -> bool:
    return value is None or value is pd.NA


def _row_number(value: Any) -> float:
    return math.nan if _is_na(value) else float(value)


def _row_flag(value: Any) -> bool:
    if _is_na(value):
        return False
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    number = float(value)
    return number == number and number != 0.0


def _row_missing(value: Any) -> bool:
    if _is_na(value):
        return True
    if isinstance(value, (bool, np.bool_)):
        return False
    return math.isnan(float(value))


def _py_divide(a: float, b: float) -> float:
    if b == 0.0:
        if a != a or a == 0.0:
            return math.nan
        return math.copysign(math.inf, a) * math.copysign(1.0, b)
    return a / b


def _py_min(a: float, b: float) -> float:
    return math.nan if (a != a or b != b) else (a if a < b else b)


def _py_max(a: float, b: float) -> float:
    return math.nan if (a != a or b != b) else (a if a > b else b)


def _py_compare(op: str, a: Any, b: Any) -> bool:
    if op == "<":
        return a < b
    if op == "<=":
        return a <= b
    if op == ">":
        return a > b
    if op == ">=":
        return a >= b
    if op == "==":
        return a == b
    return a != b


def evaluate_row(node: Node, row: Mapping[str, Any]) -> float | bool:
    """Evaluate a checked tree (``Compiled.ast``) for one row of plain Python values.

    The straightforward per-row reference for :meth:`Compiled.evaluate`: same NaN rules, same
    division by zero (inf/NaN), no numpy.  ``row`` maps feature names to floats (None or NaN for
    missing) or, for flags, bools.  In a raw :func:`parse` tree literals are not yet converted.
    """
    if isinstance(node, Number):
        return float(node.value)
    if isinstance(node, Bool):
        return bool(node.value)
    if isinstance(node, Name):
        value = row[node.name]
        if node.kind == "flag" or (node.kind is None and isinstance(value, (bool, np.bool_))):
            return _row_flag(value)
        return _row_number(value)
    if isinstance(node, Convert):
        return float(units.convert(evaluate_row(node.operand, row), node.from_unit, node.to_unit))
    if isinstance(node, Unary):
        value = evaluate_row(node.operand, row)
        return (not value) if node.op == "not" else -value
    if isinstance(node, Binary):
        a, b = evaluate_row(node.left, row), evaluate_row(node.right, row)
        if node.op == "+":
            return a + b
        if node.op == "-":
            return a - b
        if node.op == "*":
            return a * b
        return _py_divide(a, b)
    if isinstance(node, Logical):
        if node.op == "and":
            return all(evaluate_row(o, row) for o in node.operands)
        return any(evaluate_row(o, row) for o in node.operands)
    if isinstance(node, Compare):
        values = [evaluate_row(o, row) for o in node.operands]
        return all(_py_compare(op, values[i], values[i + 1]) for i, op in enumerate(node.ops))
    if isinstance(node, Call):
        if node.func == "missing":
            (arg,) = node.args
            if isinstance(arg, Name) and arg.kind == "flag":
                return _row_missing(row[arg.name])
            return math.isnan(evaluate_row(arg, row))
        values = [evaluate_row(a, row) for a in node.args]
        if node.func == "abs":
            return abs(values[0])
        if node.func == "sqrt":
            return math.nan if values[0] < 0 else math.sqrt(values[0])
        pick = _py_min if node.func == "min" else _py_max
        out = values[0]
        for value in values[1:]:
            out = pick(out, value)
        return out + 0.0
    raise TypeError(f"cannot evaluate {type(node).__name__}")  # pragma: no cover
