"""Reading x back from an observed y: roots, range checks and calibration intervals.

For a reading ``y0`` (the mean of ``m`` replicate readings) the estimate is the
root of ``f(t) = g(y0)`` inside the calibrated range, where ``f`` is the fitted
polynomial in the scaled basis ``t = (u - x_shift) / x_scale`` and ``g`` the y
transform. All real roots are found in ``t`` (companion matrix of a polynomial
whose roots of interest lie near [-1, 1], so it is well conditioned), then
mapped back to x.

The calibration interval is the classical one (Eisenhart 1939; Draper & Smith,
*Applied Regression Analysis*, 3rd ed., sec. 3.2 — from memory): the set of x
whose prediction band for the mean of ``m`` new readings of weight ``w`` (variance
``sigma^2 / w`` each; ``w`` = 1 unless weights are given) contains ``y0``,

    (f(t) - y0)^2 <= q^2 sigma^2 (1/(m w) + ||R^-T v(t)||^2),   q = t_{1-(1-level)/2, df}.

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

from service.core.checks.exact_fit import NO_RESIDUAL_VARIANCE
from service.core.data import transforms
from service.core.data.reading_weights import reading_weights
from service.core.errors import DataError, SpecError
from service.core.models.inverse_band import CalibrationCurve
from service.core.models.inverse_roots import batch_roots
from service.core.results import FittedPolynomial
from service.core.spec import MAX_REPLICATES

STATUSES = {
    "ok": "A single root inside the calibrated range with a bounded interval inside it.",
    "not_monotone": "The curve turns inside the calibrated range, so one y can mean several x.",
    "no_real_root": "The fitted curve never reaches this y.",
    "roots_unresolved": "The roots cannot be computed in double precision for this y.",
    "outside_range": "The curve reaches this y only outside the calibrated x range.",
    "multiple_roots_in_range": "Several x inside the calibrated range give this y.",
    "interval_exceeds_range": "The estimate is in range but the interval reaches outside it.",
    "interval_unbounded": "The band is too wide for the slope: the interval has no finite limit.",
    "interval_at_domain_edge": "The band holds the reading down to x = 0, the smallest x the "
                               "curve is defined at: the lower limit is cut there (0).",
    "interval_disjoint": "The band also contains the reading at other x inside the range.",
    "interval_undefined": "No residual df (sigma undefined), or unresolvable in double precision.",
    "no_residual_variance": "The fit passes through every point (sigma = 0): x is the curve's "
                            "reading, but no interval can be given (lower and upper null).",
}


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


def invert(fitted: FittedPolynomial, y, *, replicates=1, level: float | None = None,
           weights=None) -> Inversion:
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
    weights : array_like, optional
        The weight of each reading on the fit's weight scale (default 1): each of its
        ``m`` readings has variance ``sigma^2 / weight``.

    Returns
    -------
    Inversion

    Raises
    ------
    SpecError
        Degree 0, bad level, or replicates not >= 1 / wrong length.
    DataError, TransformError
        Non-finite readings, readings outside the y transform's domain, or weights not
        one finite positive number per reading.
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
    w = reading_weights(weights, len(y))
    with np.errstate(all="ignore"):  # extreme values become statuses, never warnings
        return _invert(fitted, y, m, level, w)


def _invert(fitted: FittedPolynomial, y: np.ndarray, m: np.ndarray, level: float,
            w: np.ndarray | None = None) -> Inversion:
    curve = CalibrationCurve(fitted, level)
    y_fit = transforms.apply(fitted.transform_y, y, field="y", stored=True)
    if not np.all(np.isfinite(y_fit)):
        bad = int(np.flatnonzero(~np.isfinite(y_fit))[0])
        raise DataError(f"y[{bad}] = {float(y[bad])!r} is not finite after the "
                        f"{fitted.transform_y} transform.", field=f"y[{bad}]",
                        fix="Send readings inside the range the calibration was fitted on.")
    estimates = _read_all(curve, y, y_fit, m, w)
    return Inversion(estimates=estimates, level=level, monotone=curve.monotone,
                     turning_points=tuple(curve.to_x(curve.turning)), x_min=fitted.x_min,
                     x_max=fitted.x_max)


def _replicates(replicates, count: int) -> np.ndarray:
    """The counts as int64, checked as doubles first (a Python int past 2^63 would wrap)."""
    try:
        m = np.array(replicates, dtype=float)
    except (TypeError, ValueError, OverflowError):
        m = np.full(np.shape(replicates), np.nan)
    if m.ndim == 0:
        m = np.full(count, m)
    if m.shape != (count,):
        raise SpecError(f"replicates must be one count or {count} counts (one per y).",
                        field="replicates", fix="Send a single integer or one per reading.")
    good = np.isfinite(m) & (m >= 1) & (m <= MAX_REPLICATES) & (m == np.round(m))
    if not np.all(good):
        bad = int(np.flatnonzero(~good)[0])
        raise SpecError(f"replicates must be whole numbers from 1 to {MAX_REPLICATES}.",
                        field="replicates" if np.ndim(replicates) == 0 else f"replicates[{bad}]",
                        fix="Give how many readings were averaged into each y.")
    return m.astype(np.int64)


def _read_all(curve: CalibrationCurve, y, y_t, m, w=None) -> tuple[InverseEstimate, ...]:
    """Classify every reading by its roots, then attach interval limits where one is chosen;
    the band of a reading is for the mean of ``m`` readings of weight ``w`` (``m w`` is all
    the band uses)."""
    roots = batch_roots(curve.coef, y_t)
    chosen = np.full(len(y), np.nan)
    picks = []
    for i, row in enumerate(roots):
        inside = [r for r in row if curve.in_range(r)] if row is not None else []
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
            status = "ok" if curve.monotone else "not_monotone"
            chosen[i] = inside[0]
        picks.append(status)
    have = np.flatnonzero(np.isfinite(chosen))
    effective = m if w is None else m * w
    lower, upper, band = curve.intervals(chosen[have], y_t[have], effective[have])
    out = []
    limits = dict(zip(have.tolist(), zip(lower, upper, band, strict=True), strict=True))
    for i, row in enumerate(roots):
        others = tuple(sorted(x for x in curve.to_x([r for r in row if r != chosen[i]])
                              if math.isfinite(x)))
        if i not in limits:
            out.append(InverseEstimate(float(y[i]), int(m[i]), math.nan, math.nan, math.nan,
                                       picks[i], others))
            continue
        lo, hi, band_status = limits[i]
        edge = band_status not in ("interval_undefined", NO_RESIDUAL_VARIANCE) and \
            curve.at_domain_edge(lo)  # x cannot go below 0: the lower limit is cut there
        if edge and band_status != "interval_unbounded":  # (unbounded: no upper limit)
            band_status = "interval_at_domain_edge"
        status = band_status if picks[i] == "ok" else picks[i]
        x_hat, lo_x, hi_x = curve.to_x([chosen[i], lo, hi])
        if edge:
            lo_x = 0.0
        if not transforms.is_increasing(curve.fitted.transform_x):
            lo_x, hi_x = hi_x, lo_x
        out.append(InverseEstimate(float(y[i]), int(m[i]), x_hat, lo_x, hi_x, status, others))
    return tuple(out)
