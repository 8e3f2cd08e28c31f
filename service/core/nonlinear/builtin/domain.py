"""Where a built-in curve is defined in x, and refusing grid or prediction x outside it.

A log-scale dose-response curve (``x^slope``) and the families raising x to a
parameter (``power``, ``weibull``: :attr:`Builtin.x_domain` ``"nonnegative"``)
are defined for x >= 0 only; their fit refuses data x < 0
(:func:`service.core.nonlinear.builtin.fit.fit_series`). The same rule refuses a
fit's grid and the x of ``/v1/predict`` (NaN there would be a silent null), with
the field named and the fix in words, as the polynomial path does for its x
transform (:func:`service.core.data.grid.check_domain`), and with its code
(``transform_domain``): to a caller both are an x outside where the model is defined,
fixed the same way (drop the point, or choose another transform or scale).
"""

from __future__ import annotations

import numpy as np

from service.core.data.grid import grid_field
from service.core.errors import TransformError
from service.core.nonlinear import analysis
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.definition import LINEAR, LOG, Builtin
from service.core.spec import GridSpec

LOG_MARK = "x^"
"""The log-scale equations write ``(x/ec50)^slope`` as ``x^slope/ec50^slope``; the
linear-scale ones ``exp(slope*(x - ec50))`` (a test holds every built-in to this)."""


def nonnegative_x(family: Builtin, scale: str) -> bool:
    """Whether the curve on ``scale`` needs x >= 0."""
    return scale == LOG or family.x_domain == "nonnegative"


def curve_needs_nonnegative_x(family_name: str, expression: str) -> bool:
    """Whether a stored curve (its family name and canonical equation) is defined for
    x >= 0 only: a built-in family on log x, or one raising x to a parameter's power. A
    user's own equation (family ``expression``) declares no domain: False."""
    family = BUILTINS.get(family_name)
    return family is not None and nonnegative_x(family, scale_of_equation(family, expression))


def curve_scale(family: str, expression: str) -> str | None:
    """The x scale (``"log"`` or ``"linear"``) of a fitted curve of a built-in ``family``
    from its canonical equation text; None for any other family (polynomial, expression)."""
    builtin = BUILTINS.get(family)
    return None if builtin is None else scale_of_equation(builtin, expression)


def scale_of_equation(family: Builtin, expression: str) -> str:
    """The x scale of a fitted curve of ``family`` from its canonical equation text."""
    if len(family.scales) == 1:
        return family.scales[0]
    return LOG if LOG_MARK in expression.replace(" ", "") else LINEAR


def where_words(family: Builtin, scale: str, *, article: str = "the") -> str:
    """Why x must be >= 0, in words ("the logistic4 curve is on log x")."""
    if scale == LOG:
        return f"{article} {family.name} curve is on log x"
    return f"{article} {family.name} curve raises x to a parameter's power"


def first_negative(xs: np.ndarray) -> int | None:
    """Position of the first x < 0, or None."""
    found = np.flatnonzero(np.asarray(xs, dtype=float) < 0)
    return None if found.size == 0 else int(found[0])


def check_grid(family: Builtin, scale: str, spec: GridSpec, xs: np.ndarray) -> None:
    """Refuse a fit's grid with a point x < 0 when the curve needs x >= 0.

    ``xs`` are :func:`service.core.data.grid.grid_points` of ``spec``.

    Raises
    ------
    TransformError
        Naming ``grid.x[i]``, ``grid.start``, ``grid.stop`` or ``grid``.
    """
    refuse_negative(family, scale, xs, point=lambda i: f"Grid point {i} (x = {float(xs[i])!r})",
                    field=lambda i: grid_field(spec, xs, i),
                    send="give only grid points x >= 0 (grid.x, or grid.start >= 0), or omit "
                         "the grid to use the data range")


def check_prediction_x(family: Builtin, expression: str, xs: np.ndarray,
                       field: str = "x") -> None:
    """Refuse prediction x < 0 for a stored curve of ``family`` that needs x >= 0.

    Raises
    ------
    TransformError
        Naming ``x[i]`` (``field[i]``) of the first negative value.
    """
    refuse_negative(family, scale_of_equation(family, expression), xs, stored=True,
                    point=lambda i: f"{field}[{i}] = {float(xs[i])!r}",
                    field=lambda i: f"{field}[{i}]", send="send only x >= 0")


def refuse_negative(family: Builtin, scale: str, xs: np.ndarray, *, point, field, send: str,
                    stored: bool = False) -> None:
    """Refuse the first x < 0 of ``xs`` when the curve on ``scale`` needs x >= 0.

    Parameters
    ----------
    family : Builtin
        The curve's family.
    scale : str
        Its x scale (``"log"`` or ``"linear"``).
    xs : ndarray
        The x to check.
    point, field : callable
        From the position of the first negative x: how the message names it
        (``"x[2] = -0.5"``) and the field of the refusal (``"x[2]"``).
    send : str
        What to send instead, in words (the fix after the reason).
    stored : bool
        The curve is a stored fit (its own words, and "refit" in the fix).

    Raises
    ------
    TransformError
        Code ``transform_domain``, as for x outside the domain of a polynomial's x
        transform: one shape of words for every refusal (the point, why x must be >= 0,
        the fix).
    """
    bad = first_negative(xs) if nonnegative_x(family, scale) else None
    if bad is None:
        return
    article, verb = ("the stored", "refit") if stored else ("the", "fit")
    other = f', or {verb} with model.scale = "linear"' if scale == LOG else ""
    raise TransformError(
        f"{point(bad)} is negative, but {where_words(family, scale, article=article)}: the "
        "curve is defined for x >= 0 only.", field=field(bad),
        fix=f"{_lead(scale)}: {send}{other}.")


def _lead(scale: str) -> str:
    return "This curve is on log x" if scale == LOG else "This curve needs x >= 0"


def predict(family: Builtin, fitted, x, *, level: float | None = None, m: int = 1,
            weights=None):
    """:func:`service.core.nonlinear.analysis.predict` after refusing x outside the curve's
    domain (:func:`check_prediction_x`)."""
    xs = np.array(x, dtype=float).reshape(-1)
    check_prediction_x(family, fitted.expression, xs)
    return analysis.predict(fitted, xs, level=level, m=m, weights=weights)
