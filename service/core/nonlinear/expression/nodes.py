"""The parsed expression: a tree of small frozen nodes.

Trees compare equal when they have the same structure, operators, names and
numbers; the ``column`` each node came from is kept for messages only and
takes no part in comparison. Numbers are never negative: a minus sign is a
:class:`Negate` node, exactly as written.
"""

from __future__ import annotations

from dataclasses import dataclass, field

VARIABLE = "x"
PI = "pi"
FUNCTIONS = ("exp", "log", "log10", "sqrt", "sin", "cos", "tan", "arctan", "abs")
RESERVED_NAMES = frozenset((VARIABLE, PI, *FUNCTIONS))
BINARY_OPERATORS = ("+", "-", "*", "/", "^")


@dataclass(frozen=True, slots=True)
class Number:
    """A finite, non-negative float literal."""

    value: float
    column: int = field(default=0, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Variable:
    """The independent variable ``x``."""

    column: int = field(default=0, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Pi:
    """The constant ``pi``."""

    column: int = field(default=0, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Parameter:
    """A declared parameter; ``index`` is its position in the caller's list."""

    name: str
    index: int
    column: int = field(default=0, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Negate:
    """Unary minus."""

    operand: Node
    column: int = field(default=0, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Binary:
    """``left op right`` with ``op`` one of :data:`BINARY_OPERATORS` (``^`` is power)."""

    op: str
    left: Node
    right: Node
    column: int = field(default=0, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Call:
    """One of :data:`FUNCTIONS` applied to one argument."""

    function: str
    argument: Node
    column: int = field(default=0, compare=False, repr=False)


Node = Number | Variable | Pi | Parameter | Negate | Binary | Call


def children(node: Node) -> tuple[Node, ...]:
    """The direct sub-expressions of ``node`` (left to right)."""
    if isinstance(node, Binary):
        return (node.left, node.right)
    if isinstance(node, Negate):
        return (node.operand,)
    if isinstance(node, Call):
        return (node.argument,)
    return ()
