"""Arithmetic checks of a fitted-model document, with the writer's rounding as tolerance.

A document's numbers are tied together: raw_coefficients are the basis coefficients converted
to powers of u, raw_covariance the converted basis covariance. The writer forms both in
double precision from the conversion matrix ``T`` (:func:`service.core.polynomial.design.
conversion`), which cancels heavily on narrow, off-centre x ranges, so the checks allow the
rounding that conversion can leave (a few ulps of the absolute sums), never a fixed fraction
of the result. Everything is evaluated in extended precision, so no magnitude a fit writes
overflows. :mod:`service.core.models.reader` calls these and names the field.
"""

from __future__ import annotations

import math

import numpy as np

from service.core.polynomial import design

EPS = float(np.finfo(float).eps)


def curve_gap(v, basis, raw, p):
    """Compare the raw-power curve with the basis curve over the calibrated range.

    Parameters
    ----------
    v : dict
        The document's scalar fields as read (x_shift, x_scale, degree, intercept).
    basis, raw : ndarray
        basis_coefficients and raw_coefficients (NaN where the document has null).
    p : int
        Number of coefficients.

    Returns
    -------
    evaluable : bool
        The basis curve can be evaluated in double precision over t in [-1, 1].
    gap, size, rounding : ndarray
        At 7 points of the calibrated range (extended precision): the difference of the
        two curves, the sum of the magnitudes of their terms, and the rounding the
        writer's conversion may leave in the difference.

    Notes
    -----
    The writer converts with the conversion matrix ``T`` rounded to double, which leaves
    up to an ulp of ``sum_j |u^j| sum_k |T_jk b_k|`` in the raw curve: far more than an
    ulp of its terms when the conversion cancels (narrow, off-centre ranges). A null raw
    entry (outside the double range when written) is taken as its expected value: it
    carries nothing to compare.
    """
    conversion = design.conversion(v["x_shift"], v["x_scale"], v["degree"], v["intercept"])
    expected = conversion @ basis.astype(design.EXTENDED)
    raw = np.where(np.isnan(raw), expected, raw.astype(design.EXTENDED))
    first = 0 if v["intercept"] else 1
    powers = np.arange(first, first + p)
    grid = np.linspace(-1.0, 1.0, 7)
    t = grid[:, None] ** powers[None, :]
    evaluable = bool(np.all(np.isfinite(np.abs(basis)[None, :] * t).sum(axis=1))
                     and np.all(np.isfinite(basis * basis)))
    u = (design.EXTENDED(v["x_shift"]) + design.EXTENDED(v["x_scale"])
         * grid.astype(design.EXTENDED))
    u_powers = u[:, None] ** powers[None, :]
    terms_raw, terms_exp = raw[None, :] * u_powers, expected[None, :] * u_powers
    gap = np.abs(terms_raw.sum(axis=1) - terms_exp.sum(axis=1))
    size = np.abs(terms_raw).sum(axis=1) + np.abs(terms_exp).sum(axis=1)
    rounding = 8 * p * EPS * (np.abs(u_powers) @ (np.abs(conversion) @ np.abs(
        basis.astype(design.EXTENDED))))
    return evaluable, gap, size, rounding


def covariance_symmetric(v, covariance, r_factor) -> bool:
    """Whether raw_covariance is symmetric up to the rounding of its conversion from the basis.

    Parameters
    ----------
    v : dict
        The document's scalar fields as read (sigma, x_shift, x_scale, degree, intercept).
    covariance, r_factor : ndarray
        raw_covariance (NaN where null) and r_factor.

    Returns
    -------
    bool

    Notes
    -----
    The writer forms ``T C T'`` (``C = sigma² R^-1 R^-T`` on the basis, ``T`` the conversion
    to raw powers), which cancels heavily on narrow, off-centre x ranges: an entry and its
    mirror then differ by a few ulps of ``|T| |C| |T|'``, far more than of the entry itself.
    """
    finite = np.isfinite(covariance)
    if not np.array_equal(finite, finite.T):
        return False
    gap = np.abs(covariance - covariance.T)
    allowed = 1e-9 * np.abs(covariance)
    sigma = v["sigma"]
    if math.isfinite(sigma):
        conversion = np.abs(design.conversion(v["x_shift"], v["x_scale"], v["degree"],
                                              v["intercept"]))
        try:
            r_inv = np.linalg.inv(r_factor)
        except np.linalg.LinAlgError:
            r_inv = np.full_like(r_factor, np.nan)
        basis_cov = np.abs((sigma * r_inv) @ (sigma * r_inv).T).astype(design.EXTENDED)
        rounding = (conversion @ basis_cov @ conversion.T).astype(float)
        rounding = np.where(np.isfinite(rounding), rounding, 0.0)
        allowed = np.maximum(allowed, 16 * covariance.shape[0] * EPS * rounding)
    return bool(np.all(gap[finite] <= allowed[finite]))
