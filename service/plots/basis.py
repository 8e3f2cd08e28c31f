"""The fitted polynomial's x on the scale its powers are taken (``t``), and its design.

For a nonlinear family the "design" is the weighted Jacobian at the estimates (the
tangent plane, whose hat matrix gives the core's leverages) and the Breusch-Pagan
auxiliary regression is on raw x (``1, x``), as in
:func:`service.core.nonlinear.analysis.report`.

``t = (u - x_shift) / x_scale`` with ``u`` the x values after ``transform_x``
(see :class:`service.core.results.FittedPolynomial`). Two panels need it: the
spread panel redraws the Breusch-Pagan auxiliary regression (the squared
residuals on ``1, t, ..., t^d``), and the half-normal envelope simulates from
the fit's own hat matrix (the weighted design in entry order).
"""

from __future__ import annotations

import numpy as np

from service.core.data import transforms


def is_polynomial(model) -> bool:
    """True for a fitted polynomial (it has a degree); False for a nonlinear curve."""
    return hasattr(model, "degree")


def scaled_x(model, x: np.ndarray) -> np.ndarray:
    """``t`` of the original x values ``x`` (inside the fitted range's domain); for a
    nonlinear curve x itself (its Breusch-Pagan regressors)."""
    if not is_polynomial(model):
        return np.asarray(x, dtype=float)
    u = transforms.apply(model.transform_x, np.asarray(x, dtype=float), field="x")
    return (u - model.x_shift) / model.x_scale


def powers(t: np.ndarray, degree: int) -> np.ndarray:
    """Columns ``1, t, ..., t^degree``."""
    return np.vander(t, degree + 1, increasing=True)


def weighted_design(model, x: np.ndarray, weights: np.ndarray | None) -> np.ndarray:
    """The fit's design on ``t`` (entry order; no constant column without an intercept),
    each row times ``sqrt(w)`` for a weighted fit."""
    design = powers(scaled_x(model, x), model.degree)[:, 0 if model.intercept else 1:]
    return design if weights is None else design * np.sqrt(weights)[:, None]


def residual_basis(model, x: np.ndarray, weights: np.ndarray | None) -> np.ndarray:
    """An orthonormal basis ``Q`` of the weighted design's columns: ``H = Q Q'``."""
    if not is_polynomial(model):
        with np.errstate(all="ignore"):
            jacobian = np.asarray(model.model.values_and_jacobian(
                np.asarray(x, dtype=float), model.estimates)[1], dtype=float)
        design = jacobian if weights is None else jacobian * np.sqrt(weights)[:, None]
        return np.linalg.qr(design)[0]
    design = weighted_design(model, x, weights)
    if design.shape[1] == 0:
        return design
    return np.linalg.qr(design)[0]
