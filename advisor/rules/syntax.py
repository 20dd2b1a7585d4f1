"""The parser of the condition language: tokens → syntax tree, with limits on size and depth.

Grammar, lowest precedence first (the full language is described in
:mod:`advisor.rules.condition`)::

    condition  := and_part ("or" and_part)*
    and_part   := not_part ("and" not_part)*
    not_part   := "not" not_part | comparison
    comparison := sum (("<" | "<=" | ">" | ">=" | "==" | "!=") sum)*
    sum        := product (("+" | "-") product)*
    product    := unary (("*" | "/") unary)*
    unary      := "-" unary | primary
    primary    := NUMBER [UNIT] | "true" | "false" | NAME
                | FUNCTION "(" condition ("," condition)* ")" | "(" condition ")"

Names and units are not checked here (that is :mod:`advisor.rules.typecheck`); the tree keeps
literals as written.
"""

from __future__ import annotations

import difflib
import keyword
import math
import re
from dataclasses import replace
from typing import Any

from advisor import units
from advisor.errors import ConditionError
from advisor.rules.nodes import Binary, Bool, Call, Compare, Logical, Name, Node, Number, Unary, depth, error_at
from advisor.rules.tokens import COMPARISONS, Token, tokenize

__all__ = ["parse", "FUNCTIONS", "MAX_LENGTH", "MAX_NESTING", "MAX_DEPTH"]

#: Longest condition accepted [characters].
MAX_LENGTH = 2000
#: Deepest nesting of parentheses, calls, ``not`` and unary minus accepted.
MAX_NESTING = 50
#: Deepest syntax tree accepted (bounds every recursive walk).
MAX_DEPTH = 100
#: The functions a condition may call: name → (fewest, most) arguments (None: no limit).
FUNCTIONS: dict[str, tuple[int, int | None]] = {
    "abs": (1, 1),
    "max": (2, None),
    "min": (2, None),
    "missing": (1, 1),
    "sqrt": (1, 1),
}

_NAME_RE = re.compile(r"[a-z_][a-z0-9_]*\Z")
_RESERVED = frozenset(keyword.kwlist) - {"and", "or", "not"}
_SHOWN_UNITS = ("m/s", "kn", "km/h", "degC", "degF", "degC/h", "h", "min", "km", "deg", "%", "W/m2")


def _describe(tok: Token) -> str:
    return "the end of the condition" if tok.kind == "end" else f"'{tok.text}'"


def _unknown_unit_hint(word: str) -> str:
    close = difflib.get_close_matches(word, units.known_units(), n=2)
    shown = ", ".join(u for u in _SHOWN_UNITS if u in units.known_units())
    start = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
    return f"{start}accepted units include {shown}; if '{word}' is a feature name, put an operator before it"


class _Parser:
    def __init__(self, text: str) -> None:
        self.text = text
        self.tokens = tokenize(text)
        self.pos = 0
        self.nesting = 0

    # helpers
    def peek(self, ahead: int = 0) -> Token:
        return self.tokens[min(self.pos + ahead, len(self.tokens) - 1)]

    def advance(self) -> Token:
        tok = self.tokens[self.pos]
        if tok.kind != "end":
            self.pos += 1
        return tok

    def at(self, kind: str, text: str | None = None) -> bool:
        tok = self.peek()
        return tok.kind == kind and (text is None or tok.text == text)

    def enter(self, tok: Token) -> None:
        self.nesting += 1
        if self.nesting > MAX_NESTING:
            raise error_at(
                f"the condition is nested more than {MAX_NESTING} levels deep",
                tok.start,
                "simplify it or split it into several rules",
            )

    def leave(self) -> None:
        self.nesting -= 1

    # grammar
    def parse(self) -> Node:
        if self.at("end"):
            raise error_at("the condition is empty", 0, "write e.g. wind_mean_ms > 4 m/s")
        node = self.parse_or()
        tok = self.peek()
        if tok.kind != "end":
            raise self.unexpected(tok, "after a complete condition")
        return node

    def unexpected(self, tok: Token, where: str = "") -> ConditionError:
        if tok.kind == "name":
            self.check_name(tok)  # 'is', 'in', 'if', 'None' ... get their own message
        if tok.kind == ")":
            return error_at("unmatched ')'", tok.start, "remove it or add the '(' it closes")
        if tok.kind in ("num", "name", "unit", "("):
            hint = "join the parts with an operator such as and, or, <, +"
            if tok.kind == "name" and tok.text in units.known_units():
                hint = f"a unit follows its number directly, e.g. 8 {tok.text}"
            return error_at(f"expected an operator before {_describe(tok)}", tok.start, hint)
        return error_at(f"unexpected {_describe(tok)} {where}".strip(), tok.start)

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
        return Compare(
            start=first.start,
            end=operands[-1].end,
            ops=tuple(ops),
            operands=tuple(operands),
            op_starts=tuple(op_starts),
        )

    def parse_sum(self) -> Node:
        node = self.parse_product()
        while self.peek().kind == "op" and self.peek().text in ("+", "-"):
            tok = self.advance()
            right = self.parse_product()
            node = Binary(start=node.start, end=right.end, op=tok.text, left=node, right=right, op_start=tok.start)
        return node

    def parse_product(self) -> Node:
        node = self.parse_unary()
        while self.peek().kind == "op" and self.peek().text in ("*", "/"):
            tok = self.advance()
            right = self.parse_unary()
            node = Binary(start=node.start, end=right.end, op=tok.text, left=node, right=right, op_start=tok.start)
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
            raise error_at("unary '+' is not supported", tok.start, "remove the '+'")
        return self.parse_primary()

    def parse_number(self) -> Number:
        tok = self.advance()
        value = float(tok.text)
        if not math.isfinite(value):
            raise error_at(f"the number {tok.text[:20]} is too large", tok.start, "write a finite number")
        unit, end = None, tok.end
        if self.at("unit"):
            unit_tok = self.advance()
            unit, end = unit_tok.text, unit_tok.end
        nxt = self.peek()
        if nxt.kind == "name":
            if unit is None:
                raise error_at(f"unknown unit '{nxt.text}' after {tok.text}", nxt.start, _unknown_unit_hint(nxt.text))
            raise error_at(
                f"expected an operator before '{nxt.text}'",
                nxt.start,
                "write one unit directly after its number, e.g. 8 kn",
            )
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
                    raise error_at("missing ')'", tok.start, "close the parenthesis opened here")
                raise error_at(f"expected ')' or an operator before {_describe(close)}", close.start)
            self.advance()
            # the parentheses belong to the node's text (for messages and explanations)
            return replace(node, start=tok.start, end=close.end)
        if tok.kind == "end":
            raise error_at(
                "the condition ends too early", tok.start, "expected a number, a feature name, a function or '('"
            )
        if tok.kind == "kw" and tok.text == "not":
            raise error_at("'not' cannot stand here", tok.start, "put it in parentheses: (not x)")
        if tok.kind == "kw":
            raise error_at(f"'{tok.text}' needs a condition on its left", tok.start)
        if tok.kind == "unit":  # only after a number, so unreachable in practice
            raise error_at(f"unexpected '{tok.text}'", tok.start)
        raise error_at(f"expected a number, a feature name or '(' but found {_describe(tok)}", tok.start)

    def check_name(self, tok: Token) -> None:
        word = tok.text
        if word in ("True", "False"):
            raise error_at(f"'{word}' is not a value here", tok.start, f"write {word.lower()} in lower case")
        if word == "None":
            raise error_at("'None' is not a value here", tok.start, "test for absent data with missing(x)")
        if word in _RESERVED:
            hints = {
                "is": "use == or !=",
                "in": "there are no lists; compare with each value and join with or",
                "if": "a rule's condition is already an 'if'; write just the condition",
            }
            raise error_at(
                f"'{word}' is not part of the condition language",
                tok.start,
                hints.get(
                    word,
                    "conditions combine feature names, numbers with units, "
                    "comparisons, and / or / not and abs, min, max, missing, sqrt",
                ),
            )
        if word.startswith("__"):
            raise error_at(f"'{word}' is not a valid name", tok.start, "feature names do not start with '__'")
        if not _NAME_RE.match(word):
            raise error_at(
                f"'{word}' is not a valid name: feature names are lower case",
                tok.start,
                f"did you mean '{word.lower()}'?",
            )

    def parse_call(self, name_tok: Token) -> Call:
        func = name_tok.text
        if func not in FUNCTIONS:
            similar = difflib.get_close_matches(func, list(FUNCTIONS), n=1)
            known = ", ".join(sorted(FUNCTIONS))
            raise error_at(
                f"unknown function '{func}'",
                name_tok.start,
                (f"did you mean '{similar[0]}'? " if similar else "") + f"the functions are {known}",
            )
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
                raise error_at("missing ')'", open_tok.start, f"close the parenthesis of {func}(")
            raise error_at(f"expected ',' or ')' in {func}(...) but found {_describe(close)}", close.start)
        self.advance()
        self.leave()
        fewest, most = FUNCTIONS[func]
        if len(args) < fewest or (most is not None and len(args) > most):
            wanted = (
                (f"exactly {fewest} argument" + ("s" if fewest > 1 else ""))
                if fewest == most
                else f"at least {fewest} arguments"
            )
            raise error_at(f"{func}() takes {wanted}, got {len(args)}", name_tok.start)
        return Call(start=name_tok.start, end=close.end, func=func, args=tuple(args))


def _as_text(text: Any) -> str:
    if not isinstance(text, str):
        raise ConditionError(
            f"a condition must be text, got {type(text).__name__} {text!r:.40}",
            column=1,
            hint="quote it in the YAML file",
        )
    if len(text) > MAX_LENGTH:
        raise ConditionError(
            f"the condition is {len(text)} characters long, more than {MAX_LENGTH}",
            column=MAX_LENGTH + 1,
            hint="split it into several rules",
        )
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
        raise ConditionError(
            "the condition is nested too deeply", column=1, hint="simplify it or split it into several rules"
        ) from None
    if depth(tree) > MAX_DEPTH:
        raise ConditionError(
            f"the condition has more than {MAX_DEPTH} levels of operations",
            column=1,
            hint="simplify it or split it into several rules",
        )
    return tree
