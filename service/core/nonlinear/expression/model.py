"""The compiled model: :func:`compile_model` and :class:`ExpressionModel`."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from service.core.nonlinear.expression.errors import ExpressionError
from service.core.nonlinear.expression.layout import lay_out
from service.core.nonlinear.expression.names import check_parameter_names
from service.core.nonlinear.expression.nodes import Node
from service.core.nonlinear.expression.parser import parse_expression
from service.core.nonlinear.expression.printer import canonical_text
from service.core.nonlinear.expression.program import Program
from service.core.nonlinear.expression.scan import MAX_LENGTH


@dataclass(frozen=True, slots=True)
class ExpressionModel:
    """A user model ``f(x; theta)`` compiled once, evaluated many times.

    Attributes
    ----------
    text : str
        Canonical text: compiling it again with the same names gives an
        equal model (same tree, same numbers, same text).
    parameter_names : tuple of str
        The parameters, in the caller's order (the order of ``theta`` and of
        the Jacobian's columns).
    tree : Node
        The parsed expression.

    Notes
    -----
    Evaluation is vectorized over x and never raises on overflow or invalid
    operations: it runs under ``np.errstate(all="ignore")`` and NaN/inf
    come out as values. Derivatives are exact (reverse-mode differentiation
    of the tree), not finite differences.
    """

    text: str
    parameter_names: tuple[str, ...]
    tree: Node = field(repr=False)
    _program: Program = field(repr=False, compare=False)

    def values(self, x, theta) -> np.ndarray:
        """Model values.

        Parameters
        ----------
        x : array_like, shape (n,)
            Points.
        theta : array_like, shape (p,)
            Parameter values in :attr:`parameter_names` order.

        Returns
        -------
        numpy.ndarray, shape (n,)
        """
        x, theta = self._inputs(x, theta)
        with np.errstate(all="ignore"):
            return self._program.values(x, theta)

    def jacobian(self, x, theta) -> np.ndarray:
        """``d f(x_i) / d theta_j`` as an (n, p) array (see :meth:`values` for the arguments)."""
        return self.values_and_jacobian(x, theta)[1]

    def values_and_jacobian(self, x, theta) -> tuple[np.ndarray, np.ndarray]:
        """Values (n,) and Jacobian (n, p) from one shared evaluation of the expression."""
        x, theta = self._inputs(x, theta)
        with np.errstate(all="ignore"):
            return self._program.values_and_jacobian(x, theta)

    def derivative_x(self, x, theta) -> np.ndarray:
        """``d f / d x`` at each point, shape (n,) (see :meth:`values` for the arguments)."""
        x, theta = self._inputs(x, theta)
        with np.errstate(all="ignore"):
            return self._program.derivative_x(x, theta)

    def __reduce__(self):  # the compiled steps are closures: pickle as text and names
        return (compile_model, (self.text, self.parameter_names))

    def _inputs(self, x, theta) -> tuple[np.ndarray, np.ndarray]:
        x = np.asarray(x, dtype=np.float64)
        theta = np.asarray(theta, dtype=np.float64)
        if x.ndim != 1:
            raise ValueError(f"x must be 1-D, got shape {x.shape}")
        if theta.shape != (len(self.parameter_names),):
            raise ValueError(f"theta must have shape ({len(self.parameter_names)},), "
                             f"got {theta.shape}")
        return x, theta


def compile_model(text: str, parameters: Sequence[str]) -> ExpressionModel:
    """Parse, check and compile a model equation in ``x`` and the named parameters.

    Parameters
    ----------
    text : str
        The equation, e.g. ``"d + (a - d)/(1 + (x/c)^b)"``. Grammar: numbers,
        ``x``, ``pi``, the declared parameters, unary ``+``/``-``, ``+ - * /``,
        powers as ``^`` or ``**`` (right-associative, binding tighter than
        unary minus: ``-x^2`` is ``-(x^2)``, ``x^-1`` is ``x^(-1)``),
        parentheses and the one-argument functions exp, log (natural),
        log10, sqrt, sin, cos, tan, arctan and abs.
    parameters : sequence of str
        Names of the parameters to fit; each must occur in ``text``.

    Returns
    -------
    ExpressionModel

    Raises
    ------
    ExpressionError
        Whatever is wrong, with its column and a fix; never anything else.
    """
    names = check_parameter_names(parameters)
    tree = parse_expression(text, names)
    canonical = canonical_text(tree)
    if len(canonical) > MAX_LENGTH:
        raise ExpressionError(
            f"Written canonically the expression (columns 1-{len(text)}) needs "
            f"{len(canonical)} characters, more than the {MAX_LENGTH} allowed.",
            fix="Shorten the expression (fewer digits or parentheses).", column=1)
    return ExpressionModel(canonical, names, tree, Program(lay_out(tree, len(names))))
