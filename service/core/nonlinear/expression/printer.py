"""Canonical text of a tree: deterministic, minimal but readable, and re-parsable.

Rules: ``+``/``-`` are written with a space either side, ``*``, ``/`` and
``^`` without; powers use ``^``; parentheses appear only where the grammar
needs them, plus around a negated right operand (``x^(-1)``, ``a*(-b)``) and
a negated negation (``-(-a)``) for legibility. Numbers are written exactly:
integral values below 1e16 as integers, everything else with
``float.__repr__`` (shortest text that reads back as the same float).
Parsing the canonical text gives back an equal tree, so printing is a fixed
point.
"""

from __future__ import annotations

from service.core.nonlinear.expression.nodes import (
    Binary,
    Call,
    Negate,
    Node,
    Number,
    Parameter,
    Pi,
    Variable,
)

_ADDITIVE, _MULTIPLICATIVE, _NEGATION, _POWER, _ATOM = 1, 2, 3, 4, 5
_BINARY_LEVEL = {"+": _ADDITIVE, "-": _ADDITIVE, "*": _MULTIPLICATIVE, "/": _MULTIPLICATIVE,
                 "^": _POWER}


def canonical_text(node: Node) -> str:
    """The canonical text of ``node`` (see the module notes for the rules).

    Parameters
    ----------
    node : Node
        A tree from :func:`~.parser.parse_expression` or built by hand.

    Returns
    -------
    str
        Text that parses back to a tree equal to ``node``.
    """
    if isinstance(node, Number):
        return number_text(node.value)
    if isinstance(node, Variable):
        return "x"
    if isinstance(node, Pi):
        return "pi"
    if isinstance(node, Parameter):
        return node.name
    if isinstance(node, Call):
        return f"{node.function}({canonical_text(node.argument)})"
    if isinstance(node, Negate):
        return "-" + _wrapped(node.operand, _level(node.operand) <= _NEGATION)
    level = _BINARY_LEVEL[node.op]
    left_level, right_level = _level(node.left), _level(node.right)
    if level == _POWER:  # right-associative; the base must be an atom
        left = _wrapped(node.left, left_level < _ATOM)
        right = _wrapped(node.right, right_level < _POWER)
        return f"{left}^{right}"
    left = _wrapped(node.left, left_level < level)
    right = _wrapped(node.right, right_level <= level or right_level == _NEGATION)
    separator = f" {node.op} " if level == _ADDITIVE else node.op
    return f"{left}{separator}{right}"


def number_text(value: float) -> str:
    """Exact text of a finite non-negative float (integers below 1e16 without ``.0``)."""
    if value.is_integer() and value < 1e16:
        return str(int(value))
    return float.__repr__(value)


def _level(node: Node) -> int:
    if isinstance(node, Binary):
        return _BINARY_LEVEL[node.op]
    if isinstance(node, Negate):
        return _NEGATION
    return _ATOM


def _wrapped(node: Node, parenthesize: bool) -> str:
    text = canonical_text(node)
    return f"({text})" if parenthesize else text
