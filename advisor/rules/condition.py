"""The condition language of rule files, in one import: parse, type-check and compile to numpy.

Staff write small conditions (true/false) and expressions (numbers) in YAML::

    wind_gust_ms > 8 kn and not fog
    -6 deg <= sun_elevation_deg <= 15 deg
    solar_wm2 > 600 W/m2 or (missing(solar_wm2) and sun_elevation_deg > 35)
    15 + 0.5 * reference_age_h                    # an error term [um]

The whole surface::

    >>> catalogue = {"wind_mean_ms": FeatureSpec("wind_mean_ms", "m/s"),
    ...              "fog": FeatureSpec("fog", "flag")}
    >>> rule = compile_condition("wind_mean_ms > 8 kn and not fog", catalogue)
    >>> rule.evaluate({"wind_mean_ms": np.array([3.0, 5.0]), "fog": np.array([False, False])})
    array([False,  True])
    >>> evaluate_row(rule.ast, {"wind_mean_ms": 5.0, "fog": False})
    True

Grammar, lowest precedence first::

    condition  := and_part ("or" and_part)*
    and_part   := not_part ("and" not_part)*
    not_part   := "not" not_part | comparison
    comparison := sum (("<" | "<=" | ">" | ">=" | "==" | "!=") sum)*
    sum        := product (("+" | "-") product)*
    product    := unary (("*" | "/") unary)*
    unary      := "-" unary | primary
    primary    := NUMBER [UNIT] | "true" | "false" | NAME
                | FUNCTION "(" condition ("," condition)* ")" | "(" condition ")"

A chain ``a < b <= c`` means ``a < b and b <= c``.  NAME is a feature of the
catalogue (``[a-z_][a-z0-9_]*``); FUNCTION is one of ``abs``, ``min``, ``max``
(two or more arguments), ``missing`` and ``sqrt``.  Nothing else exists: no
attributes, indexing, strings, assignment, power, or calls of anything else.

Types and units.  A value is a *flag* (true/false) or a *number*.  Flags
combine with ``and``/``or``/``not`` and ``==``/``!=``; numbers with arithmetic
and comparisons; mixing them is a :class:`~advisor.errors.ConditionError` with
a hint.  Every feature has a unit (:mod:`advisor.units`); a number written
with a unit (``8 kn``, ``32 degF``, ``30 min``) is converted into the unit of
the feature it is compared with, added to, or passed to ``min``/``max``
alongside, so ``wind_mean_ms > 8 kn`` is ``wind_mean_ms > 4.1156`` [m/s].  A
bare number takes the feature's unit.  A temperature written next to a
temperature *difference* (``dew_point_spread_c < 2 degF``) or added to or
subtracted from a temperature (``air_temp_c + 2 degF``) is read as a
difference; the difference of two temperatures is a ``delta_degC``.  A
literal of another dimension than the feature is an error naming both units.

Missing data.  Features are NaN where data is absent.  ``<``, ``<=``, ``>``,
``>=`` and ``==`` are false when either side is NaN and ``!=`` is true (IEEE
754, numpy's behaviour), so ``not (x > 4)`` is *true* for a missing ``x``:
test for absent data with ``missing(x)``.  Arithmetic, ``abs``, ``sqrt``,
``min`` and ``max`` propagate NaN; division by zero gives ``inf`` or NaN,
silently.  A flag column holding NaN reads as false (``missing(flag)`` tells).

Safety.  The text is tokenised and parsed by this package alone: nothing is
ever passed to ``eval``/``exec``/``compile`` and no attribute is looked up by
a user-supplied name.  Input is bounded (``MAX_LENGTH`` characters,
``MAX_NESTING`` levels of parentheses/operators, ``MAX_DEPTH`` levels of tree);
every problem is a ``ConditionError`` whose ``column`` is the 1-based
position in the text.  Compilation builds a tree of closures over numpy
ufuncs once; :meth:`Compiled.evaluate` does no parsing and no per-row Python.
Where each part lives (this module only gathers their public names; code inside
:mod:`advisor.rules` imports the parts directly):

=========================================  ==============================================
:mod:`advisor.rules.nodes`                 syntax tree nodes, ``iter_nodes``, ``names_in``,
                                           ``condition_parts``
:mod:`advisor.rules.tokens`                the tokenizer
:mod:`advisor.rules.syntax`                the parser, ``parse``, the limits, ``FUNCTIONS``
:mod:`advisor.rules.typecheck`             flags/numbers, units and dimensions
:mod:`advisor.rules.compiler`              ``Compiled``, ``compile_condition``,
                                           ``compile_expression`` (numpy, whole columns)
:mod:`advisor.rules.interpret`             ``evaluate_row``, the per-row reference
=========================================  ==============================================
"""

from __future__ import annotations

from advisor.catalogue import FeatureSpec
from advisor.rules.compiler import Compiled, compile_condition, compile_expression
from advisor.rules.interpret import evaluate_row
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
    condition_parts,
    iter_nodes,
    names_in,
)
from advisor.rules.syntax import FUNCTIONS, MAX_DEPTH, MAX_LENGTH, MAX_NESTING, parse

__all__ = [
    "FeatureSpec",
    "Compiled",
    "parse",
    "compile_condition",
    "compile_expression",
    "evaluate_row",
    "Node",
    "Number",
    "Bool",
    "Name",
    "Unary",
    "Binary",
    "Logical",
    "Compare",
    "Call",
    "Convert",
    "iter_nodes",
    "names_in",
    "condition_parts",
    "FUNCTIONS",
    "MAX_LENGTH",
    "MAX_NESTING",
    "MAX_DEPTH",
]
