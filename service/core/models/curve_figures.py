"""Calibration figures of merit of a nonlinear curve: decision and detection limits.

The polynomial definitions (:mod:`service.core.models.calibration`) carried over to a
curve f read through its delta-method band (:func:`service.core.nonlinear.analysis.
predict`), with ``sd(x) = sqrt(se_mean(x)^2 + noise_variance)`` the standard deviation of
one new reading at x and ``s`` the direction of the curve (+1 rising, -1 falling):

* decision level ``y_C = f(0) + s t_{1-alpha,df} sd(0)`` (upper one-sided prediction limit
  of one blank reading), decision limit ``x_C``: ``f(x_C) = y_C``;
* detection limit ``x_D``: the smallest x whose one-sided ``(1 - beta)`` prediction limit
  towards the blank reaches ``y_C``, ``s (f(x) - f(0)) = t_{1-beta,df} sd(x) +
  t_{1-alpha,df} sd(0)`` (Hubaux & Vos 1970, from memory; with the delta-method band in
  place of the straight line's, our extension);
* ICH-style limits read through the curve: ``s (f(x) - f(0)) = 3.3 sigma`` and ``10 sigma``
  (ICH Q2(R1), from memory; for a curve, the signal read back through it, our extension).

Available when the fit is unweighted with residual df, the curve is finite at the blank
(x = 0) and strictly monotone from 0 to ``x_max`` (checked on a dense grid from its exact
derivative); otherwise ``reason`` says why.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, stats

from service.core.checks.exact_fit import FIGURES_REASON, no_residual_variance
from service.core.models.calibration import (
    ICH_DETECTION_FACTOR,
    ICH_QUANTIFICATION_FACTOR,
    CalibrationFigures,
)
from service.core.nonlinear.analysis import predict
from service.core.nonlinear.report import FittedCurve

GRID_POINTS = 2049
_EPS = float(np.finfo(float).eps)


def figures_of_merit(fitted: FittedCurve, *, alpha: float = 0.05, beta: float = 0.05
                     ) -> CalibrationFigures:
    """Sensitivity at the blank, ICH-style limits and Hubaux-Vos decision/detection limits.

    Parameters
    ----------
    fitted : FittedCurve
    alpha, beta : float
        False-positive and false-negative risks.

    Returns
    -------
    CalibrationFigures
        ``available`` false, with the reason and NaN figures, when not defined.
    """
    with np.errstate(all="ignore"):
        return _figures(fitted, float(alpha), float(beta))


def _unavailable(fitted: FittedCurve, reason: str, alpha: float, beta: float):
    nan = math.nan
    return CalibrationFigures(False, reason, nan, float(fitted.sigma), nan, nan, alpha, beta,
                              nan, nan, nan, not (fitted.x_min <= 0.0 <= fitted.x_max))


def _figures(fitted: FittedCurve, alpha: float, beta: float) -> CalibrationFigures:
    if fitted.weighted or fitted.df_residual < 1 or not math.isfinite(fitted.sigma):
        return _unavailable(fitted, "Figures of merit need an unweighted fit with residual "
                            "degrees of freedom.", alpha, beta)
    if no_residual_variance(fitted):
        return _unavailable(fitted, FIGURES_REASON, alpha, beta)
    if not fitted.x_max > 0:
        return _unavailable(fitted, "The calibrated range has no positive x.", alpha, beta)
    top = fitted.x_max
    grid = np.linspace(0.0, top, GRID_POINTS)
    if top * 1e-12 > 0:  # and geometrically towards the blank (dose axes span decades)
        grid = np.union1d(grid, np.geomspace(top * 1e-12, top, GRID_POINTS))
    theta = fitted.estimates
    values = fitted.model.values(grid, theta)
    slope = fitted.model.derivative_x(grid[1:], theta)
    sd = _reading_sd(fitted, grid)
    if not (np.all(np.isfinite(values)) and np.all(np.isfinite(sd))
            and np.all(np.isfinite(slope))):
        return _unavailable(fitted, "The curve or its band is not finite between the blank "
                            "(x = 0) and x_max.", alpha, beta)
    if not (np.all(slope > 0) or np.all(slope < 0)):
        return _unavailable(fitted, "The curve is not monotone between the blank (x = 0) and "
                            "x_max.", alpha, beta)
    sign = 1.0 if slope[0] > 0 else -1.0
    f0, sd0, sigma = float(values[0]), float(sd[0]), float(fitted.sigma)
    df = int(fitted.df_residual)
    t_alpha = float(stats.t.isf(alpha, df))
    t_beta = float(stats.t.isf(beta, df))
    critical = t_alpha * sd0

    def signal(x):
        return sign * (fitted.model.values(np.atleast_1d(x), theta) - f0)

    def first(fn):
        return _first_root(fn, grid)

    lod = first(lambda x: signal(x) - ICH_DETECTION_FACTOR * sigma)
    loq = first(lambda x: signal(x) - ICH_QUANTIFICATION_FACTOR * sigma)
    x_c = first(lambda x: signal(x) - critical)
    x_d = first(lambda x: signal(x) - t_beta * _reading_sd(fitted, x) - critical)
    slope0 = float(fitted.model.derivative_x(np.array([0.0]), theta)[0])
    return CalibrationFigures(True, "", slope0, sigma, lod, loq, alpha, beta,
                              f0 + sign * critical, x_c, x_d,
                              not (fitted.x_min <= 0.0 <= fitted.x_max))


def _reading_sd(fitted: FittedCurve, x) -> np.ndarray:
    """SD of one new reading at x: the delta-method SE of the mean and the noise."""
    se = predict(fitted, np.atleast_1d(np.asarray(x, dtype=float)), m=1).se_mean
    return np.sqrt(se * se + fitted.noise_variance)


def _first_root(fn, grid: np.ndarray) -> float:
    """The first x of the grid range where ``fn`` (negative at the blank) reaches 0."""
    values = fn(grid)
    reached = np.flatnonzero(np.isfinite(values) & (values >= 0))
    if reached.size == 0 or reached[0] == 0:
        return math.nan
    i = int(reached[0])
    a, b = float(grid[i - 1]), float(grid[i])

    def scalar(x):
        return float(fn(np.array([x]))[0])

    fa, fb = scalar(a), scalar(b)
    if not (fa < 0 <= fb):
        return b
    xtol = 4 * _EPS * max(abs(b), 1e-300)
    return float(optimize.brentq(scalar, a, b, xtol=xtol, rtol=4 * _EPS, maxiter=200))
