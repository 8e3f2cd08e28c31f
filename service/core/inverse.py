"""Reading x back from an observed y: roots, range checks and calibration intervals.

For a reading ``y0`` (the mean of ``m`` replicate readings) the estimate is the
root of ``f(t) = g(y0)`` inside the calibrated range, where ``f`` is the fitted
polynomial in the scaled basis ``t = (u - x_shift) / x_scale`` and ``g`` the y
transform. All real roots are found in ``t`` (companion matrix of a polynomial
whose roots of interest lie near [-1, 1], so it is well conditioned), then
mapped back to x.

The calibration interval is the classical one (Eisenhart 1939; Draper & Smith,
*Applied Regression Analysis*, 3rd ed., sec. 3.2 — from memory): the set of x
whose prediction band for the mean of ``m`` new readings contains ``y0``,

    (f(t) - y0)^2 <= q^2 sigma^2 (1/m + ||R^-T v(t)||^2),   q = t_{1-(1-level)/2, df}.

Its limits are real roots of a polynomial of degree 2d in ``t`` (the left side
minus the right side); the interval is the piece containing the estimate. For a
straight line this is exactly the Fieller-type interval. Nothing is silently
extrapolated: every estimate carries a ``status``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import polynomial as P
from scipy import optimize, special

from service.core import transforms
from service.core.errors import DataError, SpecError
from service.core.results import FittedPolynomial

STATUSES = {
    "ok": "A single root inside the calibrated range with a bounded interval inside it.",
    "not_monotone": "The curve turns inside the calibrated range, so one y can mean several x.",
    "no_real_root": "The fitted curve never reaches this y.",
    "outside_range": "The curve reaches this y only outside the calibrated x range.",
    "multiple_roots_in_range": "Several x inside the calibrated range give this y.",
    "interval_exceeds_range": "The estimate is in range but the interval reaches outside it.",
    "interval_unbounded": "The band is too wide for the slope: the interval has no finite limit.",
    "interval_disjoint": "The band also contains the reading at other x inside the range.",
    "interval_undefined": "No residual degrees of freedom: sigma and the interval are undefined.",
}
_REAL_TOL = 1e-7  # |imag| / (1 + |root|) below which a companion eigenvalue is real


@dataclass(frozen=True, slots=True)
class InverseEstimate:
    """One reading read back: ``x`` with its calibration interval, or a status saying why not.

    ``x``/``lower``/``upper`` are NaN when undefined. ``other_roots`` lists the
    real x (original scale, ascending) that also give ``y`` but were not chosen.
    """

    y: float
    replicates: int
    x: float
    lower: float
    upper: float
    status: str
    other_roots: tuple[float, ...]


@dataclass(frozen=True, slots=True)
class Inversion:
    """All readings of one request, plus the model-wide facts used to judge them."""

    estimates: tuple[InverseEstimate, ...]
    level: float
    monotone: bool
    turning_points: tuple[float, ...]   # x inside the range where the slope changes sign
    x_min: float
    x_max: float


def invert(fitted: FittedPolynomial, y, *, replicates=1, level: float | None = None
           ) -> Inversion:
    """Estimate x for each observed y, with classical calibration intervals.

    Parameters
    ----------
    fitted : FittedPolynomial
        The calibration curve (degree >= 1).
    y : array_like
        Observed readings on the original y scale; each is the mean of its
        ``replicates`` readings (on the fitting scale when ``transform_y`` is used).
    replicates : int or array_like of int
        ``m`` for every reading, or one count per reading (>= 1).
    level : float, optional
        Interval level; defaults to the fit's level.

    Returns
    -------
    Inversion

    Raises
    ------
    SpecError
        Degree 0, bad level, or replicates not >= 1 / wrong length.
    DataError, TransformError
        Non-finite readings, or readings outside the y transform's domain.
    """
    level = fitted.level if level is None else float(level)
    if not 0 < level < 1:
        raise SpecError("level must lie strictly between 0 and 1.", field="level",
                        fix="Use e.g. 0.95.")
    if fitted.degree < 1:
        raise SpecError("A constant model cannot be inverted.", field="fitted_model.degree",
                        fix="Fit a calibration curve of degree 1 or more.")
    y = np.atleast_1d(np.asarray(y, dtype=float))
    if not np.all(np.isfinite(y)):
        bad = int(np.flatnonzero(~np.isfinite(y))[0])
        raise DataError(f"y[{bad}] is not a finite number.", field=f"y[{bad}]",
                        fix="Send finite readings only.")
    m = _replicates(replicates, len(y))
    curve = _Curve(fitted, level)
    y_fit = transforms.apply(fitted.transform_y, y, field="y")
    if not np.all(np.isfinite(y_fit)):
        bad = int(np.flatnonzero(~np.isfinite(y_fit))[0])
        raise DataError(f"y[{bad}] = {y[bad]!r} is not finite after the {fitted.transform_y} "
                        "transform.", field=f"y[{bad}]",
                        fix="Send readings inside the range the calibration was fitted on.")
    estimates = tuple(curve.read(float(y_orig), float(y_t), int(m_i))
                      for y_orig, y_t, m_i in zip(y, y_fit, m, strict=True))
    return Inversion(estimates=estimates, level=level, monotone=curve.monotone,
                     turning_points=tuple(curve.to_x(curve.turning)), x_min=fitted.x_min,
                     x_max=fitted.x_max)


def _replicates(replicates, count: int) -> np.ndarray:
    m = np.asarray(replicates)
    if m.ndim == 0:
        m = np.full(count, m)
    if m.shape != (count,):
        raise SpecError(f"replicates must be one count or {count} counts (one per y).",
                        field="replicates", fix="Send a single integer or one per reading.")
    if not np.all(np.isfinite(m.astype(float))) or np.any(m != np.round(m)) or np.any(m < 1):
        bad = int(np.flatnonzero(~(np.isfinite(m.astype(float)) & (m >= 1)
                                   & (m == np.round(m))))[0])
        raise SpecError("replicates must be whole numbers >= 1.",
                        field="replicates" if np.ndim(replicates) == 0 else f"replicates[{bad}]",
                        fix="Give how many readings were averaged into each y.")
    return m.astype(int)


class _Curve:
    """The fitted polynomial in t, with its band, precomputed once per request."""

    def __init__(self, fitted: FittedPolynomial, level: float) -> None:
        self.fitted = fitted
        k0 = 0 if fitted.intercept else 1
        self.k0 = k0
        # coefficients of f(t) on t^0..t^d
        self.coef = np.concatenate([np.zeros(k0), np.asarray(fitted.basis_coefficients)])
        r = np.asarray(fitted.r_factor, dtype=float)
        r_inv = np.linalg.inv(r)  # tiny (p <= 13); scipy's triangular solve is slower here
        self.r_inv_t = r_inv.T
        gram_inv = r_inv @ r_inv.T                      # (R^T R)^-1 on the model's powers
        full = np.zeros((len(self.coef), len(self.coef)))
        full[k0:, k0:] = gram_inv
        # ||R^-T v(t)||^2 = sum_ij M_ij t^(i+j): polynomial coefficients in t
        self.quad = np.zeros(2 * len(self.coef) - 1)
        for i in range(len(self.coef)):
            self.quad[i:i + len(self.coef)] += full[i]
        self.sigma = float(fitted.sigma)
        df = int(fitted.df_residual)
        self.q = float(special.stdtrit(df, 0.5 + level / 2)) if df > 0 else math.nan
        u_ends = transforms.apply(fitted.transform_x, np.array([fitted.x_min, fitted.x_max]),
                                  field="fitted_model.x_min")
        t_ends = (u_ends - fitted.x_shift) / fitted.x_scale
        self.t_lo, self.t_hi = float(np.min(t_ends)), float(np.max(t_ends))
        self.tol = 1e-9 * max(1.0, self.t_hi - self.t_lo)
        self.turning = self._turning_points()
        self.monotone = len(self.turning) == 0

    # --- mapping
    def to_x(self, t_values) -> list[float]:
        t_values = np.asarray(t_values, dtype=float)
        u = self.fitted.x_shift + self.fitted.x_scale * t_values
        return [float(v) for v in transforms.inverse(self.fitted.transform_x, u)]

    def in_range(self, t: float) -> bool:
        return self.t_lo - self.tol <= t <= self.t_hi + self.tol

    def _turning_points(self) -> list[float]:
        slope = P.polyder(self.coef)
        points = [t for t in _real_roots(slope) if self.t_lo + self.tol < t < self.t_hi - self.tol
                  and _changes_sign(slope, t)]
        if np.all(slope == 0):
            points = [self.t_lo]  # flat curve: nothing can be read back
        return sorted(points)

    # --- one reading
    def read(self, y: float, y_t: float, m: int) -> InverseEstimate:
        target = self.coef.copy()
        target[0] -= y_t
        roots = sorted(_polish(target, r) for r in _real_roots(target))
        inside = [r for r in roots if self.in_range(r)]
        if not roots:
            status, chosen = "no_real_root", None
        elif not inside:
            status, chosen = "outside_range", None
        elif len(inside) > 1:
            status, chosen = "multiple_roots_in_range", None
        else:
            status, chosen = ("ok" if self.monotone else "not_monotone"), inside[0]
        others = [r for r in roots if chosen is None or r != chosen]
        nan = math.nan
        if chosen is None:
            return InverseEstimate(y, m, nan, nan, nan, status, tuple(self._x_sorted(others)))
        lower, upper, band_status = self._interval(target, chosen, m)
        if status == "ok" and band_status != "ok":
            status = band_status
        x_hat, lo_x, hi_x = self.to_x([chosen, lower, upper])
        if not transforms.is_increasing(self.fitted.transform_x):
            lo_x, hi_x = hi_x, lo_x
        return InverseEstimate(y, m, x_hat, lo_x, hi_x, status, tuple(self._x_sorted(others)))

    def _x_sorted(self, t_values) -> list[float]:
        return sorted(x for x in self.to_x(t_values) if math.isfinite(x))

    def _interval(self, target: np.ndarray, t_hat: float, m: int) -> tuple[float, float, str]:
        """Limits (in t) of the piece of {band contains y} holding t_hat, and a status."""
        if not (math.isfinite(self.q) and math.isfinite(self.sigma)):
            return math.nan, math.nan, "interval_undefined"
        k2 = (self.q * self.sigma) ** 2
        band = P.polymul(target, target)
        band = np.pad(band, (0, max(0, len(self.quad) - len(band))))
        band[:len(self.quad)] -= k2 * self.quad
        band[0] -= k2 / m
        if not np.all(np.isfinite(band)):
            return math.nan, math.nan, "interval_undefined"
        roots = [_refine(self, target, k2, m, r) for r in _real_roots(band)]
        below = [r for r in roots if r < t_hat]
        above = [r for r in roots if r > t_hat]
        lower = max(below) if below else -math.inf
        upper = min(above) if above else math.inf
        if not (math.isfinite(lower) and math.isfinite(upper)):
            return (lower if math.isfinite(lower) else math.nan,
                    upper if math.isfinite(upper) else math.nan, "interval_unbounded")
        if not (self.in_range(lower) and self.in_range(upper)):
            return lower, upper, "interval_exceeds_range"
        if self._other_pieces_in_range(target, k2, m, roots, lower, upper):
            return lower, upper, "interval_disjoint"
        return lower, upper, "ok"

    def _other_pieces_in_range(self, target, k2, m, roots, lower, upper) -> bool:
        """Whether the band also contains the reading somewhere else in the calibrated range."""
        if any(self.in_range(r) and not lower <= r <= upper for r in roots):
            return True
        ends = [t for t in (self.t_lo, self.t_hi) if not lower <= t <= upper]
        return any(self.band_gap(target, k2, m, t) <= 0 for t in ends)

    def band_gap(self, target: np.ndarray, k2: float, m: int, t: float) -> float:
        """(f(t) - y)^2 - q^2 sigma^2 (1/m + ||R^-T v(t)||^2), the residual left unsquared."""
        w = self.r_inv_t @ (t ** np.arange(self.k0, len(self.coef)))
        return P.polyval(t, target) ** 2 - k2 * (1.0 / m + float(w @ w))


def _real_roots(coef: np.ndarray) -> list[float]:
    """Real roots of a polynomial given on t^0..t^d (trailing zeros trimmed)."""
    coef = np.trim_zeros(np.asarray(coef, dtype=float), "b")
    if len(coef) < 2:
        return []
    roots = P.polyroots(coef)
    keep = np.abs(roots.imag) <= _REAL_TOL * (1.0 + np.abs(roots.real))
    return [float(r) for r in roots.real[keep]]


def _changes_sign(coef: np.ndarray, t: float) -> bool:
    step = 1e-6 * (1.0 + abs(t))
    return P.polyval(t - step, coef) * P.polyval(t + step, coef) < 0


def _polish(coef: np.ndarray, t: float) -> float:
    """Two Newton steps on the polynomial (the companion roots are already close)."""
    slope = P.polyder(coef)
    for _ in range(2):
        d = P.polyval(t, slope)
        if d == 0:
            break
        t = t - P.polyval(t, coef) / d
    return float(t)


def _refine(curve: _Curve, target: np.ndarray, k2: float, m: int, t: float) -> float:
    """Refine an interval limit on the directly evaluated band gap (no squared-coefficient loss)."""
    width = 1e-6 * (1.0 + abs(t))
    a, b = t - width, t + width
    fa, fb = curve.band_gap(target, k2, m, a), curve.band_gap(target, k2, m, b)
    if fa * fb < 0:
        return float(optimize.brentq(lambda s: curve.band_gap(target, k2, m, s), a, b,
                                     xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=100))
    return t

