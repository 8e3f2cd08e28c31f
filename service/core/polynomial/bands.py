"""Predictions with bands at any x, from a :class:`FittedPolynomial` alone.

``fit_series`` evaluates its grid with :func:`grid_prediction` (the same
numbers as :func:`predict`), so a stored model reproduces the grid exactly.

Bands, at confidence ``level`` with ``t = t_{df}(1 - (1 - level)/2)``:

* mean: ``fit ± t se``, with ``se = sigma ||R^-T v(t)||``;
* new observation(s): ``fit ± t sqrt(se² + sigma²/(m w))`` for the mean of ``m``
  future observations of weight ``w`` (variance sigma²/w on the caller's
  inverse-variance scale; ``w`` = 1 unless ``weights`` are given);
* simultaneous (Working-Hotelling) band for the whole curve:
  ``fit ± sqrt(p F_{p, df}(level)) se``.

The points are evaluated in one compiled loop (``kernels_bands.curve_bands``)
with ``R^-1`` from back substitution (inf/NaN for a singular R of a forged document).

With a transformed response the fit and limits are computed on the fitting
scale and mapped back through the inverse transform (limits swap for the
decreasing ``reciprocal``). The back-transformed fit estimates the *median*
of y rather than its mean when the errors are symmetric on the fitting
scale (retransformation bias; for ``log`` the mean is larger by about
``exp(sigma²/2)``). ``se_mean`` stays on the fitting scale.

With known measurement SDs (``fitted.weighting == "known_sd"``) sigma is 1,
``t`` is the normal quantile and the simultaneous factor Scheffé's
``sqrt(chi²_p(level))``; the observation band is for new observations of
SD 1 on the weight scale (weight 1).
"""

from __future__ import annotations

import math

import numpy as np

from service.core.checks.exact_fit import without_intervals
from service.core.checks.known_sd import KNOWN_SD, normal_quantile, simultaneous_normal_factor
from service.core.checks.quantiles import f_quantile, t_quantile
from service.core.data import transforms
from service.core.data.reading_weights import reading_weights
from service.core.errors import DataError, SpecError
from service.core.polynomial.compiled import bands as kernels_bands
from service.core.polynomial.compiled.qr import upper_inverse
from service.core.results import FittedPolynomial, Prediction, frozen_array, frozen_rows
from service.core.spec import MAX_REPLICATES


def _check_level(level: float) -> float:
    level = float(level)
    if not 0.0 < level < 1.0:
        raise SpecError(f"level = {level!r} is not between 0 and 1.", field="level",
                        fix="Use a confidence level such as 0.95.")
    return level


def predict(fitted: FittedPolynomial, x, *, level: float | None = None, m: int = 1,
            weights=None) -> Prediction:
    """Fitted values and bands at ``x`` (original x and y scales).

    Parameters
    ----------
    fitted : FittedPolynomial
        A fitted model (``FitReport.model``).
    x : array_like
        Where to predict, on the caller's original x scale; finite values.
    level : float, optional
        Confidence level; defaults to the level the model was fitted with.
    m : int
        Number of future observations whose mean the observation band covers.
    weights : array_like, optional
        The weight of a new observation at each x on the fit's weight scale (default 1):
        the observation band is for the mean of ``m`` readings of variance
        ``sigma^2 / weight`` (:mod:`service.core.data.reading_weights`).

    Raises
    ------
    DataError, TransformError, SpecError
        Non-finite x, x outside the x transform's domain, bad level, m or weights.
    """
    with np.errstate(all="ignore"):  # overflow far outside the data becomes NaN, not a warning
        return _predict(fitted, x, level, m, weights)


def grid_prediction(fitted: FittedPolynomial, xs: np.ndarray) -> Prediction:
    """:func:`predict` at the fit's own grid and level, for ``fit_series`` (inside its
    errstate): ``xs`` is a fresh array of finite values (``grid.grid_points``), so the
    argument checks are skipped; the numbers are :func:`predict`'s (a stored model
    reproduces the grid exactly)."""
    u = transforms.apply(fitted.transform_x, xs, field="x")
    return _evaluate(fitted, xs, u, fitted.level, 1, np.array(fitted.basis_coefficients),
                     np.array(fitted.r_factor))


def _predict(fitted: FittedPolynomial, x, level: float | None, m: int, weights) -> Prediction:
    level = _check_level(fitted.level if level is None else level)
    if isinstance(m, bool) or int(m) != m or not 1 <= m <= MAX_REPLICATES:
        raise SpecError(f"m = {m!r} is not a whole number from 1 to {MAX_REPLICATES}.",
                        field="m", fix="Give the number of future observations to average "
                        "(1 or more).")
    xs = np.array(x, dtype=float, ndmin=1)  # a copy: the result freezes it
    if xs.ndim != 1:
        raise DataError("x must be one-dimensional.", field="x", fix="Send a flat list of numbers.")
    if not math.isfinite(float(np.add.reduce(xs))) and not np.isfinite(xs).all():
        i = int(np.flatnonzero(~np.isfinite(xs))[0])
        raise DataError(f"x[{i}] is not a finite number.", field=f"x[{i}]",
                        fix="Predict only at finite x values.")
    w = reading_weights(weights, xs.size)
    u = transforms.apply(fitted.transform_x, xs, field="x", stored=True)
    return _evaluate(fitted, xs, u, level, m, np.array(fitted.basis_coefficients, dtype=float),
                     np.array(fitted.r_factor, dtype=float), w)


def _evaluate(fitted: FittedPolynomial, xs: np.ndarray, u: np.ndarray, level: float, m: int,
              coef: np.ndarray, r_factor: np.ndarray, w: np.ndarray | None = None
              ) -> Prediction:
    df = fitted.df_residual
    p = fitted.basis_coefficients.size
    if fitted.weighting == KNOWN_SD:  # sigma is 1: normal and chi-square (Scheffé) factors
        tq, wh = normal_quantile(level), simultaneous_normal_factor(p, level)
    elif df > 0:  # upper tails from 1 - level (exact), never from 0.5 + level / 2 (rounds to 1)
        tq = -t_quantile(df, (1.0 - level) / 2)
        wh = math.sqrt(p * f_quantile(p, df, level))
    else:
        tq = wh = float("nan")
    rows, extrap, finite = kernels_bands.curve_bands(
        xs, u, fitted.x_shift, fitted.x_scale, 0 if fitted.intercept else 1, coef,
        upper_inverse(r_factor), fitted.sigma, tq, wh, m, fitted.x_min, fitted.x_max)
    if w is not None:  # new readings of variance sigma^2 / w: the observation rows again
        half = tq * np.sqrt(rows[1] ** 2 + fitted.sigma ** 2 / (m * w))
        rows[4], rows[5] = rows[0] - half, rows[0] + half
        finite = bool(np.isfinite(rows[2:]).all())
    name = fitted.transform_y
    if name == "none" and finite:  # the usual case: read-only views of the kernel's rows
        values, unbounded = frozen_rows(rows), np.zeros(xs.size, dtype=bool)
    else:
        values, unbounded = _limits(name, rows, finite)
    return without_intervals(fitted, Prediction(
        frozen_array(xs), *values, frozen_array(extrap, dtype=bool), level,
        frozen_array(unbounded, dtype=bool)))


def _limits(name: str, rows: np.ndarray, finite: bool) -> tuple[list[np.ndarray], np.ndarray]:
    """Fit, se and the three bands' limits from the kernel's rows (mean, obs, band), mapped
    back through the inverse y transform, and where a limit is unbounded.

    An interval on the fitting scale maps to the interval of the original scale that holds
    the fit. Under ``reciprocal`` an interval that reaches 0 (the pole) holds the fit only on
    one side: with a positive fit on the fitting scale, [1/upper, +inf); with a negative one,
    (-inf, 1/lower]. The missing side is unbounded: NaN, and marked. Infinite values (far
    outside the data, or beyond the double range after the inverse) are NaN and marked too.
    """
    fit, se = rows[0], rows[1]
    lo, hi = rows[2::2], rows[3::2]
    pole = np.zeros(lo.shape, dtype=bool)
    if name != "none":
        if name == "reciprocal":
            pole = (lo <= 0.0) & (hi >= 0.0)
            above, below = pole & (fit > 0.0), pole & (fit < 0.0)
        fit = transforms.inverse(name, fit)
        lo, hi = transforms.inverse(name, lo), transforms.inverse(name, hi)
        if not transforms.is_increasing(name):
            lo, hi = hi, lo
        if name == "reciprocal":
            hi = np.where(above, np.inf, hi)   # [1/upper, +inf)
            lo = np.where(below, -np.inf, lo)  # (-inf, 1/lower]
            lo, hi = np.where(pole & ~(above | below), np.nan, lo), np.where(
                pole & ~(above | below), np.nan, hi)  # a fit at the pole: nothing holds it
        finite = bool(np.isfinite(lo).all() and np.isfinite(hi).all())
    unbounded = np.isfinite(fit) & (pole | np.isinf(lo) | np.isinf(hi)).any(axis=0)
    values = [fit, se, lo[0], hi[0], lo[1], hi[1], lo[2], hi[2]]
    # finite limits imply a finite fit and se (an infinite or NaN one spreads to the limits)
    if not finite and any(np.isinf(a).any() for a in values):
        values = [np.where(np.isinf(a), np.nan, a) for a in values]
    return [frozen_array(a) for a in values], unbounded
