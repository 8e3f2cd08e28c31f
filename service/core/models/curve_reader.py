"""The reader of one nonlinear calibration curve: its grid, monotonicity, bands and the
search for one reading.

:class:`CurveReader` holds what every reading of a curve shares (the dense grid over the
calibrated range, the curve and its slope there, whether it is monotone, the bands per
replicate count, the ladder beyond the range) and the search for one reading
(:meth:`CurveReader.read`): the method is described in
:mod:`service.core.models.curve_inverse`. The batched search
(:mod:`service.core.models.curve_batch`) uses the same grid, bands and ladder, and this
search as its fallback and reference.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, special

from service.core.checks.exact_fit import NO_RESIDUAL_VARIANCE, no_residual_variance
from service.core.models.inverse import InverseEstimate
from service.core.nonlinear.analysis import predict
from service.core.nonlinear.builtin.domain import curve_needs_nonnegative_x
from service.core.nonlinear.problem import MODEL_FAILURES
from service.core.nonlinear.report import FittedCurve

GRID_POINTS = 2049
FAR_WIDTHS = 1e6  # how far beyond the range a root or an interval limit is looked for
_EPS = float(np.finfo(float).eps)


def sensitivity(fitted: FittedCurve, x) -> np.ndarray:
    """Slope ``dy/dx`` of the fitted curve at each x (exact derivative of the equation)."""
    with np.errstate(all="ignore"):
        return fitted.model.derivative_x(np.atleast_1d(np.asarray(x, dtype=float)),
                                         fitted.estimates)



class CurveReader:
    """The grid, monotonicity and per-reading root and interval search of one curve."""

    def __init__(self, fitted: FittedCurve, level: float) -> None:
        self.fitted, self.level = fitted, level
        self.lo, self.hi = fitted.x_min, fitted.x_max
        self.width = self.hi - self.lo
        self.grid = _grid(self.lo, self.hi)
        self.values = self.f(self.grid)
        slope = sensitivity(fitted, self.grid)
        # the slope may vanish or be unbounded at an end of the range without the curve
        # ceasing to be strictly monotone there (a log-dose logistic at a zero dose: 0 for
        # slope > 1, infinite for slope < 1); the inner grid must keep one strict sign
        finite = np.all(np.isfinite(self.values)) and np.all(np.isfinite(slope[1:-1]))
        inner = np.sign(slope[1:-1])
        ends = np.nan_to_num(np.sign(slope[[0, -1]]), nan=0.0)
        self.monotone = bool(finite and ((np.all(inner > 0) and np.all(ends >= 0))
                                         or (np.all(inner < 0) and np.all(ends <= 0))))
        self.turning_points = self._turning(slope) if finite else ()
        self._bands: dict[float, tuple[np.ndarray, np.ndarray]] = {}
        self._grid_fit: tuple[np.ndarray, np.ndarray] | None = None
        self.crit = _critical_value(fitted, level)
        # x = 0 is the domain edge of a log-dose (or power-of-x) curve: nothing lies below
        self.nonnegative = curve_needs_nonnegative_x(fitted.family, fitted.expression)

    def f(self, x) -> np.ndarray:
        return self.fitted.model.values(np.atleast_1d(np.asarray(x, dtype=float)),
                                        self.fitted.estimates)

    def _turning(self, slope: np.ndarray) -> tuple[float, ...]:
        change = np.flatnonzero(np.sign(slope[:-1]) * np.sign(slope[1:]) < 0)
        return tuple(_brent(lambda x: float(sensitivity(self.fitted, [x])[0]),
                            self.grid[i], self.grid[i + 1]) for i in change)

    # --- the estimate
    def read(self, y0: float, m: int, weight: float = 1.0) -> InverseEstimate:
        """One reading (the mean of ``m`` readings of weight ``weight``) read back."""
        gap = self.values - y0
        inside = _crossings(self.grid, gap, lambda x: float(self.f([x])[0] - y0))
        if not inside:
            outside = self._outside_root(y0)
            status = "no_real_root" if outside is None else "outside_range"
            others = () if outside is None else (outside,)
            return InverseEstimate(y0, m, math.nan, math.nan, math.nan, status, others)
        if len(inside) > 1:
            return InverseEstimate(y0, m, math.nan, math.nan, math.nan,
                                   "multiple_roots_in_range", tuple(inside))
        x_hat = inside[0]
        lower, upper, status = self._interval(x_hat, y0, m * weight)
        if not self.monotone:
            status = "not_monotone"
        return InverseEstimate(y0, m, x_hat, lower, upper, status, ())

    def _outside_root(self, y0: float) -> float | None:
        """The nearest x beyond the range where the curve reaches ``y0``, or None."""
        for end, ladder in ((self.lo, self.ladder(-1)), (self.hi, self.ladder(+1))):
            found = _first_crossing(end, ladder, lambda x: self.f(x) - y0)
            if found is not None:
                return found
        return None

    def ladder(self, direction: int) -> np.ndarray:
        """Points beyond one end of the range, outward, where roots and interval limits
        outside it are looked for.

        Parameters
        ----------
        direction : {-1, +1}
            Below ``x_min`` (-1) or above ``x_max`` (+1).

        Returns
        -------
        ndarray
            A geometric ladder of range widths (from 2^-12 widths up to
            :data:`FAR_WIDTHS`), and, towards zero from a positive ``x_min``, halvings of
            ``x_min`` and 0 itself, so curves defined for x > 0 are probed up to their
            edge; ordered moving away from the range. Below a curve defined for x >= 0
            only (:attr:`nonnegative`) the ladder stops at 0 (empty when ``x_min`` is 0).
        """
        end = self.hi if direction > 0 else self.lo
        steps = end + direction * self.width * 2.0 ** np.arange(-12, math.log2(FAR_WIDTHS) + 1)
        if direction < 0 and self.lo > 0:
            steps = np.concatenate([steps[steps > 0], self.lo * 2.0 ** -np.arange(1, 60),
                                    [0.0]])
            steps = np.sort(steps)[::-1]
        elif direction < 0 and self.nonnegative:
            steps = steps[steps >= 0]
        return steps

    def holds_at_edge(self, y0, m) -> np.ndarray:
        """Whether the band for the mean of ``m`` readings contains ``y0`` at x = 0, the
        domain edge of a curve defined for x >= 0 only (always False for other curves):
        where a lower limit found no crossing, it is cut there (``interval_at_domain_edge``).
        ``y0`` and ``m`` are arrays (one per reading) or scalars."""
        y0, m = np.atleast_1d(y0), np.atleast_1d(m)
        if not self.nonnegative:
            return np.zeros(y0.shape, dtype=bool)
        with np.errstate(invalid="ignore"):
            return self.outside_band(np.zeros(y0.shape), y0, m) <= 0

    # --- the interval
    def band(self, m: float) -> tuple[np.ndarray, np.ndarray]:
        """The observation band's ``lower, upper`` on :attr:`grid` for the mean of ``m``
        new readings (``m``: replicate count times weight; variance ``noise_variance / m``),
        a row of :meth:`band_table` kept per ``m``; NaN where the curve or its band is not
        finite."""
        if m not in self._bands:
            lower, upper = self.band_table(np.array([float(m)]))
            self._bands[m] = (lower[0], upper[0])
        return self._bands[m]

    def band_table(self, m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The bands for many (weighted) replicate counts at once: one row per ``m``, one
        column per grid point, ``fit -+ crit sqrt(se_fit^2 + noise_variance / m)`` (the
        formula of :func:`~service.core.nonlinear.analysis.predict`, from its fit and
        se_fit on the grid, computed once)."""
        if self._grid_fit is None:
            at_grid = predict(self.fitted, self.grid, level=self.level, m=1)
            self._grid_fit = (np.asarray(at_grid.fit), np.asarray(at_grid.se_mean))
        fit, se = self._grid_fit
        with np.errstate(all="ignore"):
            spread = self.crit * np.sqrt(se[None, :] ** 2
                                         + self.fitted.noise_variance / m[:, None])
        return fit[None, :] - spread, fit[None, :] + spread

    def outside_band(self, x, y0: float, m: int) -> np.ndarray:
        """``max(lower - y0, y0 - upper)`` of the band for the mean of m readings at each x:
        negative where the band contains y0. The band of
        :func:`~service.core.nonlinear.analysis.predict` (same formula, same critical value),
        evaluated without its bookkeeping: the interval search calls this dozens of times
        per reading."""
        xs = np.atleast_1d(np.asarray(x, dtype=float))
        fitted = self.fitted
        try:
            fit, grad = fitted.model.values_and_jacobian(xs, fitted.estimates)
            fit, grad = np.array(fit, dtype=float), np.array(grad, dtype=float)
        except MODEL_FAILURES:
            return np.full(xs.shape, np.nan)
        if fit.shape != xs.shape or grad.shape != (xs.size, fitted.estimates.size):
            return np.full(xs.shape, np.nan)
        se_fit = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", grad, fitted.covariance, grad),
                                    0.0))
        spread = self.crit * np.sqrt(se_fit ** 2 + fitted.noise_variance / m)
        out = np.maximum((fit - spread) - y0, y0 - (fit + spread))
        out[~(np.isfinite(fit) & np.isfinite(grad).all(axis=1))] = np.nan
        return out

    def limit_beyond(self, direction: int, y0: float, m: int) -> float | None:
        """The interval limit on one side when the band contains y0 up to that end of the
        range: the first sign change on the ladder beyond it, or None (unbounded)."""
        end = self.lo if direction < 0 else self.hi
        return _first_crossing(end, self.ladder(direction),
                               lambda x: self.outside_band(x, y0, m))

    def _interval(self, x_hat: float, y0: float, m: int) -> tuple[float, float, str]:
        if no_residual_variance(self.fitted):  # an exact fit: no interval can be given
            return math.nan, math.nan, NO_RESIDUAL_VARIANCE
        lower, upper = self.band(m)
        if not (np.all(np.isfinite(lower)) and np.all(np.isfinite(upper))):
            return math.nan, math.nan, "interval_undefined"
        h = np.maximum(lower - y0, y0 - upper)

        def h_scalar(x: float) -> float:
            return float(self.outside_band(x, y0, m)[0])

        limits = []
        for direction in (-1, +1):
            side = (self.grid < x_hat) if direction < 0 else (self.grid > x_hat)
            xs, hs = self.grid[side], h[side]
            if direction < 0:
                xs, hs = xs[::-1], hs[::-1]
            out = np.flatnonzero(hs > 0)
            if out.size:
                k = int(out[0])
                near = x_hat if k == 0 else float(xs[k - 1])
                limits.append(_brent(h_scalar, *sorted((near, float(xs[k])))))
            else:
                limits.append(self.limit_beyond(direction, y0, m))
        at_edge = limits[0] is None and bool(self.holds_at_edge(y0, m)[0])
        lo_x = 0.0 if at_edge else math.nan if limits[0] is None else limits[0]
        hi_x = math.nan if limits[1] is None else limits[1]
        if math.isnan(lo_x) or limits[1] is None:
            return lo_x, hi_x, "interval_unbounded"
        if at_edge:
            return lo_x, hi_x, "interval_at_domain_edge"
        if lo_x < self.lo or hi_x > self.hi:
            return lo_x, hi_x, "interval_exceeds_range"
        elsewhere = (self.grid < lo_x) | (self.grid > hi_x)
        if np.any(h[elsewhere] <= 0):
            return lo_x, hi_x, "interval_disjoint"
        return lo_x, hi_x, "ok"


def _grid(lo: float, hi: float) -> np.ndarray:
    """``GRID_POINTS`` equally spaced over the range, joined (for a positive range) by as
    many geometrically spaced: dose-response curves on a dose axis spanning decades turn
    in the first few percent of the range."""
    grid = np.linspace(lo, hi, GRID_POINTS)
    if lo > 0:
        grid = np.union1d(grid, np.geomspace(lo, hi, GRID_POINTS))
        grid[0], grid[-1] = lo, hi
    return grid


def _crossings(grid: np.ndarray, gap: np.ndarray, fn) -> list[float]:
    """Every x in the range where ``gap`` (fn on the grid) is zero or changes sign."""
    roots = []
    for i in np.flatnonzero(gap == 0.0):
        roots.append(float(grid[i]))
    for i in np.flatnonzero(np.sign(gap[:-1]) * np.sign(gap[1:]) < 0):
        roots.append(_brent(fn, grid[i], grid[i + 1]))
    return sorted(roots)


def _first_crossing(start: float, ladder: np.ndarray, fn) -> float | None:
    """The first sign change of ``fn`` walking from ``start`` along ``ladder`` (outward),
    skipping points where fn is not finite; refined by Brent's method. ``fn`` takes an
    array of x (the whole ladder is evaluated in one call)."""
    value = float(fn(np.array([start]))[0])
    if not math.isfinite(value):
        return None
    previous = start
    steps = np.asarray(ladder, dtype=float)
    values = np.asarray(fn(steps), dtype=float)
    for x, current in zip(steps.tolist(), values.tolist(), strict=True):
        if not math.isfinite(current):
            continue
        if current == 0.0:
            return float(x)
        if (current > 0) != (value > 0):
            a, b = sorted((previous, float(x)))
            return _brent(lambda t: float(fn(np.array([t]))[0]), a, b)
        previous, value = float(x), current
    return None


def _critical_value(fitted: FittedCurve, level: float) -> float:
    """The two-sided critical value of the bands at ``level`` (as in ``predict``)."""
    if fitted.distribution == "normal":
        return float(-special.ndtri(0.5 * (1.0 - level)))
    if fitted.df_residual > 0:
        return float(-special.stdtrit(fitted.df_residual, 0.5 * (1.0 - level)))
    return math.nan


def _brent(fn, a: float, b: float) -> float:
    """Brent's method on a bracket found on a grid; when re-evaluating an end at one point
    lands on the other side by rounding (no sign change left), the end nearer zero."""
    fa, fb = fn(a), fn(b)
    if not (math.isfinite(fa) and math.isfinite(fb)) or fa * fb > 0:
        return float(a if abs(fa) <= abs(fb) or not math.isfinite(fb) else b)
    xtol = 4 * _EPS * max(abs(a), abs(b), 1e-300)
    return float(optimize.brentq(fn, a, b, xtol=xtol, rtol=4 * _EPS, maxiter=200))
