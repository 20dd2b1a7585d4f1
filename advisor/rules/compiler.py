"""The compiler of the condition language: a checked tree → numpy closures over whole columns.

    >>> rule = compile_condition("wind_mean_ms > 8 kn and not fog", CATALOGUE)
    >>> rule.evaluate({"wind_mean_ms": np.array([3.0, 5.0]), "fog": np.array([False, False])})
    array([False,  True])

Compilation builds a tree of closures over numpy ufuncs once (constant parts folded);
:meth:`Compiled.evaluate` does no parsing and no per-row Python.  A column may be an array or
Series of length ``n`` or a scalar (a 0-d value, as the target-scope features such as
``freq_ghz`` travel): numpy broadcasts scalars, so no column is ever widened to ``n`` and the
memory used beyond the inputs is a few arrays of ``n`` per rule, whatever the number of
scalar features.  The result always has length ``n``.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
import pandas as pd

from advisor import units
from advisor.catalogue import FeatureSpec
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
    children,
    iter_nodes,
)
from advisor.rules.typecheck import check_text

__all__ = ["Compiled", "compile_condition", "compile_expression"]

_ARITHMETIC = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide}
_COMPARE = {
    "<": np.less,
    "<=": np.less_equal,
    ">": np.greater,
    ">=": np.greater_equal,
    "==": np.equal,
    "!=": np.not_equal,
}
_Fn = Callable[[dict], Any]


def _fold(fn: _Fn, const: bool) -> tuple[_Fn, bool]:
    if not const:
        return fn, False
    with np.errstate(all="ignore"):
        value = fn({})
    return (lambda env: value), True


def _build(node: Node, flag_missing: set[str]) -> tuple[_Fn, bool]:
    """A closure computing ``node`` from ``env`` (name → prepared array), and whether it is constant.

    ``flag_missing`` collects the flag features whose missing-data mask is needed.
    """
    if isinstance(node, (Number, Bool)):
        value = float(node.value) if isinstance(node, Number) else bool(node.value)
        return (lambda env: value), True
    if isinstance(node, Name):
        key = node.name
        return (lambda env: env[key]), False
    if isinstance(node, Convert):
        inner, const = _build(node.operand, flag_missing)
        src, dst = node.from_unit, node.to_unit
        return _fold(lambda env: units.convert(inner(env), src, dst), const)
    if isinstance(node, Unary):
        inner, const = _build(node.operand, flag_missing)
        negate = np.logical_not if node.op == "not" else np.negative
        return _fold(lambda env: negate(inner(env)), const)
    if isinstance(node, Binary):
        (left, c1), (right, c2) = _build(node.left, flag_missing), _build(node.right, flag_missing)
        arithmetic = _ARITHMETIC[node.op]
        return _fold(lambda env: arithmetic(left(env), right(env)), c1 and c2)
    if isinstance(node, Logical):
        built = [_build(o, flag_missing) for o in node.operands]
        return _fold(
            _reduce(np.logical_and if node.op == "and" else np.logical_or, [f for f, _ in built]),
            all(c for _, c in built),
        )
    if isinstance(node, Compare):
        built = [_build(o, flag_missing) for o in node.operands]
        fns = [f for f, _ in built]
        pairs = [_pair(_COMPARE[op], fns[i], fns[i + 1]) for i, op in enumerate(node.ops)]
        fn = pairs[0] if len(pairs) == 1 else _reduce(np.logical_and, pairs)
        return _fold(fn, all(c for _, c in built))
    if isinstance(node, Call):
        if node.func == "missing":
            (arg,) = node.args
            if isinstance(arg, Name) and arg.kind == "flag":
                flag_missing.add(arg.name)
                mask_key = (arg.name, "missing")
                return (lambda env: env[mask_key]), False
            inner, const = _build(arg, flag_missing)
            return _fold(lambda env: np.isnan(inner(env)), const)
        built = [_build(a, flag_missing) for a in node.args]
        fns, const = [f for f, _ in built], all(c for _, c in built)
        if node.func in ("abs", "sqrt"):
            inner = fns[0]
            unary = np.abs if node.func == "abs" else np.sqrt
            return _fold(lambda env: unary(inner(env)), const)
        reduced = _reduce(np.minimum if node.func == "min" else np.maximum, fns)
        # + 0.0 turns -0.0 into 0.0, so the sign of a zero never depends on argument order
        return _fold(lambda env: np.add(reduced(env), 0.0), const)
    raise TypeError(f"cannot compile {type(node).__name__}")  # pragma: no cover


def _tested_inputs(node: Node, needs: Mapping[str, tuple[str, ...]]) -> set[str]:
    """Inputs the condition tests with ``missing(...)``: it says itself what to do without them."""
    found: set[str] = set()
    for n in iter_nodes(node):
        if isinstance(n, Call) and n.func == "missing" and isinstance(n.args[0], Name):
            found.update(needs.get(n.args[0].name, ()))
    return found


def _build_unknown(node: Node, seeds: Mapping[str, tuple[str, ...]]) -> _Fn | None:
    """A closure giving where ``node`` is unknown (Kleene's three-valued logic), or None if never.

    A feature of ``seeds`` is unknown where any of its inputs is NaN; arithmetic and comparisons
    are unknown where an operand is; ``a and b`` is unknown where an operand is unknown and none
    is known false, ``a or b`` where an operand is unknown and none is known true; ``missing(x)``
    is always known.
    """
    if isinstance(node, Name):
        inputs = seeds.get(node.name)
        if not inputs:
            return None
        keys = [("needs", k) for k in inputs]
        return lambda env: _any_nan(env, keys)
    if isinstance(node, (Number, Bool)) or (isinstance(node, Call) and node.func == "missing"):
        return None
    if isinstance(node, Logical):
        parts = [(_build(o, set())[0], _build_unknown(o, seeds)) for o in node.operands]
        if all(u is None for _, u in parts):
            return None
        want_true = node.op == "or"

        def logical(env: dict) -> Any:
            unknown: Any = np.False_
            decided: Any = np.False_
            for value, unknown_of in parts:
                u = unknown_of(env) if unknown_of is not None else np.False_
                v = np.asarray(value(env), dtype=bool)
                unknown = unknown | u
                decided = decided | ((v if want_true else ~v) & ~u)
            return unknown & ~decided

        return logical
    fns = [u for u in (_build_unknown(c, seeds) for c in children(node)) if u is not None]
    if not fns:
        return None
    return _reduce(np.logical_or, fns) if len(fns) > 1 else fns[0]


def _any_nan(env: dict, keys: list) -> Any:
    out: Any = np.False_
    for key in keys:
        if key in env:
            out = out | np.isnan(env[key])
    return out


def _pair(ufunc, left: _Fn, right: _Fn) -> _Fn:
    return lambda env: ufunc(left(env), right(env))


def _reduce(ufunc, fns: list[_Fn]) -> _Fn:
    if len(fns) == 2:
        first, second = fns
        return lambda env: ufunc(first(env), second(env))

    def run(env: dict) -> Any:
        out = fns[0](env)
        for fn in fns[1:]:
            out = ufunc(out, fn(env))
        return out

    return run


def _float_column(column: Any, name: str) -> np.ndarray:
    if column is pd.NA:  # a missing scalar
        return np.array(np.nan)
    try:
        if isinstance(column, pd.Series):
            arr = column.to_numpy(dtype=float, na_value=np.nan)
        else:
            arr = np.asarray(column, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"column '{name}' is not numeric: {exc}") from None
    return arr


def _flag_column(column: Any, name: str) -> tuple[np.ndarray, np.ndarray | None]:
    """(flag values, missing mask or None when the column cannot hold missing values)."""
    raw = column.to_numpy() if isinstance(column, pd.Series) else np.asarray(column)
    if raw.dtype == bool:
        return raw, None
    values = _float_column(column, name)
    missing = np.isnan(values)
    return (values != 0) & ~missing, missing


class Compiled:
    """A checked, compiled condition or expression; evaluate it over columns of features.

    Attributes
    ----------
    source : str
        The text as written.
    names : frozenset of str
        The features it reads.
    kind : str
        ``"flag"`` (a condition) or ``"number"`` (an expression).
    unit : str or None
        For a number, the unit of the result where the checker knows it (a bare number or a
        product of quantities: None).  A bare factor counts as dimensionless.
    ast : Node
        The checked tree: literals already in the unit they are compared in, conversions made
        explicit, chains split into pairs.  :func:`advisor.rules.interpret.evaluate_row`
        evaluates it.
    """

    __slots__ = ("source", "names", "kind", "unit", "ast", "_fn", "_kinds", "_flag_missing", "_unknown", "needs_inputs")

    def __init__(
        self,
        source: str,
        ast: Node,
        kind: str,
        unit: str | None,
        kinds: dict[str, str],
        needs: Mapping[str, tuple[str, ...]] | None = None,
    ) -> None:
        self.source = source
        self.ast = ast
        self.kind = kind
        self.unit = unit
        self.names = frozenset(kinds)
        self._kinds = kinds
        self._flag_missing: set[str] = set()
        self._fn, _ = _build(ast, self._flag_missing)
        needs = {k: v for k, v in (needs or {}).items() if k in kinds}
        tested = _tested_inputs(ast, needs)
        seeds = {k: tuple(i for i in v if i not in tested) for k, v in needs.items()}
        seeds = {k: v for k, v in seeds.items() if v}
        #: The optional inputs whose absence can leave this condition unknown.
        self.needs_inputs: frozenset[str] = frozenset(i for v in seeds.values() for i in v)
        self._unknown = _build_unknown(ast, seeds) if seeds else None

    def __repr__(self) -> str:
        return f"Compiled({self.source!r}, kind={self.kind!r}, unit={self.unit!r})"

    def _prepare(self, columns: Any, length: int | None) -> tuple[dict, int | None]:
        """(name → prepared array, the number of rows or None when nothing says it)."""
        env: dict = {}
        n = None if length is None else int(length)
        if n is not None and n < 0:
            raise ValueError(f"length must be >= 0, got {length}")
        for name in sorted(self.names):
            try:
                column = columns[name]
            except (KeyError, IndexError, TypeError):
                raise KeyError(f"no column '{name}' (read by '{self.source}')") from None
            if self._kinds[name] == "flag":
                values, missing = _flag_column(column, name)
            else:
                values, missing = _float_column(column, name), None
            if values.ndim > 1:
                raise ValueError(f"column '{name}' must be one-dimensional or a scalar, got shape {values.shape}")
            if values.ndim == 1:
                if n is None:
                    n = len(values)
                elif len(values) != n:
                    raise ValueError(f"column '{name}' has {len(values)} values, expected {n}")
            env[name] = values
            if name in self._flag_missing:
                env[(name, "missing")] = missing if missing is not None else np.False_
        if self._unknown is not None:
            for name in sorted(self.needs_inputs):
                try:
                    column = columns[name]
                except (KeyError, IndexError, TypeError):
                    continue  # not given: nothing says it is missing
                env[("needs", name)] = _float_column(column, name)
        return env, n

    def values_used(self, columns: Any) -> dict[str, np.ndarray]:
        """The feature columns this reads, as float arrays (flags: bool arrays, NaN read as false).

        A scalar column stays a 0-d array.  The arrays may share memory with ``columns``.
        """
        env, _ = self._prepare(columns, None)
        return {k: v for k, v in env.items() if isinstance(k, str)}

    def evaluate(self, columns: Any = None, *, length: int | None = None) -> np.ndarray:
        """Evaluate over ``columns`` (name → array or Series of one length ``n``, or a scalar).

        Returns a bool array (conditions) or float array (expressions) of length ``n``.  Scalar
        columns and constants broadcast to ``n``, taken from ``length`` or from any column of
        length ``n``.  Columns are read by position (a Series' index is ignored).
        """
        env, n = self._prepare(columns, length)
        dtype = bool if self.kind == "flag" else float
        with np.errstate(all="ignore"):
            out = np.asarray(self._fn(env), dtype=dtype)
        if out.ndim == 0:
            if n is None:
                n = _length_of(columns)
            return np.full(n, out.item(), dtype=dtype)
        if any(out is v for v in env.values()):
            out = out.copy()
        return out

    def unknown(self, columns: Any = None, *, length: int | None = None) -> np.ndarray | None:
        """Rows where the condition is unknown because an optional input it needs is missing
        (three-valued logic, see :func:`_build_unknown`); None when it needs no optional input."""
        if self._unknown is None:
            return None
        env, n = self._prepare(columns, length)
        with np.errstate(all="ignore"):
            out = np.asarray(self._unknown(env), dtype=bool)
        if out.ndim == 0:
            if n is None:
                n = _length_of(columns)
            return np.full(n, out.item(), dtype=bool)
        return out


def _length_of(columns: Any) -> int:
    """The length of the first column that is not a scalar."""
    if isinstance(columns, pd.DataFrame):
        return len(columns.index)
    if columns is not None:
        try:
            for column in columns.values():
                if np.ndim(column) == 1:
                    return len(column)
        except (AttributeError, TypeError):
            pass
    raise ValueError("a constant condition needs the number of rows: pass length=n")


def compile_condition(text: str, catalogue: Mapping[str, FeatureSpec]) -> Compiled:
    """Parse, check and compile a condition (its result must be a flag).

    Raises
    ------
    ConditionError
        For bad syntax, unknown names or units, type or unit mismatches, or a number result.
    """
    checked = check_text(text, catalogue, "flag")
    needs = {}
    for name in checked.kinds:
        spec = catalogue.get(name)
        if isinstance(spec, FeatureSpec) and spec.needs:
            needs[name] = spec.needs
    return Compiled(text, checked.node, checked.kind, checked.unit, checked.kinds, needs)


def compile_expression(text: str, catalogue: Mapping[str, FeatureSpec]) -> Compiled:
    """Parse, check and compile a numeric expression such as ``15 + 0.5 * reference_age_h``.

    Raises
    ------
    ConditionError
        As :func:`compile_condition`, or if the result is a flag.
    """
    checked = check_text(text, catalogue, "number")
    return Compiled(text, checked.node, checked.kind, checked.unit, checked.kinds)
