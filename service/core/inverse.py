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

The interval is the piece of that set containing the estimate. Its limits are
found on each side by Newton steps on ``f(t) - y0 = ±q sigma sqrt(...)``
(vectorized over readings, started from the delta-method half-width), checked
for a sign change and for no earlier crossing, with a bracketing search as the
fallback; nothing is squared, so precise calibrations keep their digits. For a
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
    "roots_unresolved": "The roots cannot be computed in double precision for this y.",
    "outside_range": "The curve reaches this y only outside the calibrated x range.",
    "multiple_roots_in_range": "Several x inside the calibrated range give this y.",
    "interval_exceeds_range": "The estimate is in range but the interval reaches outside it.",
    "interval_unbounded": "The band is too wide for the slope: the interval has no finite limit.",
    "interval_disjoint": "The band also contains the reading at other x inside the range.",
    "interval_undefined": "No residual df (sigma undefined), or unresolvable in double precision.",
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
    with np.errstate(all="ignore"):  # extreme values become statuses, never warnings
        return _invert(fitted, y, m, level)


def _invert(fitted: FittedPolynomial, y: np.ndarray, m: np.ndarray, level: float) -> Inversion:
    curve = _Curve(fitted, level)
    y_fit = transforms.apply(fitted.transform_y, y, field="y")
    if not np.all(np.isfinite(y_fit)):
        bad = int(np.flatnonzero(~np.isfinite(y_fit))[0])
        raise DataError(f"y[{bad}] = {y[bad]!r} is not finite after the {fitted.transform_y} "
                        "transform.", field=f"y[{bad}]",
                        fix="Send readings inside the range the calibration was fitted on.")
    estimates = curve.read_all(y, y_fit, m)
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
        q = float(special.stdtrit(df, 0.5 + level / 2)) if df > 0 else math.nan
        self.qs = np.float64(q) * np.float64(fitted.sigma)  # half-width per sqrt(1/m + w)
        u_ends = transforms.apply(fitted.transform_x, np.array([fitted.x_min, fitted.x_max]),
                                  field="fitted_model.x_min")
        t_ends = (u_ends - fitted.x_shift) / fitted.x_scale
        self.t_lo, self.t_hi = float(np.min(t_ends)), float(np.max(t_ends))
        self.tol = 1e-9 * max(1.0, self.t_hi - self.t_lo)
        self.far = 1e6 * max(1.0, self.t_hi - self.t_lo)
        slope_roots = _real_roots(self.slope)
        self.turning = sorted(t for t in slope_roots if self.t_lo + self.tol < t < self.t_hi
                              - self.tol and _changes_sign(self.slope, t))
        if not np.any(self.slope):
            self.turning = [self.t_lo]  # flat curve: nothing can be read back
        self.monotone = not self.turning

    def to_x(self, t_values) -> list[float]:
        u = self.fitted.x_shift + self.fitted.x_scale * np.asarray(t_values, dtype=float)
        return [float(v) for v in transforms.inverse(self.fitted.transform_x, u)]

    def in_range(self, t: float) -> bool:
        return self.t_lo - self.tol <= t <= self.t_hi + self.tol

    def gap(self, t, y0, m):
        """(f(t) - y0)^2 - (q sigma)^2 (1/m + w(t)): <= 0 where the band contains y0."""
        return (P.polyval(t, self.coef) - y0) ** 2 - self.qs ** 2 * (1.0 / m + P.polyval(t, self.w))

    # --- all readings
    def read_all(self, y, y_t, m) -> tuple[InverseEstimate, ...]:
        roots = _batch_roots(self.coef, y_t)
        chosen = np.full(len(y), np.nan)
        picks = []
        for i, row in enumerate(roots):
            inside = [r for r in row if self.in_range(r)] if row is not None else []
            if row is None:
                status, row = "roots_unresolved", []
                roots[i] = row
            elif not row:
                status = "no_real_root"
            elif not inside:
                status = "outside_range"
            elif len(inside) > 1:
                status = "multiple_roots_in_range"
            else:
                status = "ok" if self.monotone else "not_monotone"
                chosen[i] = inside[0]
            picks.append(status)
        have = np.flatnonzero(np.isfinite(chosen))
        lower, upper, band = self._intervals(chosen[have], y_t[have], m[have])
        out = []
        limits = dict(zip(have.tolist(), zip(lower, upper, band, strict=True), strict=True))
        for i, row in enumerate(roots):
            others = tuple(sorted(x for x in self.to_x([r for r in row if r != chosen[i]])
                                  if math.isfinite(x)))
            if i not in limits:
                out.append(InverseEstimate(float(y[i]), int(m[i]), math.nan, math.nan, math.nan,
                                           picks[i], others))
                continue
            lo, hi, band_status = limits[i]
            status = band_status if picks[i] == "ok" else picks[i]
            x_hat, lo_x, hi_x = self.to_x([chosen[i], lo, hi])
            if not transforms.is_increasing(self.fitted.transform_x):
                lo_x, hi_x = hi_x, lo_x
            out.append(InverseEstimate(float(y[i]), int(m[i]), x_hat, lo_x, hi_x, status, others))
        return tuple(out)

    def _intervals(self, t_hat, y0, m):
        """Interval limits in t and a band status for each estimate (vectorized)."""
        count = len(t_hat)
        if not math.isfinite(self.qs) or count == 0:
            return [math.nan] * count, [math.nan] * count, ["interval_undefined"] * count
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


def _batch_roots(coef: np.ndarray, y_t: np.ndarray) -> list[list[float] | None]:
    """Real roots of f(t) - y for every y (companion matrices, eigenvalues in one call).

    None for a y whose companion matrix overflows (far beyond the curve's scale).
    """
    coef = np.trim_zeros(np.asarray(coef, dtype=float), "b")
    d = len(coef) - 1
    if d < 1:
        return [[] for _ in y_t]
    rows = np.tile(coef, (len(y_t), 1))
    rows[:, 0] -= y_t
    monic = rows[:, :-1] / coef[-1]
    companion = np.zeros((len(y_t), d, d))
    companion[:, 1:, :-1] = np.eye(d - 1)
    companion[:, :, -1] = -monic
    usable = np.all(np.isfinite(companion), axis=(1, 2))
    values = np.full((len(y_t), d), np.nan, dtype=complex)
    if usable.any():
        values[usable] = np.linalg.eigvals(companion[usable])
    real = np.abs(values.imag) <= _REAL_TOL * (1.0 + np.abs(values.real))
    t = values.real.copy()
    slope = P.polyder(coef)
    with np.errstate(all="ignore"):
        for _ in range(2):  # Newton polish of every candidate at once
            d_t = P.polyval(t, slope)
            step = np.where(d_t != 0, (P.polyval(t, coef) - y_t[:, None]) / d_t, 0.0)
            t = np.where(np.isfinite(step), t - step, t)
    return [sorted(float(v) for v in t[i][real[i] & np.isfinite(t[i])]) if usable[i] else None
            for i in range(len(y_t))]


def _real_roots(coef: np.ndarray) -> list[float]:
    """Real roots of a polynomial given on t^0..t^d (trailing zeros trimmed)."""
    coef = np.trim_zeros(np.asarray(coef, dtype=float), "b")
    if len(coef) < 2 or not np.all(np.isfinite(coef)):
        return []
    roots = P.polyroots(coef)
    keep = np.abs(roots.imag) <= _REAL_TOL * (1.0 + np.abs(roots.real))
    return [float(r) for r in roots.real[keep]]


def _changes_sign(coef: np.ndarray, t: float) -> bool:
    step = 1e-6 * (1.0 + abs(t))
    return P.polyval(t - step, coef) * P.polyval(t + step, coef) < 0
