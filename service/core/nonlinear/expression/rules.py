"""The arithmetic of each operation: its value, and its adjoint (reverse-mode) rule.

Registers ``v`` hold values: numpy float64 scalars for parts that do not
depend on x, 1-D arrays over the points otherwise (never Python floats, so
that division by zero or overflow gives inf/NaN under ``np.errstate`` instead
of raising). Registers ``g`` hold adjoints: the derivative of the model value
at every point with respect to a register's value.

A backward step reads the adjoint of its output and writes the adjoints of
the inputs that lead to the wanted unknowns (``wanted``); nothing is computed
for an input that does not. Because the expression is a tree, each register
receives its adjoint exactly once.
"""

from __future__ import annotations

import operator
from collections.abc import Callable

import numpy as np

LN10 = np.log(np.float64(10.0))
ONE = np.float64(1.0)
ZERO = np.float64(0.0)

VALUE: dict[str, Callable] = {
    "+": operator.add, "-": operator.sub, "*": operator.mul, "/": operator.truediv,
    "^": operator.pow, "neg": operator.neg,
    "exp": np.exp, "log": np.log, "log10": np.log10, "sqrt": np.sqrt, "sin": np.sin,
    "cos": np.cos, "tan": np.tan, "arctan": np.arctan, "abs": np.abs,
}

# d value / d argument, times the adjoint a, from the argument u and the value y
_CALL_ADJOINT: dict[str, Callable] = {
    "exp": lambda a, u, y: a * y,
    "log": lambda a, u, y: a / u,
    "log10": lambda a, u, y: a / (u * LN10),
    "sqrt": lambda a, u, y: a / (y + y),
    "sin": lambda a, u, y: a * np.cos(u),
    "cos": lambda a, u, y: -a * np.sin(u),
    "tan": lambda a, u, y: a * (y * y + 1.0),
    "arctan": lambda a, u, y: a / (u * u + 1.0),
    "abs": lambda a, u, y: a * np.sign(u),
}

Step = Callable[[list], None]
BackStep = Callable[[list, list], None]


def forward_step(op: str, out: int, inputs: tuple[int, ...]) -> Step:
    """The step ``v[out] = op(v[inputs...])``."""
    function = VALUE[op]
    if len(inputs) == 1:
        (i,) = inputs

        def unary(v):
            v[out] = function(v[i])
        return unary
    i, j = inputs

    def binary(v):
        v[out] = function(v[i], v[j])
    return binary


def backward_step(op: str, out: int, inputs: tuple[int, ...], wanted: tuple[bool, ...],
                  exponent: np.float64 | None) -> BackStep:
    """The adjoint step of ``v[out] = op(v[inputs...])`` for the ``wanted`` inputs.

    ``exponent`` is the power's exponent when it is a constant of the
    expression (then only the base can be wanted).
    """
    if op in _CALL_ADJOINT:
        return _call_step(_CALL_ADJOINT[op], out, inputs[0])
    if op == "neg":
        (i,) = inputs

        def negate(v, g):
            g[i] = -g[out]
        return negate
    i, j = inputs
    left, right = wanted
    if op == "^":
        return _power_step(out, i, j, left, right, exponent)
    if op in ("+", "-"):
        return _additive_step(op == "-", out, i, j, left, right)
    if op == "*":
        return _product_step(out, i, j, left, right)
    return _quotient_step(out, i, j, left, right)


def _call_step(rule: Callable, out: int, i: int) -> BackStep:
    def call(v, g):
        g[i] = rule(g[out], v[i], v[out])
    return call


def _additive_step(subtract: bool, out: int, i: int, j: int, left: bool,
                   right: bool) -> BackStep:
    def both(v, g):
        a = g[out]
        g[i] = a
        g[j] = -a if subtract else a

    def left_only(v, g):
        g[i] = g[out]

    def right_only(v, g):
        g[j] = -g[out] if subtract else g[out]
    return both if left and right else left_only if left else right_only


def _product_step(out: int, i: int, j: int, left: bool, right: bool) -> BackStep:
    def both(v, g):
        a = g[out]
        g[i] = a * v[j]
        g[j] = a * v[i]

    def left_only(v, g):
        g[i] = g[out] * v[j]

    def right_only(v, g):
        g[j] = g[out] * v[i]
    return both if left and right else left_only if left else right_only


def _quotient_step(out: int, i: int, j: int, left: bool, right: bool) -> BackStep:
    # y = u / w: dy/du = 1/w, dy/dw = -y/w
    def both(v, g):
        scaled = g[out] / v[j]
        g[i] = scaled
        g[j] = -scaled * v[out]

    def left_only(v, g):
        g[i] = g[out] / v[j]

    def right_only(v, g):
        g[j] = -(g[out] / v[j]) * v[out]
    return both if left and right else left_only if left else right_only


def _power_step(out: int, i: int, j: int, left: bool, right: bool,
                exponent: np.float64 | None) -> BackStep:
    # y = u^w: dy/du = w u^(w-1) (kept apart from y/u so that u = 0 and u < 0 work),
    # dy/dw = y log u, taken as 0 where y == 0 (u = 0 < w: y is identically 0 there).
    if exponent is not None:
        if exponent == 2.0:
            def square(v, g):
                u = v[i]
                g[i] = g[out] * (u + u)
            return square
        reduced = exponent - ONE

        def constant_power(v, g):
            g[i] = g[out] * (exponent * v[i] ** reduced)
        return constant_power

    def base(v, g):
        w = v[j]
        g[i] = g[out] * (w * v[i] ** (w - ONE))

    def exponent_(v, g):
        g[j] = g[out] * log_factor(v[i], v[out])

    def both(v, g):
        base(v, g)
        exponent_(v, g)
    return both if left and right else base if left else exponent_


def log_factor(u, y):
    """``y * log(u)``, with 0 wherever ``y == 0`` (the exponent's derivative of ``u^w``)."""
    factor = y * np.log(u)
    if isinstance(factor, np.ndarray):
        factor[y == 0.0] = 0.0
        return factor
    return ZERO if y == 0.0 else factor
