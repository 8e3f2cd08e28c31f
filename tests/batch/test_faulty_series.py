"""Faulty series get errors or flags for exactly those series; the rest are fitted correctly.

Oracle for the good fits: statsmodels OLS on the raw powers of x (its params,
bse, rsquared) — fine at these sizes and degrees; the outlier check uses
statsmodels' Bonferroni outlier test on the same fit, at the flags' per-test level
(``TEST_ALPHA`` = 0.01: five tests under a family-wise 0.05).
"""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm

from service.core import DataError, DesignError, ModelSpec
from service.core.batch.driver import fit_batch, fit_many
from service.core.checks.flags import TEST_ALPHA
from tests.batch.conftest import ragged_series, rel


def _batch():
    series = [(x, y) for x, y, _ in ragged_series(99, 40, sorted_x=True)]
    faults = {}
    series[3] = (np.array([1.0]), np.array([2.0]))                       # too short
    faults[3] = DesignError
    series[8] = (np.full(25, 4.0), series[8][1][:25])                      # constant x
    faults[8] = DesignError
    x, y = series[13]
    y = y.copy()
    y[5] = np.nan                                                          # missing value
    series[13] = (x, y)
    faults[13] = DataError
    series[21] = (series[21][0], series[21][1][:-3])                       # mismatched lengths
    faults[21] = DataError
    x, y = series[30]
    y = y.copy()
    y[7] += 1e4                                                            # one absurd outlier
    series[30] = (x, y)
    return series, faults


def test_errors_for_exactly_the_faulty_series_and_correct_fits_for_the_rest():
    series, faults = _batch()
    model = ModelSpec(max_degree=3, select="bic")
    result = fit_batch(series, model=model)
    assert set(result.errors) == set(faults)
    for row, kind in faults.items():
        assert isinstance(result.errors[row], kind), (row, result.errors[row])
        assert result.errors[row].field and result.errors[row].fix
    assert result.n_ok == len(series) - len(faults)
    for g, (x, y) in enumerate(series):
        if g in faults:
            assert not result.ok[g]
            continue
        d = int(result.columns["degree"][g])
        ols = sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit()
        assert rel(result.coefficients[g, :d + 1], ols.params) < 1e-8, g
        assert rel(result.std_errors[g, :d + 1], ols.bse) < 1e-8, g
        assert rel(result.columns["r_squared"][g], ols.rsquared) < 1e-9, g


def test_the_absurd_outlier_is_flagged_with_its_index():
    series, _ = _batch()
    result = fit_batch(series, model=ModelSpec(max_degree=3, select="bic"))
    assert "outliers" in result.flag_codes(30)
    assert result.outliers[30] == (7,)
    x, y = series[30]
    d = int(result.columns["degree"][30])
    ols = sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit()
    table = ols.outlier_test(method="bonferroni", alpha=TEST_ALPHA)  # statsmodels' own test
    assert list(np.flatnonzero(table[:, 2] < TEST_ALPHA)) == [7]
    for g, (xg, yg) in enumerate(series):   # every other series: as statsmodels says
        if not result.ok[g]:
            continue
        dg = int(result.columns["degree"][g])
        fit = sm.OLS(yg, np.vander(xg, dg + 1, increasing=True)).fit()
        expected = tuple(np.flatnonzero(fit.outlier_test(method="bonferroni")[:, 2] < TEST_ALPHA))
        assert result.outliers.get(g, ()) == expected, g
    influential = [g for g in range(len(series)) if result.ok[g] and
                   ("influential_points", "caution") in result.flag_severities(g)]
    assert influential == [30]   # only the absurd point is an outlier that moves its fit


def test_missing_values_can_be_dropped_per_series():
    series, _ = _batch()
    from service.core import FitOptions

    result = fit_batch(series, model=ModelSpec(degree=2), options=FitOptions(missing="drop"))
    assert result.ok[13]
    assert result.reports[13].dropped == (5,)
    x, y = series[13]
    keep = ~np.isnan(y)
    ols = sm.OLS(y[keep], np.vander(x[keep], 3, increasing=True)).fit()
    assert rel(result.coefficients[13, :3], ols.params) < 1e-8


def test_non_finite_and_bad_weights_are_errors_of_their_series_only():
    rng = np.random.default_rng(5)
    x = np.tile(np.linspace(0.0, 1.0, 20), 4)
    y = 1.0 + x + rng.normal(0.0, 0.1, x.size)
    w = np.ones_like(x)
    y[25] = np.inf       # series 1
    w[47] = -1.0         # series 2
    result = fit_many(x, y, [20, 20, 20, 20], w, model=ModelSpec(degree=1))
    assert set(result.errors) == {1, 2}
    assert result.errors[1].field == "y[5]"
    assert result.errors[2].field == "weights[7]"
    assert result.ok[[0, 3]].all()


def test_an_invalid_shared_model_fails_every_series_with_the_same_typed_error():
    from service.core import SpecError

    result = fit_batch([(np.arange(10.0), np.arange(10.0))] * 3,
                       model=ModelSpec(max_degree=3, select="no_such_method"))
    assert set(result.errors) == {0, 1, 2}
    assert all(isinstance(e, SpecError) for e in result.errors.values())


def test_values_too_large_or_too_small_for_float64_sums_are_refused_like_fit_series():
    from service.core import FitOptions, fit_series

    rng = np.random.default_rng(1)
    x = np.linspace(0.0, 1.0, 50)
    series = [(x, m * (1.0 + x + rng.normal(0.0, 0.1, 50))) for m in
              (1e100, 1e152, 1e153, 1e160, 1e-160, 1e-140)]
    series.append((np.linspace(0.0, 1e160, 50), rng.normal(size=50)))
    model = ModelSpec(degree=1)
    result = fit_batch(series, model=model)
    for g, (xs, ys) in enumerate(series):
        try:
            fit_series(xs, ys, model=model, options=FitOptions(grid=None))
        except DataError as exc:
            assert result.errors[g].field == exc.field, g
        else:
            assert result.ok[g], g
    assert set(result.errors) == {2, 3, 4, 6}
