"""Raw-power coefficients and standard errors against a 60-digit least-squares fit (mpmath).

``fit_series`` reads a well-conditioned fit out in float64
(``kernels_raw.float64_readout``) and repeats an ill-conditioned one in
extended precision; either way the raw coefficients and their standard errors
must carry the digits the precision check promises (``FLOAT64_TOL`` = 1e-12,
estimated; asserted here at 1e-11 relative). The oracle is an independent
computation: the normal equations of the raw-power design solved with mpmath
at 60 significant digits (exact enough that its own rounding is irrelevant).
"""

from __future__ import annotations

from unittest import mock

import mpmath
import numpy as np
import pytest

from service.core import FitOptions, ModelSpec, fit_series
from service.core.polynomial import design
from service.core.polynomial.compiled import raw as kernels_raw

NO_GRID = FitOptions(grid=None)


def _reference(x, y, w, degree):
    """Raw coefficients and their standard errors, 60 digits (weighted normal equations)."""
    with mpmath.workdps(60):
        xs = [mpmath.mpf(float(v)) for v in x]
        ys = [mpmath.mpf(float(v)) for v in y]
        ws = [mpmath.mpf(1) if w is None else mpmath.mpf(float(v)) for v in w] if w is not None \
            else [mpmath.mpf(1)] * len(xs)
        p = degree + 1
        a = mpmath.matrix(p, p)
        b = mpmath.matrix(p, 1)
        for xi, yi, wi in zip(xs, ys, ws, strict=True):
            powers = [xi ** k for k in range(p)]
            for i in range(p):
                b[i] += wi * powers[i] * yi
                for j in range(p):
                    a[i, j] += wi * powers[i] * powers[j]
        inv = a ** -1
        coef = inv * b
        rss = sum(wi * (yi - sum(coef[k] * xi ** k for k in range(p))) ** 2
                  for xi, yi, wi in zip(xs, ys, ws, strict=True))
        s2 = rss / (len(xs) - p)
        se = [mpmath.sqrt(s2 * inv[k, k]) for k in range(p)]
        return np.array([float(c) for c in coef]), np.array([float(s) for s in se])


CASES = [(offset, degree, weighted) for offset in (0.0, 50.0, 3e3)
         for degree in (1, 2, 4) for weighted in (False, True)]


@pytest.mark.parametrize(("offset", "degree", "weighted"), CASES)
def test_raw_coefficients_and_errors_match_60_digit_fit(offset, degree, weighted):
    rng = np.random.default_rng(int(offset) + 10 * degree + weighted)
    n = 40
    x = offset + np.sort(rng.uniform(0.0, 10.0, n))
    t = x - offset
    y = 2.0 + 0.5 * t - 0.03 * t**2 + 0.001 * t**degree + rng.normal(0.0, 0.2, n)
    w = rng.uniform(0.5, 3.0, n) if weighted else None
    seen = []
    real = kernels_raw.float64_readout

    def spy(*args):
        out = real(*args)
        seen.append(bool(out[0]))
        return out

    with mock.patch.object(kernels_raw, "float64_readout", side_effect=spy):
        rep = fit_series(x, y, w, model=ModelSpec(degree=degree), options=NO_GRID)
    coef, se = _reference(x, y, w, degree)
    got = np.array([c.estimate for c in rep.coefficients])
    got_se = np.array([c.std_error for c in rep.coefficients])
    np.testing.assert_allclose(got, coef, rtol=1e-11, atol=0)
    np.testing.assert_allclose(got_se, se, rtol=1e-11, atol=0)
    if offset == 0.0 and degree <= 2:
        assert seen == [True]  # well conditioned: the float64 read-out was used


def test_readout_refuses_a_conversion_that_cancels():
    # basis coefficients of y = u² on u in [1e4 - 0.5, 1e4 + 0.5] (t = (u - s)/c): the raw
    # constant and slope are differences of terms ~1e8, so float64 keeps almost none of
    # their digits; R = I isolates the conversion
    s, c = 1e4, 0.5
    tm = design.conversion_float(s, c, 2, True)
    b = np.array([s * s, 2 * s * c, c * c])
    eye = np.eye(3)
    ok, *_ = kernels_raw.float64_readout(eye, eye, b, 3, tm, 1.0, 1e-12)
    assert not ok
    # the same coefficients with nothing to convert (s = 0, c = 1): read out exactly
    tm0 = design.conversion_float(0.0, 1.0, 2, True)
    ok, coef, r64, raw, cov, lost, cond, raw_cond = kernels_raw.float64_readout(
        eye, eye, b, 3, tm0, 2.0, 1e-12)
    assert ok and not lost
    np.testing.assert_array_equal(raw, b)
    np.testing.assert_array_equal(cov, 2.0 * eye)
    assert cond == 1.0
