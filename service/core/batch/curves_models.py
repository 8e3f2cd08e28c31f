"""Compiled built-in curves of the nonlinear batch: values and exact Jacobians per family.

Each compiled family has an integer id (:data:`COMPILED`, by family name and x
scale) and a branch of :func:`evaluate`, which writes the curve and its
analytic Jacobian at one parameter vector for one series. The equations and
the parameter order are those of
:mod:`service.core.nonlinear.builtin` (``tests/batch`` holds the two equal to
rounding):

* logistic4, log scale: ``y_right + (y_left - y_right)/(1 + z)``,
  ``z = (x/ec50)^slope = exp(slope (ln x - ln ec50))`` (``z = 0`` at x = 0 for
  slope > 0, with zero derivatives, as the compiled equation gives);
* logistic4, linear scale: the same with ``z = exp(slope (x - ec50))``;
* exponential: ``plateau + (y0 - plateau) exp(-k x)``;
* michaelis_menten: ``vmax x/(km + x)``.

The other built-in families are fitted series by series by the single-fit
engine (:mod:`service.core.batch.curves`).
"""

from __future__ import annotations

import math

import numba
import numpy as np

_SUM = {"reassoc", "nsz"}  # vectorized sums only; no assumption about NaN or infinity

L4_LOG, L4_LINEAR, EXPONENTIAL, MICHAELIS_MENTEN = 0, 1, 2, 3
COMPILED = {("logistic4", "log"): L4_LOG, ("logistic4", "linear"): L4_LINEAR,
            ("exponential", "linear"): EXPONENTIAL,
            ("michaelis_menten", "linear"): MICHAELIS_MENTEN}
"""Family id by ``(family name, x scale)``."""

N_PARAMETERS = (4, 4, 3, 2)
"""Parameters of each family id."""

LINEAR_COLUMNS = (2, 2, 2, 1)
"""Conditionally linear parameters of each family id (the first ones of the order)."""


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _logistic4(theta, u, log_scale, f, jac):
    left, right, slope, mid = theta[0], theta[1], theta[2], theta[3]
    span = left - right
    centre = math.log(mid) if log_scale else mid
    scale_mid = -slope / mid if log_scale else -slope
    n = u.size
    for i in range(n):                        # branch-free loops: they vectorize
        f[i] = math.exp(slope * (u[i] - centre))
    for i in range(n):
        z = f[i]
        g = 1.0 / (1.0 + z)
        f[i] = right + span * g
        dg = -g * g * span * z
        jac[0, i], jac[1, i] = g, 1.0 - g
        jac[2, i], jac[3, i] = dg * (u[i] - centre), dg * scale_mid
    if log_scale:
        for i in range(n):
            if u[i] == -np.inf:               # x = 0 on the log scale: z = 0 for slope > 0
                f[i] = left if slope > 0 else np.nan
                jac[0, i], jac[1, i], jac[2, i], jac[3, i] = 1.0, 0.0, 0.0, 0.0


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
    ``fid`` at ``theta``.

    ``u`` is the series' x on the family's scale (``ln x`` on the log scale, -inf at
    x = 0). Returns False when a value or derivative is not finite.
    """
    n = u.size
    if fid == L4_LOG or fid == L4_LINEAR:
        _logistic4(theta, u, fid == L4_LOG, f, jac)
    elif fid == EXPONENTIAL:
        y0, plateau, k = theta[0], theta[1], theta[2]
        for i in range(n):
            e = math.exp(-k * u[i])
            f[i] = plateau + (y0 - plateau) * e
            jac[0, i], jac[1, i], jac[2, i] = e, 1.0 - e, -(y0 - plateau) * u[i] * e
    else:
        vmax, km = theta[0], theta[1]
        for i in range(n):
            g = u[i] / (km + u[i])
            f[i] = vmax * g
            jac[0, i], jac[1, i] = g, -vmax * g / (km + u[i])
    return _all_finite(f, jac)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def basis(fid, nonlinear, u, cols):
    """The conditionally linear columns at the nonlinear values (start search).

    ``nonlinear`` holds the nonlinear parameters in report order (logistic4:
    slope, ec50; exponential: k; michaelis_menten: km); ``cols`` (m x n) receives
    one column per linear parameter. False when a column is not finite.
    """
    n = u.size
    for i in range(n):
        if fid == L4_LOG or fid == L4_LINEAR:
            slope, mid = nonlinear[0], nonlinear[1]
            if fid == L4_LOG:
                if u[i] == -np.inf:
                    s = 1.0 if slope > 0 else np.nan
                else:
                    s = 1.0 / (1.0 + math.exp(slope * (u[i] - math.log(mid))))
            else:
                s = 1.0 / (1.0 + math.exp(slope * (u[i] - mid)))
            cols[0, i], cols[1, i] = s, 1.0 - s
        elif fid == EXPONENTIAL:
            e = math.exp(-nonlinear[0] * u[i])
            cols[0, i], cols[1, i] = e, 1.0 - e
        else:
            cols[0, i] = u[i] / (nonlinear[0] + u[i])
    for k in range(cols.shape[0]):
        for i in range(n):
            if not math.isfinite(cols[k, i]):
                return False
    return True


@numba.njit(cache=True, nogil=True, error_model="numpy")
def constants(fid, theta):
    """Per-call constants of :func:`prepass` and :func:`point` (logistic4: the centre on
    the u scale and ``d z / d ec50`` over z)."""
    if fid == L4_LOG:
        return math.log(theta[3]), -theta[2] / theta[3]
    if fid == L4_LINEAR:
        return theta[3], -theta[2]
    return 0.0, 0.0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def prepass(fid, theta, c0, u, buf):
    """The transcendental part of the curve at every point, in one branch-free loop that
    the compiler vectorizes: logistic4 ``1/(1 + z)``, exponential ``exp(-k u)``,
    michaelis_menten ``1/(km + u)``."""
    if fid == L4_LOG or fid == L4_LINEAR:
        slope = theta[2]
        for i in range(u.size):
            buf[i] = 1.0 / (1.0 + math.exp(slope * (u[i] - c0)))
    elif fid == EXPONENTIAL:
        k = theta[2]
        for i in range(u.size):
            buf[i] = math.exp(-k * u[i])
    else:
        km = theta[1]
        for i in range(u.size):
            buf[i] = 1.0 / (km + u[i])


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def point(fid, theta, c0, c1, ui, bi, row):
    """The curve at one point (returned) and its gradient into ``row`` (p values), from
    the point's :func:`prepass` value ``bi``."""
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
    g = ui * bi
    row[0], row[1] = g, -theta[0] * g * bi
    return theta[0] * g
