"""Calibration figures of merit: sensitivity, detection and quantification limits.

Formulas (sources in ``docs/fitted-model.md``; each stated from memory):

* Sensitivity: the slope dy/dx of the calibration curve at a point (IUPAC
  usage); for a quadratic ``b1 + 2 b2 x``.
* Limits from the residual standard deviation and the slope (ICH Q2(R1),
  "based on the standard deviation of the response and the slope"):
  ``LOD = 3.3 sigma / S``, ``LOQ = 10 sigma / S``. For a quadratic the signal
  ``f(0) + k sigma`` is read back through the curve (``f(x) - f(0) = k sigma``),
  which equals ``k sigma / S`` for a straight line.
* Decision and detection limits from the calibration's prediction band
  (Hubaux & Vos 1970): ``y_C`` is the upper one-sided (1 - alpha) prediction
  limit of one new reading at the blank (x = 0); the decision limit ``x_C``
  solves ``f(x) = y_C``; the detection limit ``x_D`` is the smallest x whose
  lower one-sided (1 - beta) prediction limit reaches ``y_C``.

Available for straight-line and quadratic calibrations with an intercept,
no transforms and no weights (the blank's variance is then sigma^2); otherwise
``available`` is False and ``reason`` says why. Undefined numbers are NaN.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import polynomial as P
from scipy import optimize, stats

from service.core.checks.exact_fit import FIGURES_REASON, no_residual_variance
from service.core.data import transforms
from service.core.results import FittedPolynomial

ICH_DETECTION_FACTOR = 3.3
ICH_QUANTIFICATION_FACTOR = 10.0


@dataclass(frozen=True, slots=True)
class CalibrationFigures:
    """Figures of merit of a straight-line or quadratic calibration (x units unless noted)."""

    available: bool
    reason: str
    sensitivity_at_blank: float      # dy/dx at x = 0
    sigma: float                     # residual standard deviation (y units)
    detection_limit_ich: float       # 3.3 sigma / S (read through the curve)
    quantification_limit_ich: float  # 10 sigma / S (read through the curve)
    alpha: float
    beta: float
    decision_level_y: float          # y_C (y units)
    decision_limit: float            # x_C
    detection_limit: float           # x_D
    blank_extrapolated: bool         # x = 0 lies outside the calibrated range


def sensitivity(fitted: FittedPolynomial, x) -> np.ndarray:
    """Slope dy/dx of the fitted curve on the original scales, at each x.

    Parameters
    ----------
    fitted : FittedPolynomial
    x : array_like
        Points on the original x scale (inside the x transform's domain).

    Returns
    -------
    ndarray
        dy/dx; with transforms, the chain rule through both transforms.
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    u = transforms.apply(fitted.transform_x, x, field="x")
    coef = _coef(fitted)
    with np.errstate(all="ignore"):
        t = (u - fitted.x_shift) / fitted.x_scale
        f_t = P.polyval(t, coef)
        dfdu = P.polyval(t, P.polyder(coef)) / fitted.x_scale
        return dfdu * _derivative(fitted.transform_x, x) / _derivative(
            fitted.transform_y, transforms.inverse(fitted.transform_y, f_t))


def figures_of_merit(fitted: FittedPolynomial, *, alpha: float = 0.05, beta: float = 0.05
                     ) -> CalibrationFigures:
    """Sensitivity at the blank, ICH-style LOD/LOQ and Hubaux-Vos decision/detection limits.

    Parameters
    ----------
    fitted : FittedPolynomial
    alpha, beta : float
        False-positive and false-negative risks for the Hubaux-Vos limits.

    Returns
    -------
    CalibrationFigures
    """
    with np.errstate(all="ignore"):  # extreme documents give NaN, never warnings
        return _figures(fitted, alpha, beta)


def _figures(fitted: FittedPolynomial, alpha: float, beta: float) -> CalibrationFigures:
    nan = math.nan
    reason = _unavailable(fitted)
    sigma = float(fitted.sigma)
    if reason:
        return CalibrationFigures(False, reason, nan, sigma, nan, nan, alpha, beta, nan, nan,
                                  nan, False)
    coef = _coef(fitted)
    s, c = fitted.x_shift, fitted.x_scale
    t0 = -s / c
    slope0 = float(P.polyval(t0, P.polyder(coef)) / c)
    sign = 1.0 if slope0 > 0 else -1.0
    f0 = float(P.polyval(t0, coef))

    def signal(x):  # signal above the blank, in the direction the curve rises
        return sign * (P.polyval((x - s) / c, coef) - f0)

    r_inv_t = np.linalg.inv(np.asarray(fitted.r_factor, float)).T  # from_document checked it

    def pred_sd(x):  # sd of one new reading at x (scalar or array)
        t = np.atleast_1d(np.asarray(x, dtype=float) - s) / c
        v = t[None, :] ** np.arange(len(coef))[:, None]
        w = r_inv_t @ v  # R^-T v
        out = sigma * np.sqrt(1.0 + np.sum(w * w, axis=0))
        return out if np.ndim(x) else float(out[0])

    x_far = 10.0 * max(abs(fitted.x_min), abs(fitted.x_max), c)
    lod = _first_root(lambda x: signal(x) - ICH_DETECTION_FACTOR * sigma, x_far)
    loq = _first_root(lambda x: signal(x) - ICH_QUANTIFICATION_FACTOR * sigma, x_far)
    df = int(fitted.df_residual)
    t_alpha = float(stats.t.isf(alpha, df))  # upper tails: 1 - alpha rounds to 1 for tiny alpha
    t_beta = float(stats.t.isf(beta, df))
    critical = t_alpha * pred_sd(0.0)
    x_c = _first_root(lambda x: signal(x) - critical, x_far)
    x_d = _first_root(lambda x: signal(x) - t_beta * pred_sd(x) - critical, x_far)
    blank_out = not (fitted.x_min <= 0.0 <= fitted.x_max)
    return CalibrationFigures(True, "", slope0, sigma, lod, loq, alpha, beta,
                              f0 + sign * critical, x_c, x_d, blank_out)


def _unavailable(fitted: FittedPolynomial) -> str:
    if fitted.degree not in (1, 2):
        return "Figures of merit are defined here for straight-line and quadratic calibrations."
    if not fitted.intercept:
        return "The calibration has no intercept, so the blank response is not estimated."
    if fitted.transform_x != "none" or fitted.transform_y != "none":
        return "Figures of merit need untransformed x and y."
    if fitted.weighted:
        return "Weighted fit: the blank's standard deviation is not sigma; not computed."
    if fitted.df_residual < 1 or not math.isfinite(fitted.sigma):
        return "No residual degrees of freedom: sigma is undefined."
    if no_residual_variance(fitted):
        return FIGURES_REASON
    coef = _coef(fitted)
    slope0 = P.polyval(-fitted.x_shift / fitted.x_scale, P.polyder(coef))
    if slope0 == 0:
        return "The curve is flat at the blank (zero sensitivity)."
    return ""


def _coef(fitted: FittedPolynomial) -> np.ndarray:
    k0 = 0 if fitted.intercept else 1
    return np.concatenate([np.zeros(k0), np.asarray(fitted.basis_coefficients, float)])


def _first_root(func, x_far: float) -> float:
    """Smallest x > 0 with func(x) = 0 (func(0) < 0), scanning out to x_far; NaN if none."""
    start = float(func(0.0))
    if not (start < 0 and math.isfinite(x_far)):
        return 0.0 if start == 0 else math.nan
    grid = np.linspace(0.0, x_far, 2001)
    values = np.asarray(func(grid), dtype=float)
    hit = np.flatnonzero(values >= 0)
    if hit.size == 0:
        return math.nan
    k = int(hit[0])
    if not (np.isfinite(values[k]) and np.isfinite(values[k - 1]) and values[k - 1] < 0):
        return math.nan
    return float(optimize.brentq(lambda x: float(func(x)), grid[k - 1], grid[k], xtol=1e-14 * x_far,
                                 rtol=4 * np.finfo(float).eps, maxiter=200))


def _derivative(name: str, v: np.ndarray) -> np.ndarray:
    """d transform(v) / dv."""
    if name == "none":
        return np.ones_like(v)
    return {"log": lambda a: 1.0 / a, "log10": lambda a: 1.0 / (a * math.log(10.0)),
            "sqrt": lambda a: 0.5 / np.sqrt(a), "reciprocal": lambda a: -1.0 / (a * a)}[name](v)
