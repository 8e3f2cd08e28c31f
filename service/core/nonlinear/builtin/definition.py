"""What a built-in family is: its equation, parameters, linear structure and start heuristics.

Every built-in family is *separable*: for fixed values of its nonlinear
parameters the model is linear in the others,
``f(x; a, b) = sum_j a_j g_j(x; b)``. The equation is written once as text in
the expression grammar (compiled with exact derivatives); :attr:`Builtin.basis`
states the same curve as its conditionally linear columns ``g_j`` for the
variable-projection grid search of :mod:`.starts` (a test holds the two equal).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

LINEAR, LOG = "linear", "log"


class ParameterInfo(NamedTuple):
    """One parameter: its name, its meaning with the unit, and its constraint in words."""

    name: str
    meaning: str
    constraint: str


class Derived(NamedTuple):
    """A quantity computed from one parameter by a monotone function (e.g. ln 2 / k).

    ``value`` and ``slope`` (its derivative) are vectorized numpy callables;
    ``domain`` is the open interval of the parameter where ``value`` is finite
    and monotone (profile limits outside it are reported as unbounded).
    """

    name: str
    meaning: str
    parameter: str
    value: Callable[[np.ndarray], np.ndarray]
    slope: Callable[[np.ndarray], np.ndarray]
    domain: tuple[float, float]


class Series(NamedTuple):
    """A cleaned series as the start heuristics see it.

    ``u`` is the x the curve is sigmoid or exponential in (``log x`` on the log
    scale, ``-inf`` where x is 0; otherwise ``x``); ``sqrt_w`` the square roots
    of the weights (ones without weights).
    """

    x: np.ndarray
    y: np.ndarray
    sqrt_w: np.ndarray
    scale: str
    u: np.ndarray


Basis = Callable[[Series, Mapping[str, np.ndarray]], tuple[np.ndarray, ...]]
"""``basis(series, nonlinear)``: nonlinear values as arrays of shape (G, 1) -> one
(G, n) column per linear parameter, in :attr:`Builtin.linear` order."""

Axes = Callable[[Series], Mapping[str, np.ndarray]]
"""``axes(series)``: the grid values of each nonlinear parameter."""

ShapeStart = Callable[[Series], Mapping[str, float] | None]
"""``shape_start(series)``: nonlinear values read from the data's shape, or None."""

Canonical = Callable[[dict[str, float]], dict[str, float]]
"""``canonical(values)``: the same curve written in the documented convention."""


@dataclass(frozen=True, slots=True)
class Builtin:
    """A built-in nonlinear family.

    Parameters
    ----------
    name, description : str
        Wire name and one sentence for ``GET /v1/families``.
    equations : mapping of str to str
        The equation text in the expression grammar, by x scale (``"linear"``
        only, unless the family offers the log scale too; the first is the default).
    parameters : tuple of ParameterInfo
        Every parameter, in the order of the report.
    linear : tuple of str
        The conditionally linear parameters (the others are nonlinear).
    basis, axes, shape_start, canonical : callable
        See :data:`Basis`, :data:`Axes`, :data:`ShapeStart`, :data:`Canonical`
        (``shape_start`` and ``canonical`` may be None).
    derived : tuple of Derived
        Quantities reported beside the parameters.
    x_domain : str
        ``"any"``, or ``"nonnegative"`` when the equation needs x >= 0.
    """

    name: str
    description: str
    equations: Mapping[str, str]
    parameters: tuple[ParameterInfo, ...]
    linear: tuple[str, ...]
    basis: Basis
    axes: Axes
    shape_start: ShapeStart | None = None
    canonical: Canonical | None = None
    derived: tuple[Derived, ...] = ()
    x_domain: str = "any"

    @property
    def names(self) -> tuple[str, ...]:
        """Parameter names in report order."""
        return tuple(p.name for p in self.parameters)

    @property
    def nonlinear(self) -> tuple[str, ...]:
        """The parameters the grid search ranges over."""
        return tuple(n for n in self.names if n not in self.linear)

    @property
    def scales(self) -> tuple[str, ...]:
        """The x scales the family offers (the first is the default)."""
        return tuple(self.equations)

    def equation_text(self) -> str:
        """The equation(s) as documented: ``y = ...`` (with the scale when there is a choice)."""
        if len(self.equations) == 1:
            return f"y = {next(iter(self.equations.values()))}"
        return "; ".join(f"y = {text} (scale {scale})" for scale, text in self.equations.items())


def series_of(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None, scale: str) -> Series:
    """The :class:`Series` of a cleaned series on ``scale``."""
    sqrt_w = np.ones_like(y) if weights is None else np.sqrt(weights)
    if scale == LOG:
        with np.errstate(divide="ignore"):
            u = np.log(x)
    else:
        u = x
    return Series(x, y, sqrt_w, scale, u)


def finite_u(series: Series) -> np.ndarray:
    """The finite values of ``u`` (log scale: the points with x > 0)."""
    return series.u[np.isfinite(series.u)]


def u_span(series: Series) -> tuple[float, float, float]:
    """Smallest and largest finite ``u`` and their distance (1 when all are equal)."""
    u = finite_u(series)
    lo, hi = float(u.min()), float(u.max())
    return lo, hi, (hi - lo) if hi > lo else 1.0
