"""Durbin-Watson p-value: the design's moments of d, the beta approximation, the bound.

Oracles: the eigenvalues of ``MAM`` (numpy ``eigvalsh``) for the moments, and the
exact null distribution of ``d`` by Imhof's (1961) numerical inversion of the
characteristic function (scipy ``quad``) from those eigenvalues. Under the null,
``d = sum nu_i xi_i² / sum xi_i²`` (Durbin & Watson 1950), so
``P(d <= c) = P(sum (nu_i - c) xi_i² <= 0)``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, optimize

from service.core import FitOptions, ModelSpec, fit_series
from service.core.checks import durbin_watson
from service.core.checks.diagnostics import residual_diagnostics

NO_GRID = FitOptions(grid=None)


def _difference_matrix(n):
    a = 2.0 * np.eye(n) - np.eye(n, k=1) - np.eye(n, k=-1)
    a[0, 0] = a[-1, -1] = 1.0
    return a


def _eigenvalues(basis):
    """The n - p eigenvalues of M A M on the residual space (the p zeros dropped)."""
    n, p = basis.shape
    m = np.eye(n) - basis @ basis.T
    return np.sort(np.linalg.eigvalsh(m @ _difference_matrix(n) @ m))[p:]


def _exact_cdf(c, nu):
    """Imhof (1961): P(sum (nu_i - c) xi_i² <= 0) = 1/2 - (1/pi) int_0^inf sin(theta)/(u rho)."""
    lam = nu - c

    def integrand(u):
        return (np.sin(0.5 * np.sum(np.arctan(lam * u)))
                / (u * np.prod((1.0 + (lam * u) ** 2) ** 0.25)))

    value, _ = integrate.quad(integrand, 0.0, np.inf, limit=500, epsabs=1e-12)
    return 0.5 - value / np.pi


def _basis(x, p, w=None, intercept=True):
    first = 0 if intercept else 1
    v = np.vander(x, p + first, increasing=True)[:, first:]
    if w is not None:
        v = v * np.sqrt(w)[:, None]
    return np.linalg.qr(v)[0]


def _designs():
    rng = np.random.default_rng(41)
    yield "even", np.linspace(0.0, 1.0, 30), None, True
    yield "random order", rng.uniform(0.0, 1.0, 25), None, True
    yield "weighted", np.sort(rng.uniform(0.0, 1.0, 40)), rng.uniform(0.5, 3.0, 40), True
    yield "no intercept", np.sort(rng.uniform(0.5, 2.0, 20)), None, False


@pytest.mark.parametrize(("name", "x", "w", "intercept"), list(_designs()))
def test_trace_formulas_equal_the_eigenvalue_moments(name, x, w, intercept):
    for p in (1, 3):
        q = _basis(x, p, w, intercept)
        nu = _eigenvalues(q)
        tr1, tr2 = durbin_watson.design_traces(q)
        assert abs(tr1 - nu.sum()) < 1e-10 * nu.sum(), name
        assert abs(tr2 - nu @ nu) < 1e-10 * (nu @ nu), name


@pytest.mark.parametrize(("name", "x", "w", "intercept"), list(_designs()))
def test_fit_series_uses_its_own_design_moments(name, x, w, intercept):
    # the compiled single-series sums against the eigenvalues of M A M for the fit's
    # weighted basis (degree 2: p = 3 with an intercept, 2 without)
    rng = np.random.default_rng(5)
    y = 1.0 + x - 0.4 * x * x + rng.normal(0.0, 0.2, x.size)
    model = ModelSpec(degree=2, intercept=intercept)
    dw = {t.name: t for t in fit_series(x, y, w, model=model,
                                        options=NO_GRID).diagnostics.tests}["durbin_watson"]
    nu = _eigenvalues(_basis(x, 3 if intercept else 2, w, intercept))
    expected = durbin_watson.p_value(dw.statistic, nu.size, nu.sum(), nu @ nu)
    assert abs(dw.p_value - expected) <= 1e-10 * expected, name
    assert dw.note.startswith("one-sided")


@pytest.mark.parametrize("n", [8, 12, 20, 50])
@pytest.mark.parametrize("layout", ["even", "random order", "one far point"])
def test_beta_approximation_is_close_to_the_exact_distribution(n, layout):
    # measured errors (approximate minus exact p) at the exact 1% and 5% points: never
    # below -5e-4 (anti-conservative); at most 0.004 above from n = 12, 4e-4 from n = 20;
    # at n = 8 up to 0.04 above (conservative) when x is in random order
    rng = np.random.default_rng(n)
    x = np.linspace(0.0, 1.0, n) if layout == "even" else rng.uniform(0.0, 1.0, n)
    if layout == "one far point":
        x[-1] = 3.0
    q = _basis(x, 3)
    nu = _eigenvalues(q)
    tr1, tr2 = durbin_watson.design_traces(q)
    for level in (0.01, 0.05):
        c = optimize.brentq(lambda c, lv=level: _exact_cdf(c, nu) - lv, nu[0], nu[-1],
                            xtol=1e-12)
        error = durbin_watson.p_value(c, n - 3, tr1, tr2) - level
        assert error > -0.001, (n, layout, level, error)
        assert error < {8: 0.05, 12: 0.005, 20: 0.001, 50: 0.0002}[n], (n, layout, level, error)


def test_without_a_design_the_bound_is_conservative():
    # Durbin & Watson's lower bound: nu_i >= lambda_i, so P(d <= c) <= P(d_L <= c);
    # checked with the exact distribution of d at its 1% and 5% points
    rng = np.random.default_rng(9)
    for n in (12, 30, 80):
        q = _basis(rng.uniform(0.0, 1.0, n), 3)
        nu = _eigenvalues(q)
        lam = 2.0 * (1.0 - np.cos(np.pi * np.arange(n) / n))
        assert np.all(nu >= lam[:n - 3] - 1e-12)   # Cauchy interlacing
        for level in (0.01, 0.05):
            c = optimize.brentq(lambda c, lv=level, ev=nu: _exact_cdf(c, ev) - lv, nu[0],
                                nu[-1], xtol=1e-12)
            bound = durbin_watson.p_value(c, n - 3, *durbin_watson.bound_traces(n, 3))
            assert bound >= level, (n, level, bound)


def test_shared_diagnostics_with_a_basis_equal_the_polynomial_path():
    # a family that hands residual_diagnostics its residuals, leverages and basis gets the
    # polynomial fit's Durbin-Watson p-value; without the basis, the conservative bound
    rng = np.random.default_rng(12)
    x = np.sort(rng.uniform(0.0, 1.0, 40))
    y = 2.0 - x + 0.5 * x * x + 0.3 * np.cumsum(rng.normal(0.0, 0.3, 40))
    report = fit_series(x, y, model=ModelSpec(degree=2), options=NO_GRID)
    d = report.diagnostics
    q = _basis(x, 3)
    e = d.residuals
    args = (d.index, x, np.asarray(e), np.asarray(d.leverage), y, None, 3,
            float(np.asarray(e) @ np.asarray(e)), False, 40, x[:, None], "x")
    shared = {t.name: t for t in residual_diagnostics(*args, basis=q).tests}
    bound = {t.name: t for t in residual_diagnostics(*args).tests}
    ours = {t.name: t for t in d.tests}
    assert abs(shared["durbin_watson"].statistic - ours["durbin_watson"].statistic) < 1e-12
    assert abs(shared["durbin_watson"].p_value - ours["durbin_watson"].p_value) <= (
        1e-9 * ours["durbin_watson"].p_value)
    assert bound["durbin_watson"].p_value >= ours["durbin_watson"].p_value
    assert "bound" in bound["durbin_watson"].note


def test_undefined_cases_are_nan():
    assert np.isnan(durbin_watson.p_value(1.0, 1, 2.0, 4.0))      # one residual df
    assert np.isnan(durbin_watson.p_value(np.nan, 10, 20.0, 60.0))
    out = durbin_watson.p_value(np.array([0.5, 2.0]), np.array([20, 20]),
                                np.array([40.0, 40.0]), np.array([120.0, 120.0]))
    assert out.shape == (2,) and out[0] < out[1]
    # one fit's plain-float path gives the same bits as the array path (batch = fit_series)
    for args in ((0.5, 20, 40.0, 120.0), (2.0, 20, 40.0, 120.0), (0.3, 37, 77.9, 231.9)):
        assert durbin_watson.p_value_one(*args) == float(durbin_watson.p_value(*args))
    assert np.isnan(durbin_watson.p_value_one(1.0, 1, 2.0, 4.0))
