"""The condition language of rule files: parse, type-check and compile to numpy.

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

Safety.  The text is tokenised and parsed by this module alone: nothing is
ever passed to ``eval``/``exec``/``compile`` and no attribute is looked up by
a user-supplied name.  Input is bounded (``MAX_LENGTH`` characters,
``MAX_NESTING`` levels of parentheses/operators, ``MAX_DEPTH`` levels of tree);
every problem is a ``ConditionError`` whose ``column`` is the 1-based
position in the text.  Compilation builds a tree of closures over numpy
ufuncs once; :meth:`Compiled.evaluate` does no parsing and no per-row Python.
"""

from __future__ import annotations

import difflib
import keyword
import math
import re
from dataclasses import dataclass, replace
from typing import Any, Callable, Mapping

import numpy as np
import pandas as pd

from advisor import units
from advisor.catalogue import FeatureSpec
from advisor.errors import ConditionError

__all__ = [
    "FeatureSpec", "Compiled", "parse", "compile_condition", "compile_expression", "evaluate_row",
    "Node", "Number", "Bool", "Name", "Unary", "Binary", "Logical", "Compare", "Call", "Convert",
    "FUNCTIONS", "MAX_LENGTH", "MAX_NESTING", "MAX_DEPTH",
]

#: Longest condition accepted [characters].
MAX_LENGTH = 2000
#: Deepest nesting of parentheses, calls, ``not`` and unary minus accepted.
MAX_NESTING = 50
#: Deepest syntax tree accepted (bounds every recursive walk).
MAX_DEPTH = 100
#: The functions a condition may call: name → (fewest, most) arguments (None: no limit).
FUNCTIONS: dict[str, tuple[int, int | None]] = {
    "abs": (1, 1), "max": (2, None), "min": (2, None), "missing": (1, 1), "sqrt": (1, 1),
}
KEYWORDS = ("and", "or", "not", "true", "false")
COMPARISONS = ("<", "<=", ">", ">=", "==", "!=")

_NAME_RE = re.compile(r"[a-z_][a-z0-9_]*\Z")
_NUMBER_RE = re.compile(r"[0-9]+(?:\.[0-9]+)?(?:[eE][+-]?[0-9]+)?")
_IDENT_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_RESERVED = frozenset(keyword.kwlist) - {"and", "or", "not"}
#: Unit spellings that may follow a number, longest first (so "mm/h" wins over "mm").
_UNIT_SPELLINGS = tuple(sorted((u for u in units.known_units() if u and not u[0].isdigit()),
                               key=len, reverse=True))
_WORD_CHARS = frozenset("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789_°µ")
_SHOWN_UNITS = ("m/s", "kn", "km/h", "degC", "degF", "degC/h", "h", "min", "km", "deg", "%", "W/m2")
_OPERATORS = ("<=", ">=", "==", "!=", "<", ">", "+", "-", "*", "/")
_BAD_CHARACTERS = {
    ".": ("'.' is not allowed here",
          "write decimals with digits on both sides (0.5, 5.0); there are no attributes or methods"),
    "'": ("quotes are not allowed: the language has no strings", "write feature names without quotes"),
    '"': ("quotes are not allowed: the language has no strings", "write feature names without quotes"),
    "[": ("'[' is not allowed: there is no indexing", "use a feature name on its own"),
    "]": ("']' is not allowed: there is no indexing", "use a feature name on its own"),
    ";": ("';' is not allowed", "write one condition; join its parts with and / or"),
    ":": ("':' is not allowed", "write one condition; join its parts with and / or"),
    "=": ("'=' is not a comparison", "use == to test for equality, <= or >= for limits"),
    "!": ("'!' is not allowed", "use not, or != for 'not equal'"),
    "&": ("'&' is not allowed", "use and"),
    "|": ("'|' is not allowed", "use or"),
    "%": ("'%' is only a unit, written after a number (95 %)", "there is no remainder operator"),
    "^": ("'^' is not allowed: there is no power operator", "multiply (x * x) or use sqrt(x)"),
}
_T, _D = "temperature", "temperature_difference"
_UNKNOWN = "?"  # internal: a number whose unit the checker cannot name (e.g. a product)


# --------------------------------------------------------------------------- catalogue


# FeatureSpec is declared with the catalogue (advisor.catalogue) and re-exported here.


# --------------------------------------------------------------------------- syntax tree


@dataclass(frozen=True, kw_only=True)
class Node:
    """A node of the syntax tree; ``start``/``end`` are 0-based offsets into the text."""

    start: int
    end: int

    @property
    def column(self) -> int:
        """1-based position of the node's first character."""
        return self.start + 1

    def text_in(self, source: str) -> str:
        """The piece of ``source`` this node was parsed from."""
        return source[self.start:self.end]


@dataclass(frozen=True, kw_only=True)
class Number(Node):
    """A number; ``unit`` is as written (parse) or the unit converted into (checked)."""

    value: float
    unit: str | None = None


@dataclass(frozen=True, kw_only=True)
class Bool(Node):
    """``true`` or ``false``."""

    value: bool


@dataclass(frozen=True, kw_only=True)
class Name(Node):
    """A feature; ``kind`` and ``unit`` are filled in by the checker."""

    name: str
    kind: str | None = None
    unit: str | None = None


@dataclass(frozen=True, kw_only=True)
class Unary(Node):
    """``-x`` or ``not x``."""

    op: str
    operand: Node


@dataclass(frozen=True, kw_only=True)
class Binary(Node):
    """Arithmetic: ``op`` is one of ``+ - * /``."""

    op: str
    left: Node
    right: Node
    op_start: int = 0


@dataclass(frozen=True, kw_only=True)
class Logical(Node):
    """``and`` / ``or`` over two or more flags."""

    op: str
    operands: tuple[Node, ...]


@dataclass(frozen=True, kw_only=True)
class Compare(Node):
    """A comparison chain ``a < b <= c`` (the checker splits chains into pairs)."""

    ops: tuple[str, ...]
    operands: tuple[Node, ...]
    op_starts: tuple[int, ...] = ()


@dataclass(frozen=True, kw_only=True)
class Call(Node):
    """A call of one of :data:`FUNCTIONS`."""

    func: str
    args: tuple[Node, ...]


@dataclass(frozen=True, kw_only=True)
class Convert(Node):
    """Unit conversion the checker inserted between two quantities (checked trees only)."""

    operand: Node
    from_unit: str
    to_unit: str


def _children(node: Node) -> tuple[Node, ...]:
    if isinstance(node, (Unary, Convert)):
        return (node.operand,)
    if isinstance(node, Binary):
        return (node.left, node.right)
    if isinstance(node, (Logical, Compare)):
        return node.operands
    if isinstance(node, Call):
        return node.args
    return ()


def iter_nodes(root: Node):
    """Every node of a tree, ``root`` first (depth first, no recursion)."""
    stack = [root]
    while stack:
        node = stack.pop()
        yield node
        stack.extend(_children(node))


def names_in(root: Node) -> set[str]:
    """The feature names a tree reads."""
    return {n.name for n in iter_nodes(root) if isinstance(n, Name)}


def _depth(root: Node) -> int:
    """Depth of the tree, computed without recursion."""
    deepest, stack = 0, [(root, 1)]
    while stack:
        node, depth = stack.pop()
        deepest = max(deepest, depth)
        stack.extend((child, depth + 1) for child in _children(node))
    return deepest


# --------------------------------------------------------------------------- tokens


@dataclass(frozen=True)
class _Token:
    kind: str  # "num" "unit" "name" "kw" "op" "(" ")" "," "end"
    text: str
    start: int
    end: int


def _error(message: str, start: int, hint: str | None = None) -> ConditionError:
    return ConditionError(message, column=start + 1, hint=hint)


def _show_char(ch: str) -> str:
    return f"'{ch}'" if ch.isprintable() else repr(ch)


def _unit_at(text: str, pos: int) -> str | None:
    """The longest unit spelling starting at ``pos`` and ending at a word boundary."""
    for spelling in _UNIT_SPELLINGS:
        if text.startswith(spelling, pos):
            after = pos + len(spelling)
            if spelling[-1] in _WORD_CHARS and after < len(text) and text[after] in _WORD_CHARS:
                continue
            return spelling
    return None


def _tokenize(text: str) -> list[_Token]:
    tokens: list[_Token] = []
    pos, size = 0, len(text)
    while pos < size:
        ch = text[pos]
        if ch.isspace():
            pos += 1
            continue
        if "0" <= ch <= "9":
            match = _NUMBER_RE.match(text, pos)
            tokens.append(_Token("num", match.group(), pos, match.end()))
            pos = match.end()
            look = pos
            while look < size and text[look].isspace():
                look += 1
            spelling = _unit_at(text, look) if look < size else None
            if spelling is not None:
                tokens.append(_Token("unit", spelling, look, look + len(spelling)))
                pos = look + len(spelling)
            continue
        if ch == "_" or ("a" <= ch <= "z") or ("A" <= ch <= "Z"):
            match = _IDENT_RE.match(text, pos)
            word = match.group()
            tokens.append(_Token("kw" if word in KEYWORDS else "name", word, pos, match.end()))
            pos = match.end()
            continue
        if ch in "(),":
            tokens.append(_Token(ch, ch, pos, pos + 1))
            pos += 1
            continue
        two = text[pos:pos + 2]
        if two == "**":
            raise _error("'**' is not supported: there is no power operator", pos,
                         "multiply (x * x) or use sqrt(x)")
        if two == "//":
            raise _error("'//' is not supported", pos, "use / for division")
        if two in ("&&", "||"):
            raise _error(f"'{two}' is not allowed", pos, "use and" if two == "&&" else "use or")
        operator = next((op for op in _OPERATORS if text.startswith(op, pos)), None)
        if operator is not None:
            tokens.append(_Token("op", operator, pos, pos + len(operator)))
            pos += len(operator)
            continue
        if ch in _BAD_CHARACTERS:
            message, hint = _BAD_CHARACTERS[ch]
            raise _error(message, pos, hint)
        raise _error(f"unexpected character {_show_char(ch)}", pos,
                     "conditions use feature names, numbers with units, comparisons, + - * /, "
                     "and / or / not, parentheses and abs, min, max, missing, sqrt")
    tokens.append(_Token("end", "", size, size))
    return tokens


# --------------------------------------------------------------------------- parser


def _describe(tok: _Token) -> str:
    return "the end of the condition" if tok.kind == "end" else f"'{tok.text}'"


def _unknown_unit_hint(word: str) -> str:
    close = difflib.get_close_matches(word, units.known_units(), n=2)
    shown = ", ".join(u for u in _SHOWN_UNITS if u in units.known_units())
    start = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
    return (f"{start}accepted units include {shown}; if '{word}' is a feature name, "
            f"put an operator before it")


class _Parser:
    def __init__(self, text: str) -> None:
        self.text = text
        self.tokens = _tokenize(text)
        self.pos = 0
        self.nesting = 0

    # helpers
    def peek(self, ahead: int = 0) -> _Token:
        return self.tokens[min(self.pos + ahead, len(self.tokens) - 1)]

    def advance(self) -> _Token:
        tok = self.tokens[self.pos]
        if tok.kind != "end":
            self.pos += 1
        return tok

    def at(self, kind: str, text: str | None = None) -> bool:
        tok = self.peek()
        return tok.kind == kind and (text is None or tok.text == text)

    def enter(self, tok: _Token) -> None:
        self.nesting += 1
        if self.nesting > MAX_NESTING:
            raise _error(f"the condition is nested more than {MAX_NESTING} levels deep", tok.start,
                         "simplify it or split it into several rules")

    def leave(self) -> None:
        self.nesting -= 1

    # grammar
    def parse(self) -> Node:
        if self.at("end"):
            raise _error("the condition is empty", 0, "write e.g. wind_mean_ms > 4 m/s")
        node = self.parse_or()
        tok = self.peek()
        if tok.kind != "end":
            raise self.unexpected(tok, "after a complete condition")
        return node

    def unexpected(self, tok: _Token, where: str = "") -> ConditionError:
        if tok.kind == "name":
            self.check_name(tok)  # 'is', 'in', 'if', 'None' ... get their own message
        if tok.kind == ")":
            return _error("unmatched ')'", tok.start, "remove it or add the '(' it closes")
        if tok.kind in ("num", "name", "unit", "("):
            hint = "join the parts with an operator such as and, or, <, +"
            if tok.kind == "name" and tok.text in units.known_units():
                hint = f"a unit follows its number directly, e.g. 8 {tok.text}"
            return _error(f"expected an operator before {_describe(tok)}", tok.start, hint)
        return _error(f"unexpected {_describe(tok)} {where}".strip(), tok.start)

    def parse_or(self) -> Node:
        items = [self.parse_and()]
        while self.at("kw", "or"):
            self.advance()
            items.append(self.parse_and())
        if len(items) == 1:
            return items[0]
        return Logical(start=items[0].start, end=items[-1].end, op="or", operands=tuple(items))

    def parse_and(self) -> Node:
        items = [self.parse_not()]
        while self.at("kw", "and"):
            self.advance()
            items.append(self.parse_not())
        if len(items) == 1:
            return items[0]
        return Logical(start=items[0].start, end=items[-1].end, op="and", operands=tuple(items))

    def parse_not(self) -> Node:
        if self.at("kw", "not"):
            tok = self.advance()
            self.enter(tok)
            operand = self.parse_not()
            self.leave()
            return Unary(start=tok.start, end=operand.end, op="not", operand=operand)
        return self.parse_compare()

    def parse_compare(self) -> Node:
        first = self.parse_sum()
        operands, ops, op_starts = [first], [], []
        while self.peek().kind == "op" and self.peek().text in COMPARISONS:
            tok = self.advance()
            ops.append(tok.text)
            op_starts.append(tok.start)
            operands.append(self.parse_sum())
        if not ops:
            return first
        return Compare(start=first.start, end=operands[-1].end, ops=tuple(ops),
                       operands=tuple(operands), op_starts=tuple(op_starts))

    def parse_sum(self) -> Node:
        node = self.parse_product()
        while self.peek().kind == "op" and self.peek().text in ("+", "-"):
            tok = self.advance()
            right = self.parse_product()
            node = Binary(start=node.start, end=right.end, op=tok.text, left=node, right=right,
                          op_start=tok.start)
        return node

    def parse_product(self) -> Node:
        node = self.parse_unary()
        while self.peek().kind == "op" and self.peek().text in ("*", "/"):
            tok = self.advance()
            right = self.parse_unary()
            node = Binary(start=node.start, end=right.end, op=tok.text, left=node, right=right,
                          op_start=tok.start)
        return node

    def parse_unary(self) -> Node:
        tok = self.peek()
        if tok.kind == "op" and tok.text == "-":
            self.advance()
            if self.at("num"):  # "-6 degF" is the literal minus six degrees Fahrenheit
                number = self.parse_number()
                return replace(number, start=tok.start, value=-number.value)
            self.enter(tok)
            operand = self.parse_unary()
            self.leave()
            return Unary(start=tok.start, end=operand.end, op="-", operand=operand)
        if tok.kind == "op" and tok.text == "+":
            raise _error("unary '+' is not supported", tok.start, "remove the '+'")
        return self.parse_primary()

    def parse_number(self) -> Number:
        tok = self.advance()
        value = float(tok.text)
        if not math.isfinite(value):
            raise _error(f"the number {tok.text[:20]} is too large", tok.start, "write a finite number")
        unit, end = None, tok.end
        if self.at("unit"):
            unit_tok = self.advance()
            unit, end = unit_tok.text, unit_tok.end
        nxt = self.peek()
        if nxt.kind == "name":
            if unit is None:
                raise _error(f"unknown unit '{nxt.text}' after {tok.text}", nxt.start,
                             _unknown_unit_hint(nxt.text))
            raise _error(f"expected an operator before '{nxt.text}'", nxt.start,
                         "write one unit directly after its number, e.g. 8 kn")
        return Number(start=tok.start, end=end, value=value, unit=unit)

    def parse_primary(self) -> Node:
        tok = self.peek()
        if tok.kind == "num":
            return self.parse_number()
        if tok.kind == "kw" and tok.text in ("true", "false"):
            self.advance()
            return Bool(start=tok.start, end=tok.end, value=tok.text == "true")
        if tok.kind == "name":
            self.advance()
            self.check_name(tok)
            if self.at("("):
                return self.parse_call(tok)
            return Name(start=tok.start, end=tok.end, name=tok.text)
        if tok.kind == "(":
            self.advance()
            self.enter(tok)
            node = self.parse_or()
            self.leave()
            close = self.peek()
            if close.kind != ")":
                if close.kind == "end":
                    raise _error("missing ')'", tok.start, "close the parenthesis opened here")
                raise _error(f"expected ')' or an operator before {_describe(close)}", close.start)
            self.advance()
            # the parentheses belong to the node's text (for messages and explanations)
            return replace(node, start=tok.start, end=close.end)
        if tok.kind == "end":
            raise _error("the condition ends too early", tok.start,
                         "expected a number, a feature name, a function or '('")
        if tok.kind == "kw" and tok.text == "not":
            raise _error("'not' cannot stand here", tok.start, "put it in parentheses: (not x)")
        if tok.kind == "kw":
            raise _error(f"'{tok.text}' needs a condition on its left", tok.start)
        if tok.kind == "unit":  # only after a number, so unreachable in practice
            raise _error(f"unexpected '{tok.text}'", tok.start)
        raise _error(f"expected a number, a feature name or '(' but found {_describe(tok)}", tok.start)

    def check_name(self, tok: _Token) -> None:
        word = tok.text
        if word in ("True", "False"):
            raise _error(f"'{word}' is not a value here", tok.start, f"write {word.lower()} in lower case")
        if word == "None":
            raise _error("'None' is not a value here", tok.start, "test for absent data with missing(x)")
        if word in _RESERVED:
            hints = {"is": "use == or !=", "in": "there are no lists; compare with each value and join with or",
                     "if": "a rule's condition is already an 'if'; write just the condition"}
            raise _error(f"'{word}' is not part of the condition language", tok.start,
                         hints.get(word, "conditions combine feature names, numbers with units, "
                                         "comparisons, and / or / not and abs, min, max, missing, sqrt"))
        if word.startswith("__"):
            raise _error(f"'{word}' is not a valid name", tok.start, "feature names do not start with '__'")
        if not _NAME_RE.match(word):
            raise _error(f"'{word}' is not a valid name: feature names are lower case", tok.start,
                         f"did you mean '{word.lower()}'?")

    def parse_call(self, name_tok: _Token) -> Call:
        func = name_tok.text
        if func not in FUNCTIONS:
            close = difflib.get_close_matches(func, list(FUNCTIONS), n=1)
            known = ", ".join(sorted(FUNCTIONS))
            raise _error(f"unknown function '{func}'", name_tok.start,
                         (f"did you mean '{close[0]}'? " if close else "") + f"the functions are {known}")
        open_tok = self.advance()
        self.enter(open_tok)
        args: list[Node] = []
        if not self.at(")"):
            while True:
                args.append(self.parse_or())
                if self.at(","):
                    self.advance()
                    continue
                break
        close = self.peek()
        if close.kind != ")":
            if close.kind == "end":
                raise _error("missing ')'", open_tok.start, f"close the parenthesis of {func}(")
            raise _error(f"expected ',' or ')' in {func}(...) but found {_describe(close)}", close.start)
        self.advance()
        self.leave()
        fewest, most = FUNCTIONS[func]
        if len(args) < fewest or (most is not None and len(args) > most):
            wanted = (f"exactly {fewest} argument" + ("s" if fewest > 1 else "")) if fewest == most \
                else f"at least {fewest} arguments"
            raise _error(f"{func}() takes {wanted}, got {len(args)}", name_tok.start)
        return Call(start=name_tok.start, end=close.end, func=func, args=tuple(args))


def _as_text(text: Any) -> str:
    if not isinstance(text, str):
        raise ConditionError(f"a condition must be text, got {type(text).__name__} {text!r:.40}",
                             column=1, hint="quote it in the YAML file")
    if len(text) > MAX_LENGTH:
        raise ConditionError(f"the condition is {len(text)} characters long, more than {MAX_LENGTH}",
                             column=MAX_LENGTH + 1, hint="split it into several rules")
    return text


def parse(text: str) -> Node:
    """Parse ``text`` into a syntax tree (syntax only: names and units are not checked).

    Raises
    ------
    ConditionError
        For any text that is not a condition or expression of the language.
    """
    text = _as_text(text)
    try:
        tree = _Parser(text).parse()
    except RecursionError:  # pragma: no cover - the nesting limit prevents it
        raise ConditionError("the condition is nested too deeply", column=1,
                             hint="simplify it or split it into several rules") from None
    if _depth(tree) > MAX_DEPTH:
        raise ConditionError(f"the condition has more than {MAX_DEPTH} levels of operations", column=1,
                             hint="simplify it or split it into several rules")
    return tree


# --------------------------------------------------------------------------- type and unit checker


@dataclass(frozen=True)
class _Typed:
    node: Node
    kind: str                 # "flag" | "number"
    unit: str | None = None   # canonical unit name; None for a bare number; _UNKNOWN
    literal: bool = False     # a Number written with a unit (its value may still be converted)


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
        return _error(message, start, hint)

    def example(self, t: _Typed) -> str:
        text = self.q(t.node)
        if isinstance(t.node, (Binary, Logical, Compare)) and not text.startswith("("):
            text = f"({text})"
        unit = "" if t.unit in (None, _UNKNOWN, "1") else f" {t.unit}"
        return f"{text} > 4{unit}"

    def need_flag(self, t: _Typed) -> None:
        if t.kind != "flag":
            raise self.err(f"'{self.q(t.node)}' is a number, not a flag", t.node,
                           f"compare it, e.g. {self.example(t)}")

    def need_number(self, t: _Typed, what: str) -> None:
        if t.kind != "number":
            raise self.err(f"'{self.q(t.node)}' is a flag (true/false), not a number", t.node,
                           f"{what} needs numbers; combine flags with and / or / not")

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
            raise self.err(f"'{self.q(t.node)}' is a flag (true/false), not a number", t.node,
                           f"write not {self.q(t.node)} to negate a flag")
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
                    raise self.err(f"'{self.q(flag.node)}' is a flag (true/false) and cannot be compared "
                                   f"with the number '{self.q(num.node)}'", flag.node,
                                   f"use the flag itself ({self.q(flag.node)}), its negation, "
                                   f"or compare it with true / false")
                if op not in ("==", "!="):
                    raise self.err(f"flags can only be compared with == or !=, not {op}", op_start,
                                   "use the flag itself, not, or == true / == false")
                left, right = a.node, b.node
            else:
                left, right, _ = self.unify(a, b)
            pairs.append(Compare(start=a.node.start, end=b.node.end, ops=(op,), operands=(left, right),
                                 op_starts=(op_start,)))
        if len(pairs) == 1:
            return _Typed(replace(pairs[0], start=node.start, end=node.end), "flag")
        return _Typed(Logical(start=node.start, end=node.end, op="and", operands=tuple(pairs)), "flag")

    def check_call(self, node: Call) -> _Typed:
        typed = [self.check(a) for a in node.args]
        func = node.func
        if func == "missing":
            (t,) = typed
            if t.kind == "flag" and not isinstance(t.node, Name):
                raise self.err("missing() takes a number or a feature name", t.node,
                               "write e.g. missing(fog) or missing(visibility_m)")
            return _Typed(replace(node, args=(t.node,)), "flag")
        for t in typed:
            self.need_number(t, f"{func}()")
        if func == "abs":
            return _Typed(replace(node, args=(typed[0].node,)), "number", typed[0].unit)
        if func == "sqrt":
            unit = typed[0].unit if typed[0].unit in (None, "1") else _UNKNOWN
            return _Typed(replace(node, args=(typed[0].node,)), "number", unit)
        # min / max: bring every argument into the unit of the first measured one
        ref = next((t for t in typed if t.unit is not None and not t.literal), None) \
            or next((t for t in typed if t.unit is not None), typed[0])
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
        if t.unit == unit:
            return t.node
        if isinstance(t.node, Number):
            return replace(t.node, value=float(units.convert(t.node.value, t.unit, unit)), unit=unit)
        return Convert(start=t.node.start, end=t.node.end, operand=t.node, from_unit=t.unit, to_unit=unit)

    def mismatch(self, a: _Typed, b: _Typed) -> ConditionError:
        """The error for two quantities of different dimensions (``a`` preferably the literal)."""
        if b.literal and not a.literal:
            a, b = b, a
        what = f"'{self.q(a.node)}' is {_dimension_words(a.unit)}"
        if b.literal:
            hint = "write both values in units of the same kind"
            return self.err(f"{what} but '{self.q(b.node)}' is {_dimension_words(b.unit)}", a.node, hint)
        if a.literal:
            hint = ("write a plain number" if units.dimension(b.unit) == "dimensionless"
                    else f"write the value in {b.unit} or another unit of the same kind")
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
                raise self.err(f"cannot convert '{self.q(lit.node)}': the unit of '{self.q(other.node)}' "
                               f"is not known", lit.node,
                               f"write a plain number in the unit of '{self.q(other.node)}'")
            return a.node, b.node, _UNKNOWN
        if ua == ub:
            return a.node, b.node, ua
        try:
            if b.literal:   # a feature (or a first literal) sets the unit
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
            if b.literal:                        # air_temp_c - 2 degF: the literal is a difference
                return self.to_unit(a, "degC"), self.to_unit(b, "delta_degC"), "degC"
            if a.literal and node.op == "+":     # 2 degF + air_temp_c
                return self.to_unit(a, "delta_degC"), self.to_unit(b, "degC"), "degC"
            if node.op == "-":                   # air_temp_c - dew_point_c: a difference
                return self.to_unit(a, "degC"), self.to_unit(b, "degC"), "delta_degC"
            raise self.err("adding two temperatures has no meaning", node.op_start,
                           "subtract them for a difference, e.g. air_temp_c - dew_point_c")
        if {da, db} == {_T, _D}:
            absolute = a if da == _T else b
            if absolute.literal:                 # a temperature next to a difference is a difference
                return self.to_unit(a, "delta_degC"), self.to_unit(b, "delta_degC"), "delta_degC"
            if da == _D and node.op == "-":
                raise self.err("subtracting a temperature from a temperature difference has no meaning",
                               node.op_start, "write the temperature first, e.g. air_temp_c - 2 degC")
            left = self.to_unit(a, "degC" if da == _T else "delta_degC")
            right = self.to_unit(b, "degC" if db == _T else "delta_degC")
            return left, right, "degC"
        return self.unify(a, b)

    def unify_product(self, op: str, a: _Typed, b: _Typed) -> tuple[Node, Node, str | None]:
        """Units for ``a * b`` / ``a / b``: a bare or dimensionless factor keeps the other's unit."""
        ua, ub = a.unit, b.unit
        left, right = a.node, b.node
        known = ua not in (None, _UNKNOWN) and ub not in (None, _UNKNOWN)
        if (known and ua != ub and units.dimension(ua) == units.dimension(ub)
                and (a.literal or b.literal or op == "/")):
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


# --------------------------------------------------------------------------- compiler


_ARITHMETIC = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide}
_COMPARE = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal,
            "==": np.equal, "!=": np.not_equal}
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
        ufunc = np.logical_not if node.op == "not" else np.negative
        return _fold(lambda env: ufunc(inner(env)), const)
    if isinstance(node, Binary):
        (left, c1), (right, c2) = _build(node.left, flag_missing), _build(node.right, flag_missing)
        ufunc = _ARITHMETIC[node.op]
        return _fold(lambda env: ufunc(left(env), right(env)), c1 and c2)
    if isinstance(node, Logical):
        built = [_build(o, flag_missing) for o in node.operands]
        return _fold(_reduce(np.logical_and if node.op == "and" else np.logical_or, [f for f, _ in built]),
                     all(c for _, c in built))
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
                key = (arg.name, "missing")
                return (lambda env: env[key]), False
            inner, const = _build(arg, flag_missing)
            return _fold(lambda env: np.isnan(inner(env)), const)
        built = [_build(a, flag_missing) for a in node.args]
        fns, const = [f for f, _ in built], all(c for _, c in built)
        if node.func in ("abs", "sqrt"):
            inner = fns[0]
            ufunc = np.abs if node.func == "abs" else np.sqrt
            return _fold(lambda env: ufunc(inner(env)), const)
        reduced = _reduce(np.minimum if node.func == "min" else np.maximum, fns)
        # + 0.0 turns -0.0 into 0.0, so the sign of a zero never depends on argument order
        return _fold(lambda env: np.add(reduced(env), 0.0), const)
    raise TypeError(f"cannot compile {type(node).__name__}")  # pragma: no cover


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
        explicit, chains split into pairs.  :func:`evaluate_row` evaluates it.
    """

    __slots__ = ("source", "names", "kind", "unit", "ast", "_fn", "_kinds", "_flag_missing")

    def __init__(self, source: str, ast: Node, kind: str, unit: str | None,
                 kinds: dict[str, str]) -> None:
        self.source = source
        self.ast = ast
        self.kind = kind
        self.unit = unit
        self.names = frozenset(kinds)
        self._kinds = kinds
        self._flag_missing: set[str] = set()
        self._fn, _ = _build(ast, self._flag_missing)

    def __repr__(self) -> str:
        return f"Compiled({self.source!r}, kind={self.kind!r}, unit={self.unit!r})"

    def _prepare(self, columns: Any, length: int | None) -> tuple[dict, int]:
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
            if values.ndim != 1:
                raise ValueError(f"column '{name}' must be one-dimensional, got shape {values.shape}")
            if n is None:
                n = len(values)
            elif len(values) != n:
                raise ValueError(f"column '{name}' has {len(values)} values, expected {n}")
            env[name] = values
            if name in self._flag_missing:
                env[(name, "missing")] = missing if missing is not None else np.zeros(n, dtype=bool)
        if n is None:
            n = _length_of(columns)
        return env, n

    def values_used(self, columns: Any) -> dict[str, np.ndarray]:
        """The feature columns this reads, as float arrays (flags: bool arrays, NaN read as false).

        The arrays may share memory with ``columns``.
        """
        env, _ = self._prepare(columns, None)
        return {k: v for k, v in env.items() if isinstance(k, str)}

    def evaluate(self, columns: Any = None, *, length: int | None = None) -> np.ndarray:
        """Evaluate over ``columns`` (name → array or Series, all of one length ``n``).

        Returns a bool array (conditions) or float array (expressions) of length ``n``.  A
        constant broadcasts to ``n``, taken from ``length`` or from any column.  Columns are
        read by position (a Series' index is ignored).
        """
        env, n = self._prepare(columns, length)
        dtype = bool if self.kind == "flag" else float
        with np.errstate(all="ignore"):
            out = np.asarray(self._fn(env), dtype=dtype)
        if out.ndim == 0:
            return np.full(n, out.item(), dtype=dtype)
        if any(out is v for v in env.values()):
            out = out.copy()
        return out


def _length_of(columns: Any) -> int:
    if isinstance(columns, pd.DataFrame):
        return len(columns.index)
    if columns is not None:
        try:
            first = next(iter(columns.values()))
            return len(first)
        except (StopIteration, AttributeError, TypeError):
            pass
    raise ValueError("a constant condition needs the number of rows: pass length=n")


def _compile(text: str, catalogue: Mapping[str, FeatureSpec], want: str) -> Compiled:
    tree = parse(text)
    try:
        typed = _Checker(text, catalogue).check(tree)
    except RecursionError:  # pragma: no cover - the depth limit prevents it
        raise ConditionError("the condition is nested too deeply", column=1,
                             hint="simplify it or split it into several rules") from None
    q = _Checker(text, catalogue).q(typed.node)
    if want == "flag" and typed.kind != "flag":
        raise ConditionError(f"'{q}' is a number, but a condition must be true or false", column=1,
                             hint=f"compare it, e.g. {_Checker(text, catalogue).example(typed)}")
    if want == "number" and typed.kind != "number":
        raise ConditionError(f"'{q}' is a condition (true/false), but a number is needed here", column=1,
                             hint="write a number or an expression, e.g. 15 + 0.5 * reference_age_h")
    kinds: dict[str, str] = {}
    stack = [typed.node]
    while stack:
        node = stack.pop()
        if isinstance(node, Name):
            kinds[node.name] = node.kind or "number"
        stack.extend(_children(node))
    unit = typed.unit if typed.kind == "number" and typed.unit != _UNKNOWN else None
    return Compiled(text, typed.node, typed.kind, unit, kinds)


def compile_condition(text: str, catalogue: Mapping[str, FeatureSpec]) -> Compiled:
    """Parse, check and compile a condition (its result must be a flag).

    Raises
    ------
    ConditionError
        For bad syntax, unknown names or units, type or unit mismatches, or a number result.
    """
    return _compile(text, catalogue, "flag")


def compile_expression(text: str, catalogue: Mapping[str, FeatureSpec]) -> Compiled:
    """Parse, check and compile a numeric expression such as ``15 + 0.5 * reference_age_h``.

    Raises
    ------
    ConditionError
        As :func:`compile_condition`, or if the result is a flag.
    """
    return _compile(text, catalogue, "number")


# --------------------------------------------------------------------------- reference interpreter


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
