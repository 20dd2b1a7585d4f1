"""The tokenizer of the condition language: text → numbers, units, names, keywords, operators.

A number may be followed by a unit (``8 kn``, ``30 min``, ``95 %``); the longest known spelling
wins (``mm/h`` over ``mm``) and a unit made of word characters must end at a word boundary.  A
character the language does not have is refused here with a message saying what to write
instead (``'='`` → "use =="; ``'^'`` → "multiply or use sqrt").
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from advisor import units
from advisor.rules.nodes import error_at

__all__ = ["Token", "tokenize", "KEYWORDS", "COMPARISONS", "OPERATORS"]

KEYWORDS = ("and", "or", "not", "true", "false")
COMPARISONS = ("<", "<=", ">", ">=", "==", "!=")
#: Operators, longest first (so "<=" wins over "<").
OPERATORS = ("<=", ">=", "==", "!=", "<", ">", "+", "-", "*", "/")

_NUMBER_RE = re.compile(r"[0-9]+(?:\.[0-9]+)?(?:[eE][+-]?[0-9]+)?")
_IDENT_RE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
#: Unit spellings that may follow a number, longest first (so "mm/h" wins over "mm").
_UNIT_SPELLINGS = tuple(sorted((u for u in units.known_units() if u and not u[0].isdigit()), key=len, reverse=True))
_WORD_CHARS = frozenset("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789_°µ")
_BAD_CHARACTERS = {
    ".": (
        "'.' is not allowed here",
        "write decimals with digits on both sides (0.5, 5.0); there are no attributes or methods",
    ),
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


@dataclass(frozen=True)
class Token:
    """One token; ``start``/``end`` are 0-based offsets into the text."""

    kind: str  # "num" "unit" "name" "kw" "op" "(" ")" "," "end"
    text: str
    start: int
    end: int


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


def tokenize(text: str) -> list[Token]:
    """The tokens of ``text``, ending with an ``end`` token; ConditionError for a character not in the language."""
    tokens: list[Token] = []
    pos, size = 0, len(text)
    while pos < size:
        ch = text[pos]
        if ch.isspace():
            pos += 1
            continue
        if "0" <= ch <= "9":
            match = _NUMBER_RE.match(text, pos)
            assert match is not None  # the character at pos is a digit
            tokens.append(Token("num", match.group(), pos, match.end()))
            pos = match.end()
            look = pos
            while look < size and text[look].isspace():
                look += 1
            spelling = _unit_at(text, look) if look < size else None
            if spelling is not None:
                tokens.append(Token("unit", spelling, look, look + len(spelling)))
                pos = look + len(spelling)
            continue
        if ch == "_" or ("a" <= ch <= "z") or ("A" <= ch <= "Z"):
            match = _IDENT_RE.match(text, pos)
            assert match is not None  # the character at pos is a letter or '_'
            word = match.group()
            tokens.append(Token("kw" if word in KEYWORDS else "name", word, pos, match.end()))
            pos = match.end()
            continue
        if ch in "(),":
            tokens.append(Token(ch, ch, pos, pos + 1))
            pos += 1
            continue
        two = text[pos : pos + 2]
        if two == "**":
            raise error_at("'**' is not supported: there is no power operator", pos, "multiply (x * x) or use sqrt(x)")
        if two == "//":
            raise error_at("'//' is not supported", pos, "use / for division")
        if two in ("&&", "||"):
            raise error_at(f"'{two}' is not allowed", pos, "use and" if two == "&&" else "use or")
        operator = next((op for op in OPERATORS if text.startswith(op, pos)), None)
        if operator is not None:
            tokens.append(Token("op", operator, pos, pos + len(operator)))
            pos += len(operator)
            continue
        if ch in _BAD_CHARACTERS:
            message, hint = _BAD_CHARACTERS[ch]
            raise error_at(message, pos, hint)
        raise error_at(
            f"unexpected character {_show_char(ch)}",
            pos,
            "conditions use feature names, numbers with units, comparisons, + - * /, "
            "and / or / not, parentheses and abs, min, max, missing, sqrt",
        )
    tokens.append(Token("end", "", size, size))
    return tokens
