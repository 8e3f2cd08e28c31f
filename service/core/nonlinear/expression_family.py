"""The ``expression`` family: the caller's own model equation, fitted by nonlinear least squares.

The equation is compiled by :mod:`~service.core.nonlinear.expression` (parsed,
never evaluated; exact derivatives) and analysed from the caller's start values
by :func:`service.core.nonlinear.analysis.analyse`.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from service.core.data.inputs import check_options, clean_data
from service.core.errors import SpecError
from service.core.nonlinear.analysis import analyse
from service.core.nonlinear.expression import compile_model
from service.core.nonlinear.report import NonlinearReport
from service.core.spec import WEIGHTINGS, FitOptions, ModelSpec


def check_spec(model: ModelSpec, options: FitOptions) -> None:
    """Validate an ``expression`` model and the options (``SpecError`` naming the field)."""
    if not isinstance(model.expression, str) or not model.expression.strip():
        raise SpecError("The expression family needs the model equation.",
                        field="model.expression",
                        fix='Send model.expression, e.g. "b1*(1-exp(-b2*x))".')
    if not model.parameters:
        raise SpecError("The expression family needs its parameters with start values.",
                        field="model.parameters",
                        fix='Send model.parameters, e.g. {"b1": 250, "b2": 0.0005}.')
    check_weighting(options)
    compiled(model.expression, tuple(name for name, _ in model.parameters))


def check_weighting(options: FitOptions) -> None:
    """The options every nonlinear family accepts, with the weighting mode."""
    if options.weighting not in WEIGHTINGS:
        raise SpecError(f"Unknown weighting {options.weighting!r}.", field="weighting",
                        fix=f"Use one of {', '.join(WEIGHTINGS)}.")
    check_options(options)


@lru_cache(maxsize=256)
def compiled(expression: str, names: tuple[str, ...]):
    """The compiled equation (cached: a pipeline fits the same equation many times)."""
    return compile_model(expression, names)


def fit_series(x, y, weights=None, *, model: ModelSpec, options: FitOptions) -> NonlinearReport:
    """Fit the caller's equation to one series from its start values, and analyse it.

    Raises
    ------
    DataError, DesignError, SpecError
        Each names the offending field and how to fix it (an equation that is not
        finite at the start values names ``model.parameters``, or ``x[i]``, the
        request's position, when no start value can make it finite there).
    """
    check_spec(model, options)
    names = tuple(name for name, _ in model.parameters)
    equation = compiled(model.expression, names)
    start = [value for _, value in model.parameters]
    try:
        return analyse(equation, names, "expression", equation.text, x, y, weights, start,
                       lower=bounds(model.lower, names, -np.inf, "model.lower"),
                       upper=bounds(model.upper, names, np.inf, "model.upper"),
                       options=options)
    except SpecError as error:
        raise _at_request_position(error, x, y, weights, options) from None


def _at_request_position(error: SpecError, x, y, weights, options: FitOptions) -> SpecError:
    """``error`` naming ``x[i]`` of the cleaned series, renamed to the request's position
    (points dropped by ``missing="drop"`` shift the cleaned positions)."""
    field = error.field or ""
    if not (field.startswith("x[") and field.endswith("]") and field[2:-1].isdigit()):
        return error
    with np.errstate(all="ignore"):
        index = clean_data(x, y, weights, options.missing).index
    i = int(field[2:-1])
    if i >= index.size or int(index[i]) == i:
        return error
    old, new = field, f"x[{int(index[i])}]"
    return SpecError(error.message.replace(old, new), field=new, fix=error.fix,
                     code=error.code, details=error.details)


def bounds(given, names: tuple[str, ...], default: float, field: str) -> np.ndarray:
    """Bounds by parameter name -> one per parameter (``default`` where none is given)."""
    out = np.full(len(names), default)
    for name, value in given or ():
        if name not in names:
            raise SpecError(f"{field} names {name!r}, which is not a parameter.",
                            field=f"{field}.{name}",
                            fix=f"Use parameter names from {', '.join(names)}.")
        out[names.index(name)] = value
    return out
