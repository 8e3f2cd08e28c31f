"""Durbin-Watson p-value for positive serial correlation, from the design's moments of d.

Under independent normal errors, the residuals of a least-squares fit are
``e = M eps`` with ``M = I - QQ'`` (``Q``: an orthonormal basis of the weighted
design, or the tangent plane of a nonlinear model), and Durbin-Watson's
``d = e'Ae / e'e`` (``A`` the first-difference matrix ``D'D``) is distributed as
``sum nu_i xi_i² / sum xi_i²`` over the ``k = n - p`` eigenvalues ``nu_i`` of ``MAM``
(Durbin & Watson 1950). Its first two moments need no eigenvalues:

* ``E d = tr(MA) / k`` and ``Var d = 2 (k tr((MA)²) - tr(MA)²) / (k² (k + 2))``;
* ``tr(MA) = 2(n - 1) - tr(G)`` and ``tr((MA)²) = (6n - 8) - 2 ||AQ||² + ||G||²``
  with ``G = (DQ)'(DQ)`` (``DQ`` the differences of consecutive basis rows).

The p-value is ``P(d <= d_obs)``: ``d / 4`` approximated by the beta distribution
with the same mean and variance (Durbin & Watson's beta approximation; quoted from
memory), evaluated by the compiled ``kernels.dw_p`` / ``kernels.beta_cdf``. Checked
against the exact distribution (Imhof 1961, numerical inversion from the
eigenvalues of ``MAM``) in ``tests/core/test_durbin_watson.py``: at the
exact 1% and 5% points it is never more than 5e-4 below the exact p-value, and at
most 0.004 above it from n = 12 (4e-4 from n = 20); at n = 8 it can be up to 0.04
above (conservative: a test with less power, not more false alarms).

Without a design basis (:func:`bound_traces`) the moments are those of Durbin &
Watson's lower bound ``d_L = sum_{i<k} lambda_i xi_i² / sum xi_i²`` with the
eigenvalues ``lambda_i = 2 (1 - cos(pi i / n))`` of ``A``: by Cauchy interlacing
``nu_i >= lambda_i``, so ``d >= d_L`` and the p-value is conservative for any
design of ``p`` columns.

The compiled sums over a design (``tr(G)``, ``||G||²``, ``||AQ||²``) are formed in
the polynomial kernels (:func:`service.core.polynomial.compiled.points.point_measures`,
:func:`service.core.batch.residuals.residual_pass`) and here for a given basis
(:func:`design_traces`); all go through :func:`traces` and :func:`p_value`
(:func:`p_value_one` for one fit).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from service.core.checks import kernels

NOTE = ("one-sided p-value for positive serial correlation in the given order (d well below "
        "2); beta approximation with the design's mean and variance of d")
NOTE_BOUND = ("one-sided p-value for positive serial correlation in the given order (d well "
              "below 2), from Durbin & Watson's lower bound (no design given: conservative)")


def traces(n, trace_g, frob_g, frob_aq):
    """``(tr(MA), tr((MA)²))`` from ``tr(G)``, ``||G||_F²`` and ``||AQ||_F²`` (n >= 2);
    elementwise on arrays, the same operations as the compiled ``kernels.dw_traces``."""
    return 2.0 * (n - 1) - trace_g, (6.0 * n - 8.0) - 2.0 * frob_aq + frob_g


def design_traces(basis: np.ndarray) -> tuple[float, float]:
    """``(tr(MA), tr((MA)²))`` for an (n, p) basis with orthonormal columns (observation order)."""
    n = basis.shape[0]
    if n < 2:
        return np.nan, np.nan
    dq = np.diff(basis, axis=0)
    g = dq.T @ dq
    aq = np.diff(np.vstack((np.zeros((1, basis.shape[1])), dq,
                            np.zeros((1, basis.shape[1])))), axis=0)
    return traces(n, float(np.trace(g)), float(np.sum(g * g)), float(np.sum(aq * aq)))


@lru_cache(maxsize=1024)
def bound_traces(n: int, p: int) -> tuple[float, float]:
    """``(sum lambda_i, sum lambda_i²)`` over the ``n - p`` smallest eigenvalues of ``A``."""
    lam = 2.0 * (1.0 - np.cos(np.pi * np.arange(max(n - p, 0)) / n)) if n > 0 else np.empty(0)
    return float(lam.sum()), float(lam @ lam)


def p_value(d, k, tr1, tr2):
    """``P(d <= d_obs)`` by the beta approximation, elementwise (NaN where undefined).

    Parameters
    ----------
    d : observed Durbin-Watson statistic.
    k : residual degrees of freedom ``n - p`` (the number of eigenvalues).
    tr1, tr2 : ``tr(MA)`` and ``tr((MA)²)`` (or the bound's sums).

    The compiled :func:`service.core.checks.kernels.dw_p` row by row, so one fit
    (:func:`p_value_one`) and a batch get the same bits.
    """
    args = (d, k, tr1, tr2)
    if all(isinstance(v, np.ndarray) and v.ndim == 1 and v.dtype == np.float64
           and v.shape == args[0].shape for v in args):    # a batch's columns
        return kernels.dw_p_many(*args)
    d, k, tr1, tr2 = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in args))
    out = kernels.dw_p_many(*(np.ascontiguousarray(v).ravel() for v in (d, k, tr1, tr2)))
    return out.reshape(d.shape)


def p_value_one(d: float, k: float, tr1: float, tr2: float) -> float:
    """:func:`p_value` of one fit (no array overhead)."""
    return float(kernels.dw_p(float(d), float(k), float(tr1), float(tr2)))
