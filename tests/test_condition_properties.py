"""Property tests of the condition language: it never fails with anything but ConditionError,
and the compiled numpy evaluation agrees row by row with the plain-Python reference
interpreter ``evaluate_row``.

No physics is checked here; unit literals only have to be converted the same way on both paths.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from advisor.errors import ConditionError
from advisor.rules.condition import FeatureSpec, compile_condition, compile_expression, evaluate_row, parse

SETTINGS = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
ROWS = 12

CATALOGUE = {
    spec.name: spec
    for spec in (
        FeatureSpec("wind_mean_ms", "m/s"),
        FeatureSpec("wind_gust_ms", "m/s"),
        FeatureSpec("gust_factor", "1"),
        FeatureSpec("air_temp_c", "degC"),
        FeatureSpec("dew_point_spread_c", "delta_degC"),
        FeatureSpec("fog", "flag"),
        FeatureSpec("is_night", "flag"),
    )
}
FLAGS = ("fog", "is_night")
NUMBERS = tuple(n for n in CATALOGUE if n not in FLAGS)


# --------------------------------------------------------------------------- helpers


def check_error(err: ConditionError, text) -> None:
    assert isinstance(err.message, str) and err.message
    assert isinstance(err.column, int)
    if isinstance(text, str):
        assert 1 <= err.column <= len(text) + 1


def try_all(text):
    """Run parse and both compilers; return what compiled, failing on any non-ConditionError."""
    compiled = []
    for fn in (parse, lambda t: compile_condition(t, CATALOGUE), lambda t: compile_expression(t, CATALOGUE)):
        try:
            result = fn(text)
        except ConditionError as err:
            check_error(err, text)
        else:
            if fn is not parse:
                compiled.append(result)
    return compiled


values = st.one_of(
    st.floats(min_value=-50, max_value=50, allow_nan=False),
    st.sampled_from([0.0, -0.0, 1.0, -1.0, 4.0, np.nan, np.nan, math.inf, -math.inf, 1e300]),
)


@st.composite
def frames(draw):
    cols = {}
    for name in NUMBERS:
        cols[name] = np.array(draw(st.lists(values, min_size=ROWS, max_size=ROWS)), dtype=float)
    for name in FLAGS:
        if draw(st.booleans()):
            cols[name] = np.array(draw(st.lists(st.booleans(), min_size=ROWS, max_size=ROWS)))
        else:  # a float flag column with missing values
            cols[name] = np.array(draw(st.lists(st.sampled_from([0.0, 1.0, np.nan]), min_size=ROWS, max_size=ROWS)))
    return cols


def row_of(cols, i):
    return {k: (bool(v[i]) if v.dtype == bool else float(v[i])) for k, v in cols.items()}


def assert_agrees(compiled, cols):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = compiled.evaluate(cols)
    assert out.shape == (ROWS,)
    assert out.dtype == (bool if compiled.kind == "flag" else float)
    for i in range(ROWS):
        expected = evaluate_row(compiled.ast, row_of(cols, i))
        got = out[i]
        if compiled.kind == "flag":
            assert isinstance(expected, bool)
            assert bool(got) == expected, (compiled.source, i, row_of(cols, i))
        else:
            assert isinstance(expected, float)
            same = (math.isnan(expected) and math.isnan(got)) or got == expected
            assert same, (compiled.source, i, got, expected, row_of(cols, i))


# --------------------------------------------------------------------------- arbitrary text


@SETTINGS
@given(st.text(max_size=200))
def test_arbitrary_text_raises_only_condition_error(text):
    try_all(text)


@SETTINGS
@given(st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126), max_size=120))
def test_arbitrary_ascii_raises_only_condition_error(text):
    try_all(text)


TOKENS = [
    "wind_mean_ms",
    "wind_gust_ms",
    "gust_factor",
    "air_temp_c",
    "dew_point_spread_c",
    "fog",
    "is_night",
    "unknown_name",
    "4",
    "0",
    "-6",
    "2.5",
    "1e3",
    "1e999",
    "8 kn",
    "8kn",
    "2 degF",
    "32 degF",
    "30 min",
    "95 %",
    "1 km",
    "2 degC/h",
    "600 W/m2",
    "4 furlongs",
    "m/s",
    "kn",
    "true",
    "false",
    "True",
    "and",
    "or",
    "not",
    "(",
    "(",
    ")",
    ")",
    ",",
    "<",
    "<=",
    ">",
    ">=",
    "==",
    "!=",
    "+",
    "-",
    "*",
    "/",
    "abs(",
    "min(",
    "max(",
    "sqrt(",
    "missing(",
    "open(",
    "__import__(",
    "lambda",
    ".",
    "[",
    "]",
    "'",
    '"',
    ";",
    "=",
    "**",
    "%",
    "__class__",
    "\n",
    "\x00",
    "é",
    "°C",
    "None",
]


@SETTINGS
@given(
    st.lists(st.sampled_from(TOKENS), max_size=25), st.lists(st.sampled_from(["", " ", "  "]), max_size=25), frames()
)
def test_token_soup_raises_only_condition_error_and_what_compiles_agrees(tokens, gaps, cols):
    text = "".join(tok + (gaps[i] if i < len(gaps) else " ") for i, tok in enumerate(tokens))
    for compiled in try_all(text):
        assert_agrees(compiled, cols)


@SETTINGS
@given(st.integers(min_value=0, max_value=4000), st.sampled_from(["(", "not ", "-", "abs(", "1 + ", "x"]))
def test_long_and_deep_input_raises_only_condition_error(count, piece):
    try_all(piece * count + "fog" + ")" * (count if "(" in piece else 0))


# --------------------------------------------------------------------------- valid expressions

literal = st.one_of(
    st.integers(min_value=-5, max_value=60).map(str),
    st.floats(min_value=-100, max_value=100, allow_nan=False).map(repr),
    st.sampled_from(["0", "0.5", "1e-3", "2e2"]),
)
SPEED_UNITS = ["m/s", "kn", "km/h", "mph", "kt"]
TEMP_UNITS = ["degC", "degF", "K"]
CMP = ["<", "<=", ">", ">=", "==", "!="]


def unit_literal(draw, choices):
    return f"{draw(literal)} {draw(st.sampled_from(choices))}"


def dimensionless(draw, depth):
    options = (
        ["gust_factor", "bare", "op", "sqrt", "abs", "ratio", "neg", "minmax"] if depth > 0 else ["gust_factor", "bare"]
    )
    kind = draw(st.sampled_from(options))
    if kind == "gust_factor":
        return "gust_factor"
    if kind == "bare":
        return draw(literal)
    if kind == "op":
        return f"({dimensionless(draw, depth - 1)} {draw(st.sampled_from('+-*/'))} {dimensionless(draw, depth - 1)})"
    if kind in ("sqrt", "abs"):
        return f"{kind}({dimensionless(draw, depth - 1)})"
    if kind == "ratio":
        return f"({speed(draw, depth - 1)} / {speed(draw, depth - 1)})"
    if kind == "neg":
        return f"-({dimensionless(draw, depth - 1)})"
    func = draw(st.sampled_from(["min", "max"]))
    return f"{func}({dimensionless(draw, depth - 1)}, {dimensionless(draw, depth - 1)})"


def speed(draw, depth):
    options = ["feature", "sum", "lit_sum", "scale", "divide", "neg", "abs", "minmax"] if depth > 0 else ["feature"]
    kind = draw(st.sampled_from(options))
    if kind == "feature":
        return draw(st.sampled_from(["wind_mean_ms", "wind_gust_ms"]))
    if kind == "sum":
        return f"({speed(draw, depth - 1)} {draw(st.sampled_from('+-'))} {speed(draw, depth - 1)})"
    if kind == "lit_sum":
        if draw(st.booleans()):
            return f"({speed(draw, depth - 1)} {draw(st.sampled_from('+-'))} {unit_literal(draw, SPEED_UNITS)})"
        return f"({unit_literal(draw, SPEED_UNITS)} + {speed(draw, depth - 1)})"
    if kind == "scale":
        if draw(st.booleans()):
            return f"({dimensionless(draw, depth - 1)} * {speed(draw, depth - 1)})"
        return f"({speed(draw, depth - 1)} * {dimensionless(draw, depth - 1)})"
    if kind == "divide":
        return f"({speed(draw, depth - 1)} / {dimensionless(draw, depth - 1)})"
    if kind == "neg":
        return f"-({speed(draw, depth - 1)})"
    if kind == "abs":
        return f"abs({speed(draw, depth - 1)})"
    func = draw(st.sampled_from(["min", "max"]))
    extra = f", {unit_literal(draw, SPEED_UNITS)}" if draw(st.booleans()) else ""
    return f"{func}({speed(draw, depth - 1)}, {speed(draw, depth - 1)}{extra})"


def temperature(draw, depth):
    options = ["feature", "plus_lit", "lit_plus", "plus_delta", "max"] if depth > 0 else ["feature"]
    kind = draw(st.sampled_from(options))
    if kind == "feature":
        return "air_temp_c"
    if kind == "plus_lit":
        return f"({temperature(draw, depth - 1)} {draw(st.sampled_from('+-'))} {unit_literal(draw, TEMP_UNITS)})"
    if kind == "lit_plus":
        return f"({unit_literal(draw, TEMP_UNITS)} + {temperature(draw, depth - 1)})"
    if kind == "plus_delta":
        return f"({temperature(draw, depth - 1)} {draw(st.sampled_from('+-'))} {difference(draw, depth - 1)})"
    return f"max({temperature(draw, depth - 1)}, {unit_literal(draw, TEMP_UNITS)})"


def difference(draw, depth):
    options = ["feature", "spread", "sum", "lit", "scale", "abs", "min"] if depth > 0 else ["feature"]
    kind = draw(st.sampled_from(options))
    if kind == "feature":
        return "dew_point_spread_c"
    if kind == "spread":
        return f"({temperature(draw, depth - 1)} - {temperature(draw, depth - 1)})"
    if kind == "sum":
        return f"({difference(draw, depth - 1)} {draw(st.sampled_from('+-'))} {difference(draw, depth - 1)})"
    if kind == "lit":
        return f"({difference(draw, depth - 1)} {draw(st.sampled_from('+-'))} {unit_literal(draw, TEMP_UNITS)})"
    if kind == "scale":
        return f"({difference(draw, depth - 1)} * {dimensionless(draw, depth - 1)})"
    if kind == "abs":
        return f"abs({difference(draw, depth - 1)})"
    return f"min({difference(draw, depth - 1)}, {unit_literal(draw, TEMP_UNITS)})"


def number(draw, depth):
    world = draw(st.sampled_from(["speed", "dimensionless", "temperature", "difference"]))
    return world, {
        "speed": speed,
        "dimensionless": dimensionless,
        "temperature": temperature,
        "difference": difference,
    }[world](draw, depth)


def comparison(draw, depth):
    world, left = number(draw, depth)
    same = {"speed": speed, "dimensionless": dimensionless, "temperature": temperature, "difference": difference}[world]
    literal_units = {"speed": SPEED_UNITS, "temperature": TEMP_UNITS, "difference": TEMP_UNITS}.get(world)
    parts = [left]
    for _ in range(draw(st.integers(min_value=1, max_value=2))):  # chains of two or three
        if literal_units and draw(st.booleans()):
            parts.append(unit_literal(draw, literal_units))
        elif draw(st.booleans()):
            parts.append(draw(literal))
        else:
            parts.append(same(draw, max(depth - 1, 0)))
    text = parts[0]
    for part in parts[1:]:
        text += f" {draw(st.sampled_from(CMP))} {part}"
    return f"({text})"


def flag(draw, depth):
    options = (
        ["feature", "const", "not", "and", "or", "eq", "cmp", "missing_flag", "missing_number"]
        if depth > 0
        else ["feature", "const", "missing_flag"]
    )
    kind = draw(st.sampled_from(options))
    if kind == "feature":
        return draw(st.sampled_from(FLAGS))
    if kind == "const":
        return draw(st.sampled_from(["true", "false"]))
    if kind == "not":
        return f"(not {flag(draw, depth - 1)})"
    if kind in ("and", "or"):
        parts = [flag(draw, depth - 1) for _ in range(draw(st.integers(min_value=2, max_value=3)))]
        return "(" + f" {kind} ".join(parts) + ")"
    if kind == "eq":
        return f"({flag(draw, depth - 1)} {draw(st.sampled_from(['==', '!=']))} {flag(draw, depth - 1)})"
    if kind == "cmp":
        return comparison(draw, depth - 1)
    if kind == "missing_flag":
        return f"missing({draw(st.sampled_from(FLAGS))})"
    return f"missing({number(draw, depth - 1)[1]})"


@st.composite
def conditions(draw):
    return flag(draw, draw(st.integers(min_value=1, max_value=4)))


@st.composite
def expressions(draw):
    return number(draw, draw(st.integers(min_value=0, max_value=4)))[1]


@SETTINGS
@given(conditions(), frames())
def test_compiled_conditions_agree_with_the_reference_interpreter(text, cols):
    compiled = compile_condition(text, CATALOGUE)  # every generated condition is valid
    assert compiled.kind == "flag"
    assert compiled.names <= set(CATALOGUE)
    assert_agrees(compiled, cols)


@SETTINGS
@given(expressions(), frames())
def test_compiled_expressions_agree_with_the_reference_interpreter(text, cols):
    compiled = compile_expression(text, CATALOGUE)
    assert compiled.kind == "number"
    assert_agrees(compiled, cols)


@SETTINGS
@given(conditions())
def test_parsing_is_deterministic_and_spans_lie_in_the_text(text):
    tree = parse(text)
    assert parse(text) == tree
    assert 0 <= tree.start <= tree.end <= len(text)
