"""The syntax tree of the condition language, and walks over it.

Every node remembers where in the text it came from (``start``/``end``, 0-based), so every
message can point at a character.  The parser (:mod:`advisor.rules.syntax`) builds these
nodes; the checker (:mod:`advisor.rules.typecheck`) returns a copy with kinds and units filled
in, literals converted and comparison chains split into pairs.  The walks here use an explicit
stack, never recursion, so a deep tree cannot exhaust Python's stack.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

from advisor.errors import ConditionError

__all__ = [
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
    "children",
    "iter_nodes",
    "names_in",
    "depth",
    "condition_parts",
    "error_at",
]


def error_at(message: str, start: int, hint: str | None = None) -> ConditionError:
    """A :class:`ConditionError` at 0-based offset ``start`` of the text (its column is 1-based)."""
    return ConditionError(message, column=start + 1, hint=hint)


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
        return source[self.start : self.end]


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


def children(node: Node) -> tuple[Node, ...]:
    """The direct sub-nodes of ``node``, in source order."""
    if isinstance(node, (Unary, Convert)):
        return (node.operand,)
    if isinstance(node, Binary):
        return (node.left, node.right)
    if isinstance(node, (Logical, Compare)):
        return node.operands
    if isinstance(node, Call):
        return node.args
    return ()


def iter_nodes(root: Node) -> Iterator[Node]:
    """Every node of a tree, ``root`` first (depth first, no recursion)."""
    stack = [root]
    while stack:
        node = stack.pop()
        yield node
        stack.extend(children(node))


def names_in(root: Node) -> set[str]:
    """The feature names a tree reads."""
    return {n.name for n in iter_nodes(root) if isinstance(n, Name)}


def depth(root: Node) -> int:
    """Depth of the tree, computed without recursion."""
    deepest, stack = 0, [(root, 1)]
    while stack:
        node, level = stack.pop()
        deepest = max(deepest, level)
        stack.extend((child, level + 1) for child in children(node))
    return deepest


def condition_parts(node: Node, keep_not: bool = False) -> list[Node]:
    """The comparisons, flags, constants and missing() tests of a checked tree, in source order.

    With ``keep_not`` a ``not`` directly in front of one of them stays part of it.
    """
    out: list[Node] = []
    stack = [node]
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
