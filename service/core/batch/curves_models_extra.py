"""Compiled logistic5 (log and linear x) and biexponential curves of the nonlinear batch.

The values and exact gradients of :mod:`.curves_models` for the two families whose
automatic starts are a multi-start (:mod:`.curves_multistart`); :mod:`.curves_models`
dispatches to :func:`constants`, :func:`prepass` and :func:`point` here for the ids
:data:`L5_LOG`, :data:`L5_LINEAR` and :data:`BIEXPONENTIAL`. The equations are those of
:mod:`service.core.nonlinear.builtin` with the conditionally linear parameters first:

* logistic5, parameters ``(y_left, y_right, slope, ec50, asymmetry)``:
  ``y_right + (y_left - y_right) S``, ``S = q^-asymmetry``, ``q = 1 + c z``,
  ``c = 2^(1/asymmetry) - 1`` and ``z = exp(slope (u - c0))`` with ``u = ln x``,
  ``c0 = ln ec50`` (log scale; ``z = 0`` at x = 0 for slope > 0, with zero derivatives in
  slope and ec50, as the compiled equation gives) or ``u = x``, ``c0 = ec50``. With
  ``eta = slope (u - c0)``: ``dS/deta = -asymmetry S c z / q`` and, as
  ``dc/dasymmetry = -(c + 1) ln 2 / asymmetry^2``,
  ``dS/dasymmetry = S (-ln q + (c + 1) ln 2 z / (asymmetry q))``;
* biexponential, parameters ``(a_fast, a_slow, k_fast, k_slow)`` (the report's order is
  ``a_fast, k_fast, a_slow, k_slow``: the kernel swaps the middle two on output):
  ``a_fast exp(-k_fast x) + a_slow exp(-k_slow x)``.
"""

from __future__ import annotations

import math

import numba
import numpy as np

L5_LOG, L5_LINEAR, BIEXPONENTIAL = 9, 10, 11
"""Family ids (after the nine of :mod:`.curves_models`)."""
LN2 = math.log(2.0)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def constants(fid, theta):
    """Per-call constants: logistic5's centre on the u scale and ``c = 2^(1/asymmetry) - 1``."""
    if fid == L5_LOG:
        return math.log(theta[3]), 2.0 ** (1.0 / theta[4]) - 1.0
    if fid == L5_LINEAR:
        return theta[3], 2.0 ** (1.0 / theta[4]) - 1.0
    return 0.0, 0.0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def prepass(fid, theta, c0, u, buf):
    """logistic5 ``z = exp(slope (u - c0))``, biexponential ``exp(-k_fast u)``, at every
    point in one branch-free loop."""
    n = u.size
    if fid == BIEXPONENTIAL:
        k = theta[2]
        for i in range(n):
            buf[i] = math.exp(-k * u[i])
    else:
        slope = theta[2]
        for i in range(n):
            buf[i] = math.exp(slope * (u[i] - c0))


@numba.njit(cache=True, nogil=True, error_model="numpy")
def point(fid, theta, c0, c1, ui, bi, row):
    """The curve at one point (returned) and its gradient into ``row``, from the point's
    :func:`prepass` value ``bi`` (``c1``: logistic5's ``c``)."""
    if fid == BIEXPONENTIAL:
        e2 = math.exp(-theta[3] * ui)
        row[0], row[1] = bi, e2
        row[2], row[3] = -theta[0] * ui * bi, -theta[1] * ui * e2
        return theta[0] * bi + theta[1] * e2
    slope, g, c = theta[2], theta[4], c1
    q = 1.0 + c * bi
    log_q = math.log(q)
    s = math.exp(-g * log_q)
    span = theta[0] - theta[1]
    ds = -g * s * c * bi / q                       # dS / d eta
    d = ui - c0 if ui > -np.inf else 0.0           # x = 0 on the log scale: S = 1, flat
    deta_ec50 = -slope / theta[3] if fid == L5_LOG else -slope
    ds_g = s * (-log_q + (c + 1.0) * LN2 * bi / (g * q))   # dc/dg = -(c + 1) ln 2 / g^2
    row[0], row[1] = s, 1.0 - s
    row[2], row[3], row[4] = span * ds * d, span * ds * deta_ec50, span * ds_g
    if ui == -np.inf and not slope > 0:
        return np.nan
    return theta[1] + span * s
