"""The calibration curve in t with its prediction band, and the classical interval limits.

See :mod:`service.core.models.inverse` for the method. :class:`CalibrationCurve`
precomputes the fitted polynomial, its slope and the band's variance
polynomial once per request; :meth:`CalibrationCurve.intervals` finds the
limits on each side of the estimates (vectorized Newton steps, verified, with
a bracketing search as the fallback) and gives each a band status.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.polynomial import polynomial as P
from scipy import optimize, special

from service.core.checks.exact_fit import NO_RESIDUAL_VARIANCE, no_residual_variance
from service.core.checks.known_sd import KNOWN_SD, normal_quantile
from service.core.data import transforms
from service.core.models.inverse_roots import changes_sign, real_roots
from service.core.results import FittedPolynomial


class CalibrationCurve:
    """The fitted polynomial in t, with its band, precomputed once per request."""

    def __init__(self, fitted: FittedPolynomial, level: float) -> None:
        self.fitted = fitted
        self.k0 = 0 if fitted.intercept else 1
        self.coef = np.concatenate([np.zeros(self.k0), np.asarray(fitted.basis_coefficients)])
        self.slope = P.polyder(self.coef)
        r_inv = np.linalg.inv(np.asarray(fitted.r_factor, dtype=float))  # p <= 13
        gram_inv = np.zeros((len(self.coef), len(self.coef)))
        gram_inv[self.k0:, self.k0:] = r_inv @ r_inv.T
        # w(t) = ||R^-T v(t)||^2 = sum_ij M_ij t^(i+j), as polynomial coefficients in t
        self.w = np.zeros(2 * len(self.coef) - 1)
        for i in range(len(self.coef)):
            self.w[i:i + len(self.coef)] += gram_inv[i]
        self.dw = P.polyder(self.w)
        df = int(fitted.df_residual)
        # the upper tail from 1 - level (exact); 0.5 + level / 2 rounds to 1 near level 1
        if fitted.weighting == KNOWN_SD:  # known SDs: sigma is 1, the normal quantile
            q = normal_quantile(level)
        else:
            q = -float(special.stdtrit(df, (1.0 - level) / 2)) if df > 0 else math.nan
        self.qs = np.float64(q) * np.float64(fitted.sigma)  # half-width per sqrt(1/m + w)
        u_ends = transforms.apply(fitted.transform_x, np.array([fitted.x_min, fitted.x_max]),
                                  field="fitted_model.x_min")
        t_ends = (u_ends - fitted.x_shift) / fitted.x_scale
        self.t_lo, self.t_hi = float(np.min(t_ends)), float(np.max(t_ends))
        self.tol = 1e-9 * max(1.0, self.t_hi - self.t_lo)
        self.far = 1e6 * max(1.0, self.t_hi - self.t_lo)
        slope_roots = real_roots(self.slope)
        self.turning = sorted(t for t in slope_roots if self.t_lo + self.tol < t < self.t_hi
                              - self.tol and changes_sign(self.slope, t))
        if not np.any(self.slope):
            self.turning = [self.t_lo]  # flat curve: nothing can be read back
        self.monotone = not self.turning

    def to_x(self, t_values) -> list[float]:
        """Map scaled t values back to x on the original scale."""
        u = self.fitted.x_shift + self.fitted.x_scale * np.asarray(t_values, dtype=float)
        return [float(v) for v in transforms.inverse(self.fitted.transform_x, u)]

    def in_range(self, t: float) -> bool:
        """Whether t lies in the calibrated range (within the tolerance)."""
        return self.t_lo - self.tol <= t <= self.t_hi + self.tol

    def at_domain_edge(self, lo: float) -> bool:
        """Whether the lower limit ``lo`` (t; NaN: none found) lies at or past x = 0, the edge
        of an x transform defined for x > 0 (log, log10) or x >= 0 (sqrt): the limit is then
        cut at x = 0 (status ``interval_at_domain_edge`` when the upper limit is finite)."""
        name = self.fitted.transform_x
        if name not in ("log", "log10", "sqrt"):
            return False
        if math.isnan(lo):  # the band holds the reading down to t = -far: to x -> 0
            return True
        return name == "sqrt" and self.fitted.x_shift + self.fitted.x_scale * lo < 0.0

    def gap(self, t, y0, m):
        """(f(t) - y0)^2 - (q sigma)^2 (1/m + w(t)): <= 0 where the band contains y0."""
        return (P.polyval(t, self.coef) - y0) ** 2 - self.qs ** 2 * (1.0 / m + P.polyval(t, self.w))

    def intervals(self, t_hat, y0, m):
        """Interval limits in t and a band status for each estimate (vectorized)."""
        count = len(t_hat)
        if not math.isfinite(self.qs) or count == 0:
            return [math.nan] * count, [math.nan] * count, ["interval_undefined"] * count
        if no_residual_variance(self.fitted):  # an exact fit: a zero-width interval misleads
            return [math.nan] * count, [math.nan] * count, [NO_RESIDUAL_VARIANCE] * count
        m = m.astype(float)
        rise = np.sign(P.polyval(t_hat, self.slope))
        rise[rise == 0] = 1.0
        half = self.qs * np.sqrt(1.0 / m + P.polyval(t_hat, self.w))
        step = half / np.maximum(np.abs(P.polyval(t_hat, self.slope)), 1e-300)
        resolved = self.gap(t_hat, y0, m) <= 0   # false only for numerically extreme models
        ends = []
        for side in (-1.0, 1.0):
            t = self._newton(t_hat + side * np.minimum(step, self.far), y0, m, side * rise)
            ok = self._verified(t, t_hat, y0, m, side) | ~resolved
            t[~resolved] = math.nan
            for j in np.flatnonzero(~ok):
                t[j] = self._search(float(t_hat[j]), float(y0[j]), float(m[j]), side,
                                    float(step[j]))
            ends.append(t)
        elsewhere = self._elsewhere(ends[0], ends[1], y0, m)
        statuses = []
        for j in range(count):
            lo, hi = ends[0][j], ends[1][j]
            if not resolved[j]:
                statuses.append("interval_undefined")
            elif not (math.isfinite(lo) and math.isfinite(hi)):
                statuses.append("interval_unbounded")
            elif not (self.in_range(lo) and self.in_range(hi)):
                statuses.append("interval_exceeds_range")
            else:
                statuses.append("interval_disjoint" if elsewhere[j] else "ok")
        return ends[0].tolist(), ends[1].tolist(), statuses

    def _newton(self, t, y0, m, sign):
        """Newton steps on h(t) = f(t) - y0 - sign * q sigma sqrt(1/m + w(t))."""
        with np.errstate(all="ignore"):
            for _ in range(8):
                root = np.sqrt(1.0 / m + P.polyval(t, self.w))
                h = P.polyval(t, self.coef) - y0 - sign * self.qs * root
                dh = P.polyval(t, self.slope) - sign * self.qs * P.polyval(t, self.dw) / (2 * root)
                t = t - h / dh
        return t

    def _verified(self, t, t_hat, y0, m, side):
        """Newton landed on the first crossing on this side: a sign change, none before it."""
        with np.errstate(all="ignore"):
            ok = np.isfinite(t) & (side * (t - t_hat) > 0) & (np.abs(t) < self.far)
            eps = 1e-9 * np.abs(t - t_hat)
            ok &= (self.gap(t - side * eps, y0, m) <= 0) & (self.gap(t + side * eps, y0, m) > 0)
            inner = t_hat[:, None] + (t - t_hat)[:, None] * np.linspace(0.0, 0.999, 24)[None, :]
            ok &= np.all(self.gap(inner, y0[:, None], m[:, None]) <= 0, axis=1)
        return ok

    def _search(self, t_hat, y0, m, side, step) -> float:
        """Fallback: expand geometrically from the estimate to a sign change, then bracket."""
        step = step if math.isfinite(step) and step > 0 else 1e-3
        previous = t_hat
        if not self.gap(t_hat, y0, m) <= 0:  # the estimate itself is not resolved
            return math.nan
        ratio = self.far / step
        steps = int(4 * math.log2(ratio)) + 2 if 2.0 < ratio < math.inf else 4400
        for k in range(min(steps, 4400)):  # geometric, out to the horizon `far`
            t = t_hat + side * math.exp(math.log(step) + 0.25 * k * math.log(2.0))
            if abs(t - t_hat) > self.far:
                return math.nan
            value = self.gap(t, y0, m)
            if not np.isfinite(value):
                return math.nan
            if value > 0:
                a, b = sorted((previous, t))
                try:
                    return float(optimize.brentq(lambda s: self.gap(s, y0, m), a, b,
                                                 xtol=1e-15, rtol=4 * np.finfo(float).eps,
                                                 maxiter=200))
                except (ValueError, RuntimeError):  # no clean sign change in double precision
                    return math.nan
            previous = t
        return math.nan

    def _elsewhere(self, lo, hi, y0, m, chunk: int = 2048) -> np.ndarray:
        """Whether the band also contains y0 elsewhere in the range (129-point grid check)."""
        grid = np.linspace(self.t_lo, self.t_hi, 129)[None, :]
        found = np.zeros(len(y0), dtype=bool)
        with np.errstate(invalid="ignore"):
            for a in range(0, len(y0), chunk):
                b = slice(a, a + chunk)
                away = (grid < lo[b, None] - self.tol) | (grid > hi[b, None] + self.tol)
                inside = self.gap(grid, y0[b, None], m[b, None]) <= 0
                found[b] = np.any(away & inside, axis=1)
        return found
