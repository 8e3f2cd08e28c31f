"""The precision profile of a dose-response calibration and the working range it implies.

The CV of a concentration read back from the mean of ``m`` new readings at a true x0
is taken from the quantiles of the back-calculated value, not from a first-order
standard deviation:

    CV(x0) = (x_hi - x_lo) / (2 x0),

where ``[x_lo, x_hi]`` is the piece around x0 of the set of x whose band
``f(x) -/+ s(x)``, ``s(x)^2 = se_mean(x)^2 + noise_variance / m`` (one standard
deviation: the band of :func:`service.core.nonlinear.analysis.predict` with a critical
value of 1), contains the reading ``y0 = f(x0)``: the classical calibration interval
(Eisenhart 1939) at the 68.27% level, read through the exact fitted curve.

Why these are quantiles: for a curve increasing in x, a back-calculated x is at most t
exactly when the new curve at t is at least the reading, ``f*(t) - y* >= 0``; with the
fitted curve at t normal about ``f(t)`` with variance ``se_mean(t)^2`` (the delta
method in the parameters, at each t) and the reading normal about ``y0`` with variance
``noise_variance / m``, ``P(x <= t) = Phi((f(t) - y0) / s(t))``. So ``x_lo`` and
``x_hi`` are the 15.87% and 84.13% quantiles, x0 is the median, and ``CV`` is half the
central 68.27% range over the median: a standard deviation's worth of spread that
stays defined where the first-order CV ``s / |dy/dx| / x`` fails. Near a plateau the
inverse curve is steeply convex, a share of the readings falls beyond the asymptote
(no concentration at all), and the standard deviation of the back-calculated values
is dominated by, or undefined because of, that tail; the first-order CV understated
the spread there (an upper end at "20%" had a Monte Carlo standard deviation of about
40%).

Checked against a seeded Monte Carlo (10,000 draws of parameters from their covariance
and of readings, read back through the closed-form inverse of the four-parameter
logistic): at the reported ends of the working range the Monte Carlo CV of the same
definition is within 5% of the limit (tests/models/test_precision_profile.py).

The working range is the piece of the calibrated range around the most precise x where
CV(x) stays at or under a limit; 20% by default because it is common practice in
bioanalytical method validation (the usual acceptance at the lower limit of
quantification; from memory). The ends are found by Brent's method on
``CV(x) - limit`` and never extend past the calibrated range. An end of the quantile
interval that the band never reaches (within ``FAR_WIDTHS`` range widths, or towards
zero from a positive range) makes the CV infinite.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from service.core.nonlinear.report import FittedCurve

PROFILE_FAMILIES = ("logistic4", "logistic5")
DEFAULT_CV_LIMIT = 0.20  # common practice in bioanalytical method validation
GRID_POINTS = 129        # profile grid: as many equally and geometrically spaced points
TABLE_POINTS = 257       # band table over the range, before the ladders beyond it
FAR_WIDTHS = 2.0 ** 20   # how far beyond the range an interval end is looked for
BISECTIONS = 100         # most steps of each end's bracketed search (ends a few ulps apart)


@dataclass(frozen=True, slots=True)
class PrecisionProfile:
    """CV of the back-calculated x on a grid over the calibrated range, and the working range.

    ``lower``/``upper`` are NaN when no x of the range reaches the limit (or the profile is
    not available); ``reason`` says why when ``available`` is false.
    """

    available: bool
    reason: str
    cv_limit: float
    replicates: int
    x: np.ndarray
    cv: np.ndarray
    lower: float
    upper: float


def back_calculated_cv(fitted: FittedCurve, x, *, replicates: int = 1) -> np.ndarray:
    """CV of the x read back from the mean of ``replicates`` readings at each true x.

    Half the central 68.27% range of the back-calculated value over its median (see the
    module docstring); ``inf`` where an end of that range is beyond an asymptote, NaN at
    x <= 0 or where the curve is not finite.
    """
    return _BandTable(fitted, replicates).cv(x)


def quantile_interval(fitted: FittedCurve, x, *, replicates: int = 1
                      ) -> tuple[np.ndarray, np.ndarray]:
    """The 15.87% and 84.13% quantiles of the x read back from readings at each true x."""
    return _BandTable(fitted, replicates).ends(x)


def precision_profile(fitted: FittedCurve, *, cv_limit: float = DEFAULT_CV_LIMIT,
                      replicates: int = 1) -> PrecisionProfile:
    """The precision profile over the positive part of the calibrated range.

    Parameters
    ----------
    fitted : FittedCurve
        A ``logistic4`` or ``logistic5`` fit (others: ``available`` false).
    cv_limit : float
        The largest acceptable CV of a back-calculated x (0.20 = 20%).
    replicates : int
        ``m``: readings averaged into each y.

    Returns
    -------
    PrecisionProfile
    """
    empty = np.empty(0)
    if fitted.family not in PROFILE_FAMILIES:
        return PrecisionProfile(False, "The precision profile is computed for logistic4 and "
                                "logistic5 calibrations.", cv_limit, replicates, empty, empty,
                                math.nan, math.nan)
    if not fitted.x_max > 0 or not math.isfinite(fitted.noise_variance) \
            or not math.isfinite(fitted.x_max - fitted.x_min):
        return PrecisionProfile(False, "The calibrated range has no positive x or is wider "
                                "than the double range, or sigma is undefined.", cv_limit,
                                replicates, empty, empty, math.nan, math.nan)
    start = fitted.x_min if fitted.x_min > 0 else fitted.x_max * 1e-6
    grid = np.union1d(np.linspace(start, fitted.x_max, GRID_POINTS),
                      np.geomspace(start, fitted.x_max, GRID_POINTS))
    table = _BandTable(fitted, replicates)
    with np.errstate(all="ignore"):
        cv = table.cv(grid)
    good = np.isfinite(cv) & (cv <= cv_limit)
    if not good.any():
        return PrecisionProfile(True, "", cv_limit, replicates, grid, cv, math.nan, math.nan)
    best = int(np.nanargmin(np.where(np.isfinite(cv), cv, np.inf)))
    left, right = best, best
    while left > 0 and good[left - 1]:
        left -= 1
    while right < grid.size - 1 and good[right + 1]:
        right += 1

    def excess(x: float) -> float:
        return float(table.cv([x])[0] - cv_limit)

    lower = float(grid[0]) if left == 0 else _brent(excess, grid[left - 1], grid[left])
    upper = float(grid[-1]) if right == grid.size - 1 else _brent(excess, grid[right],
                                                                   grid[right + 1])
    return PrecisionProfile(True, "", cv_limit, replicates, grid, cv, lower, upper)


class _BandTable:
    """The fitted curve and its one-SD spread on a table reaching far beyond the range, and
    the quantile interval of back-calculated values read from it (vectorized)."""

    def __init__(self, fitted: FittedCurve, replicates: int) -> None:
        self.fitted, self.replicates = fitted, int(replicates)
        self.t = _table(fitted.x_min, fitted.x_max)
        self.curve, self.spread = self.evaluate(self.t)

    def evaluate(self, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """f(t) and s(t) = sqrt(se_mean(t)^2 + noise_variance / m); NaN where not finite."""
        fitted = self.fitted
        with np.errstate(all="ignore"):
            try:
                fit, grad = fitted.model.values_and_jacobian(t, fitted.estimates)
                fit, grad = np.asarray(fit, dtype=float), np.asarray(grad, dtype=float)
            except (ArithmeticError, ValueError):
                return np.full(t.shape, np.nan), np.full(t.shape, np.nan)
            se2 = np.einsum("ij,jk,ik->i", grad, fitted.covariance, grad)
            spread = np.sqrt(np.maximum(se2, 0.0) + fitted.noise_variance / self.replicates)
        bad = ~(np.isfinite(fit) & np.isfinite(spread))
        fit[bad], spread[bad] = np.nan, np.nan
        return fit, spread

    def cv(self, x) -> np.ndarray:
        x0 = np.atleast_1d(np.asarray(x, dtype=float))
        lower, upper = self.ends(x0)
        with np.errstate(all="ignore"):
            cv = (upper - lower) / (2.0 * x0)
        cv[~(x0 > 0) | np.isnan(cv)] = np.nan
        return cv

    def ends(self, x) -> tuple[np.ndarray, np.ndarray]:
        x0 = np.atleast_1d(np.asarray(x, dtype=float))
        with np.errstate(all="ignore"):
            y0, _ = self.evaluate(x0)
            sign = np.sign(self.fitted.model.derivative_x(x0, self.fitted.estimates))
            near_lo, far_lo = self._bracket(x0, y0, sign, -1)
            near_hi, far_hi = self._bracket(x0, y0, sign, +1)
            near = np.concatenate([near_lo, near_hi])
            far = np.concatenate([far_lo, far_hi])
            found = np.isfinite(far)
            ends = _bisect(lambda t: self._outside(t, np.tile(y0, 2), np.tile(sign, 2),
                                                   np.repeat([-1.0, 1.0], x0.size)),
                           np.where(found, near, 0.0), np.where(found, far, 0.0))
        ends = np.where(found, ends, np.repeat([-np.inf, np.inf], x0.size))
        ends[np.tile(np.isnan(y0) | (sign == 0), 2)] = np.nan
        return ends[:x0.size], ends[x0.size:]

    def _outside(self, t, y0, sign, direction):
        """Positive where the one-SD band at t no longer contains y0 on the far side."""
        curve, spread = self.evaluate(t)
        return sign * direction * (curve - y0) - spread

    def _bracket(self, x0, y0, sign, direction):
        """For each x0, table points (near, far) around the first t beyond x0 (moving in
        ``direction``) where the band stops containing y0; far is NaN when none is."""
        outside = (sign[:, None] * direction * (self.curve[None, :] - y0[:, None])
                   - self.spread[None, :])
        beyond = (self.t[None, :] - x0[:, None]) * direction > 0
        hit = beyond & (outside >= 0)
        if direction > 0:
            j = np.argmax(hit, axis=1)
            previous = self.t[np.maximum(j - 1, 0)]
            near = np.where(previous > x0, previous, x0)
        else:
            j = self.t.size - 1 - np.argmax(hit[:, ::-1], axis=1)
            following = self.t[np.minimum(j + 1, self.t.size - 1)]
            near = np.where(following < x0, following, x0)
        far = np.where(hit.any(axis=1), self.t[j], np.nan)
        return near, far


def _table(lo: float, hi: float) -> np.ndarray:
    """Points over the range (equally and, when positive, geometrically spaced), ladders of
    range widths beyond each end out to ``FAR_WIDTHS``, and halvings towards zero."""
    width = hi - lo if hi > lo else max(abs(hi), 1.0)
    steps = width * 2.0 ** np.arange(-10, math.log2(FAR_WIDTHS) + 1)
    parts = [np.linspace(lo, hi, TABLE_POINTS), lo - steps, hi + steps]
    if lo > 0:
        parts += [np.geomspace(lo, hi, TABLE_POINTS), lo * 2.0 ** -np.arange(1, 64)]
    elif hi > 0:
        parts.append(hi * 2.0 ** -np.arange(1, 64))
    return np.unique(np.concatenate(parts))


def _bisect(fn, near: np.ndarray, far: np.ndarray) -> np.ndarray:
    """Vectorized bracketed root finding for the points where ``fn`` turns non-negative
    between ``near`` (negative) and ``far`` (non-negative; NaN counts as outside; either may
    be the larger): the
    Illinois variant of regula falsi (superlinear; a secant point that is not strictly
    inside its bracket, or not finite, is replaced by the midpoint), until every bracket
    is a few ulps wide or ``BISECTIONS`` steps."""
    a, b = near.copy(), far.copy()
    fa, fb = fn(a), fn(b)
    fa = np.where(np.isfinite(fa), np.minimum(fa, -0.0), -1.0)  # negative by construction
    fb = np.where(np.isfinite(fb), np.maximum(fb, 0.0), 1.0)    # non-negative likewise
    side = np.zeros(a.shape)  # +1: b was kept last step, -1: a was
    tolerance = 4 * np.finfo(float).eps
    for _ in range(BISECTIONS):
        open_ = np.abs(b - a) > tolerance * np.maximum(np.abs(a), np.abs(b))
        if not open_.any():
            break
        with np.errstate(all="ignore"):
            mid = b - fb * (b - a) / (fb - fa)
        bad = ~((mid > np.minimum(a, b)) & (mid < np.maximum(a, b)))
        mid = np.where(bad, 0.5 * (a + b), mid)
        mid = np.where(open_, mid, a)
        value = fn(mid)
        out = ~(value < 0)
        value = np.where(np.isfinite(value), value, 1.0)
        # the end kept twice in a row has its value halved (Illinois)
        fa = np.where(out & (side < 0), 0.5 * fa, fa)
        fb = np.where(~out & (side > 0), 0.5 * fb, fb)
        a, fa = np.where(open_ & ~out, mid, a), np.where(open_ & ~out, value, fa)
        b, fb = np.where(open_ & out, mid, b), np.where(open_ & out, np.maximum(value, 0.0), fb)
        side = np.where(out, -1.0, 1.0)
    return 0.5 * (a + b)


def _brent(fn, a: float, b: float) -> float:
    fa, fb = fn(a), fn(b)
    if not (math.isfinite(fa) and math.isfinite(fb)) or fa * fb > 0:
        return float(a if math.isfinite(fa) and (abs(fa) <= abs(fb) or not math.isfinite(fb))
                     else b)
    xtol = 8 * float(np.finfo(float).eps) * max(abs(a), abs(b))
    return float(optimize.brentq(fn, a, b, xtol=xtol, maxiter=200))
