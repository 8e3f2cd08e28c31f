"""Compiled built-in curves of the nonlinear batch: values and exact Jacobians per family.

Each compiled family has an integer id (:data:`COMPILED`, by family name and x
scale). A curve is evaluated in two steps: :func:`prepass` computes its
transcendental part at every point in one branch-free loop (which the compiler
vectorizes), then :func:`point` the value and the gradient at one point from
it. The equations and the parameter order are those of
:mod:`service.core.nonlinear.builtin` (``tests/batch`` holds the batch to the single
fit); the conditionally linear parameters come first in every order, and their
Jacobian columns are the linear basis of the start search (:func:`basis`):

* logistic4, log scale: ``y_right + (y_left - y_right)/(1 + z)``,
  ``z = (x/ec50)^slope = exp(slope (ln x - ln ec50))`` (``z = 0`` at x = 0 for
  slope > 0, with zero derivatives, as the compiled equation gives);
* logistic4, linear scale: the same with ``z = exp(slope (x - ec50))``;
* exponential: ``plateau + (y0 - plateau) exp(-k x)``;
* michaelis_menten: ``vmax x/(km + x)``;
* logistic_growth: ``asymptote/(1 + exp(-rate (x - inflection)))``;
* gompertz: ``asymptote exp(-exp(-rate (x - inflection)))``;
* power: ``coefficient x^exponent`` (x >= 0; at x = 0 the derivative in the exponent is
  0 for exponent > 0);
* gaussian_peak: ``baseline + height exp(-(x - centre)^2/(2 width^2))``;
* weibull: ``plateau + (y0 - plateau) exp(-v)``, ``v = (x/tau)^shape`` computed on
  ``u = ln x`` like logistic4's log scale (``v = 0`` at x = 0 for shape > 0).

logistic5 (both scales) and biexponential are in :mod:`.curves_models_extra`; every
built-in family has a compiled kernel.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from service.core.batch import curves_models_extra as extra
from service.core.batch.curves_models_extra import BIEXPONENTIAL, L5_LINEAR, L5_LOG

_SUM = {"reassoc", "nsz"}  # vectorized sums only; no assumption about NaN or infinity

(L4_LOG, L4_LINEAR, EXPONENTIAL, MICHAELIS_MENTEN, LOGISTIC_GROWTH, GOMPERTZ, POWER,
 GAUSSIAN_PEAK, WEIBULL) = range(9)
COMPILED = {("logistic4", "log"): L4_LOG, ("logistic4", "linear"): L4_LINEAR,
            ("exponential", "linear"): EXPONENTIAL,
            ("michaelis_menten", "linear"): MICHAELIS_MENTEN,
            ("logistic_growth", "linear"): LOGISTIC_GROWTH, ("gompertz", "linear"): GOMPERTZ,
            ("power", "linear"): POWER, ("gaussian_peak", "linear"): GAUSSIAN_PEAK,
            ("weibull", "linear"): WEIBULL, ("logistic5", "log"): L5_LOG,
            ("logistic5", "linear"): L5_LINEAR, ("biexponential", "linear"): BIEXPONENTIAL}
"""Family id by ``(family name, x scale)``."""

N_PARAMETERS = (4, 4, 3, 2, 3, 3, 2, 4, 4, 5, 5, 4)
"""Parameters of each family id."""

LINEAR_COLUMNS = (2, 2, 2, 1, 1, 1, 1, 2, 2, 2, 2, 2)
"""Conditionally linear parameters of each family id (the first ones of the order)."""


@numba.njit(cache=True, nogil=True, error_model="numpy")
def on_log_x(fid):
    """True when the family's ``u`` is ``ln x`` (-inf at x = 0)."""
    return fid == L4_LOG or fid == WEIBULL or fid == L5_LOG


@numba.njit(cache=True, nogil=True, error_model="numpy")
def constants(fid, theta):
    """Per-call constants of :func:`prepass` and :func:`point` (logistic4: the centre on
    the u scale and ``d z / d ec50`` over z)."""
    if fid == L4_LOG:
        return math.log(theta[3]), -theta[2] / theta[3]
    if fid == L4_LINEAR:
        return theta[3], -theta[2]
    if fid == WEIBULL:
        return math.log(theta[2]), 0.0
    if fid >= L5_LOG:
        return extra.constants(fid, theta)
    return 0.0, 0.0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def prepass(fid, theta, c0, u, buf):
    """The transcendental part of the curve at every point, in one branch-free loop:
    logistic4 ``1/(1 + z)``, exponential ``exp(-k u)``, michaelis_menten ``1/(km + u)``,
    logistic_growth ``1/(1 + exp(-rate (u - inflection)))``, gompertz
    ``exp(-rate (u - inflection))``, power ``u^exponent``, gaussian_peak the bell,
    weibull ``v``."""
    n = u.size
    if fid == L4_LOG or fid == L4_LINEAR:
        slope = theta[2]
        for i in range(n):
            buf[i] = 1.0 / (1.0 + math.exp(slope * (u[i] - c0)))
    elif fid == EXPONENTIAL:
        k = theta[2]
        for i in range(n):
            buf[i] = math.exp(-k * u[i])
    elif fid == MICHAELIS_MENTEN:
        km = theta[1]
        for i in range(n):
            buf[i] = 1.0 / (km + u[i])
    elif fid == LOGISTIC_GROWTH:
        rate, mid = theta[1], theta[2]
        for i in range(n):
            buf[i] = 1.0 / (1.0 + math.exp(-rate * (u[i] - mid)))
    elif fid == GOMPERTZ:
        rate, mid = theta[1], theta[2]
        for i in range(n):
            buf[i] = math.exp(-rate * (u[i] - mid))
    elif fid == POWER:
        power = theta[1]
        for i in range(n):
            buf[i] = u[i] ** power
    elif fid == GAUSSIAN_PEAK:
        centre, width = theta[2], theta[3]
        for i in range(n):
            t = (u[i] - centre) / width
            buf[i] = math.exp(-0.5 * t * t)
    elif fid >= L5_LOG:
        extra.prepass(fid, theta, c0, u, buf)
    else:
        shape = theta[3]
        for i in range(n):
            buf[i] = math.exp(shape * (u[i] - c0))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def point(fid, theta, c0, c1, ui, bi, row):
    """The curve at one point (returned) and its gradient into ``row`` (p values), from
    the point's :func:`prepass` value ``bi``."""
    if fid >= L5_LOG:
        return extra.point(fid, theta, c0, c1, ui, bi, row)
    if fid == L4_LOG or fid == L4_LINEAR:
        span = theta[0] - theta[1]
        dg = -bi * (1.0 - bi) * span           # d g / d (slope (u - c0)), g = 1/(1 + z)
        d = ui - c0 if ui > -np.inf else 0.0   # x = 0 on the log scale: g = 1, flat
        row[0], row[1], row[2], row[3] = bi, 1.0 - bi, dg * d, dg * c1
        if ui == -np.inf and not theta[2] > 0:
            return np.nan
        return theta[1] + span * bi
    if fid == EXPONENTIAL:
        row[0], row[1], row[2] = bi, 1.0 - bi, -(theta[0] - theta[1]) * ui * bi
        return theta[1] + (theta[0] - theta[1]) * bi
    if fid == MICHAELIS_MENTEN:
        g = ui * bi
        row[0], row[1] = g, -theta[0] * g * bi
        return theta[0] * g
    if fid == LOGISTIC_GROWTH:
        dg = theta[0] * bi * (1.0 - bi)
        row[0], row[1], row[2] = bi, dg * (ui - theta[2]), -dg * theta[1]
        return theta[0] * bi
    if fid == GOMPERTZ:
        e = math.exp(-bi)
        de = theta[0] * e * bi
        row[0], row[1], row[2] = e, de * (ui - theta[2]), -de * theta[1]
        return theta[0] * e
    if fid == POWER:
        row[0], row[1] = bi, theta[0] * bi * math.log(ui) if ui > 0 else 0.0
        return theta[0] * bi
    if fid == GAUSSIAN_PEAK:
        d = ui - theta[2]
        w2 = theta[3] * theta[3]
        hb = theta[1] * bi
        row[0], row[1], row[2], row[3] = 1.0, bi, hb * d / w2, hb * d * d / (w2 * theta[3])
        return theta[0] + hb
    e = math.exp(-bi)                          # weibull, bi = v
    span = theta[0] - theta[1]
    d = ui - c0 if ui > -np.inf else 0.0
    row[0], row[1] = e, 1.0 - e
    row[2], row[3] = span * e * bi * theta[3] / theta[2], -span * e * bi * d
    if ui == -np.inf and not theta[3] > 0:
        return np.nan
    return theta[1] + span * e


@numba.njit(cache=True, nogil=True, error_model="numpy")
def has_curvature(fid):
    """True when :func:`curvature` gives the family's second derivatives (logistic4)."""
    return fid == L4_LOG or fid == L4_LINEAR


@numba.njit(cache=True, nogil=True, error_model="numpy")
def curvature(fid, theta, c0, c1, ui, bi, hess):
    """Second derivatives of the curve at one point into ``hess`` (p x p, lower triangle),
    from the point's :func:`prepass` value ``bi``; logistic4 only (:func:`has_curvature`).

    With ``eta = slope (u - c)``, ``c = ln ec50`` (log scale) or ``ec50``, and
    ``g = 1/(1 + exp eta)``: ``g' = -g (1 - g)``, ``g'' = g' (2g - 1)``; the curve is
    ``y_right + span g`` and ``eta``'s derivatives are ``u - c`` (slope), ``c1`` (ec50),
    ``-c'`` (slope, ec50) and ``-slope c''`` (ec50 twice).
    """
    span = theta[0] - theta[1]
    g1 = -bi * (1.0 - bi)
    g2 = g1 * (2.0 * bi - 1.0)
    d = ui - c0 if ui > -np.inf else 0.0
    if fid == L4_LOG:
        dc, eta_ee = 1.0 / theta[3], theta[2] / (theta[3] * theta[3])
    else:
        dc, eta_ee = 1.0, 0.0
    hess[0, 0] = hess[1, 0] = hess[1, 1] = 0.0
    hess[2, 0], hess[3, 0] = g1 * d, g1 * c1
    hess[2, 1], hess[3, 1] = -g1 * d, -g1 * c1
    hess[2, 2] = span * g2 * d * d
    hess[3, 2] = span * (g2 * d * c1 - g1 * dc)
    hess[3, 3] = span * (g2 * c1 * c1 + g1 * eta_ee)


@numba.njit(cache=True, nogil=True, error_model="numpy", fastmath=_SUM)
def _all_finite(f, jac):
    total = 0.0                     # NaN or inf anywhere makes the sum NaN
    for i in range(f.size):
        total += 0.0 * f[i]
    for j in range(jac.shape[0]):
        for i in range(jac.shape[1]):
            total += 0.0 * jac[j, i]
    return total == 0.0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def evaluate(fid, theta, u, f, jac):
    """Curve values ``f`` and Jacobian ``jac`` (p x n: one row per parameter) of family
    ``fid`` at ``theta``; ``u`` is x on the family's scale (``ln x`` on the log scale,
    -inf at x = 0). Returns False when a value or derivative is not finite."""
    c0, c1 = constants(fid, theta)
    prepass(fid, theta, c0, u, f)
    row = np.empty(jac.shape[0])
    for i in range(u.size):
        f[i] = point(fid, theta, c0, c1, u[i], f[i], row)
        for j in range(row.size):
            jac[j, i] = row[j]
    return _all_finite(f, jac)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def basis(fid, nonlinear, u, cols, work):
    """The conditionally linear columns at the nonlinear values (start search): the
    Jacobian rows of the linear parameters, into ``cols`` (m x n). False when a column is
    not finite. ``work``: scratch of at least ``2 p + n`` values (no allocation per call)."""
    lin, p = cols.shape[0], N_PARAMETERS[fid]
    theta, row, buf = work[:p], work[p:2 * p], work[2 * p:2 * p + u.size]
    for j in range(lin):
        theta[j] = 0.0
    for j in range(p - lin):
        theta[lin + j] = nonlinear[j]
    c0, c1 = constants(fid, theta)
    prepass(fid, theta, c0, u, buf)
    total = 0.0
    for i in range(u.size):
        point(fid, theta, c0, c1, u[i], buf[i], row)
        for k in range(lin):
            cols[k, i] = row[k]
            total += 0.0 * row[k]
    return total == 0.0
