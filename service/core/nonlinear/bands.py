"""Predictions with delta-method bands at new x (:func:`predict`).

With ``g`` the model's gradient with respect to the parameters at a new x and
``C`` the parameter covariance (:mod:`~service.core.nonlinear.inference`),
``se_fit = sqrt(g' C g)`` (the delta method, i.e. the tangent-plane
approximation). The band for the mean of ``m`` new observations adds their
variance ``factor / m``: new observations are taken at unit weight, so their
variance is ``sigma^2`` in the relative weight mode and 1 in the known-SD
mode. Quantiles are Student t on the residual df (normal in the known-SD
mode). ``extrapolated`` marks points outside the data's range (any
predictor column).
"""

from __future__ import annotations

import numpy as np

from service.core.errors import DataError, SpecError
from service.core.nonlinear.inference import check_options, covariance_scale, critical_value
from service.core.nonlinear.problem import MODEL_FAILURES
from service.core.nonlinear.results import Bands, Inference, Notice, Solution, frozen
from service.core.nonlinear.tangent import tangent, unscaled_covariance


def _grid(solution: Solution, x_new) -> np.ndarray:
    try:
        xs = np.array(x_new, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DataError("the new x must be numbers", field="grid.x",
                        fix="send the new x as numbers") from exc
    x = solution.problem.x
    if xs.ndim != x.ndim or xs.shape[1:] != x.shape[1:]:
        raise DataError(f"the new x must have the shape of the data's x rows {x.shape[1:]}",
                        field="grid.x", fix="send one x (row) per prediction")
    if not np.isfinite(xs).all():
        bad = int(np.flatnonzero(~np.isfinite(xs.reshape(xs.shape[0], -1)).all(axis=1))[0])
        raise DataError(f"the new x at {bad} is not a finite number", field=f"grid.x[{bad}]",
                        fix="send finite numbers")
    return xs


@np.errstate(all="ignore")  # floating-point trouble is data here, never a warning
def predict(solution: Solution, x_new, *, level: float = 0.95, weight_mode: str = "relative",
            replicates: int = 1, inference: Inference | None = None) -> Bands:
    """Fitted values and delta-method bands at ``x_new``.

    Parameters
    ----------
    solution : Solution
        The fit.
    x_new : array_like
        New predictor values, shaped like the data's ``x`` (rows first).
    level : float
        Confidence level of both bands.
    weight_mode : {"relative", "known_sd"}
        As in :func:`~service.core.nonlinear.inference.infer`.
    replicates : int
        ``m``: the observation band is for the mean of ``m`` new observations.
    inference : Inference, optional
        Reuse its covariance (must use the same ``weight_mode``).

    Returns
    -------
    Bands
        Fit, standard error and both bands per new x, with ``extrapolated``
        flags; NaN (and a notice) where the model is not finite.

    Raises
    ------
    DataError
        New x that are not finite numbers shaped like the data's x rows
        (field ``"grid.x"``).
    SpecError
        Bad ``weight_mode``, ``level`` or ``replicates``.
    """
    check_options(weight_mode, level)
    if int(replicates) != replicates or replicates < 1:
        raise SpecError(f"replicates = {replicates!r} is not a positive whole number",
                        field="replicates", fix="use 1 for a single new observation")
    xs = _grid(solution, x_new)
    problem = solution.problem
    _, factor = covariance_scale(solution, weight_mode)
    if inference is not None and inference.weight_mode == weight_mode:
        cov = inference.covariance
    else:
        jw = problem.sqrt_weights[:, None] * solution.jacobian
        cov = factor * unscaled_covariance(tangent(jw)) if np.isfinite(jw).all() \
            else np.full((problem.p, problem.p), np.nan)
    crit = critical_value(weight_mode, problem.n - problem.p, level)
    return band_values(problem.model, xs, solution.estimates, cov, factor, crit, level,
                       int(replicates), problem.x)


def band_values(model, xs: np.ndarray, theta: np.ndarray, cov: np.ndarray, factor: float,
                crit: float, level: float, replicates: int, x_data: np.ndarray,
                weights: np.ndarray | None = None) -> Bands:
    """Fit, standard error and both bands at ``xs`` from estimates and their covariance.

    Parameters
    ----------
    model : object
        Has ``values_and_jacobian(x, theta)``.
    xs : ndarray
        New x, shaped like the data's rows.
    theta, cov : ndarray
        Estimates and their covariance.
    factor : float
        Variance of one new observation at unit weight (``sigma²``, or 1 with known SDs).
    crit : float
        Two-sided critical value of both bands.
    level : float
        Their confidence level (recorded).
    replicates : int
        ``m``: the observation band is for the mean of ``m`` new observations.
    x_data : ndarray
        The fitted data's x (``extrapolated`` marks new x outside its range).
    weights : ndarray, optional
        The weight of a new observation at each x (variance ``factor / weight``);
        None: weight 1.
    """
    k, p = xs.shape[0], theta.size
    notices: list[Notice] = []
    fit, grad = _evaluate(model, xs, theta, k, p)
    bad = ~(np.isfinite(fit) & np.isfinite(grad).all(axis=1))
    if bad.any():
        notices.append(Notice("non_finite_prediction", non_finite_words(xs, bad)))
        fit[bad], grad[bad] = np.nan, np.nan
    if not np.isfinite(cov).all():
        notices.append(Notice("no_covariance", "no parameter covariance (rank-deficient "
                              "Jacobian or no residual df): bands are missing"))
    with np.errstate(all="ignore"):
        se_fit = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", grad, cov, grad), 0.0))
        divisor = replicates if weights is None else replicates * weights
        se_obs = np.sqrt(se_fit ** 2 + factor / divisor)
    x = x_data.reshape(x_data.shape[0], -1)
    flat = xs.reshape(k, -1)
    extrapolated = ((flat < x.min(axis=0)) | (flat > x.max(axis=0))).any(axis=1)
    xs.setflags(write=False)
    return Bands(x=xs, fit=frozen(fit), se_fit=frozen(se_fit),
                 mean_lower=frozen(fit - crit * se_fit), mean_upper=frozen(fit + crit * se_fit),
                 obs_lower=frozen(fit - crit * se_obs), obs_upper=frozen(fit + crit * se_obs),
                 extrapolated=frozen(extrapolated, dtype=bool), level=level,
                 critical_value=crit, replicates=int(replicates), notices=tuple(notices))


def non_finite_words(xs: np.ndarray, bad: np.ndarray) -> str:
    """The ``non_finite_prediction`` message: how many of ``xs`` (rows) are ``bad``, the
    first five of them, and why their values are null."""
    where = np.flatnonzero(bad)
    rows = xs.reshape(xs.shape[0], -1)
    shown = ", ".join(repr(float(rows[i, 0])) if rows.shape[1] == 1
                      else repr(tuple(map(float, rows[i]))) for i in where[:5])
    more = ", ..." if where.size > 5 else ""
    return (f"the fitted curve is not finite at {where.size} of the {xs.shape[0]} points "
            f"asked for (x = {shown}{more}), so their values are null; the equation is "
            "undefined or overflows there")


def _evaluate(model, xs, theta, k: int, p: int) -> tuple[np.ndarray, np.ndarray]:
    """Model values and gradients at new x; NaN where they cannot be computed."""
    try:
        with np.errstate(all="ignore"):
            fit, grad = model.values_and_jacobian(xs, theta)
            fit = np.array(fit, dtype=float)
            grad = np.array(grad, dtype=float)
    except MODEL_FAILURES:
        return np.full(k, np.nan), np.full((k, p), np.nan)
    if fit.shape != (k,) or grad.shape != (k, p):
        return np.full(k, np.nan), np.full((k, p), np.nan)
    return fit, grad
