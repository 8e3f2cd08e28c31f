"""Degree-selection rules and band formulas, checked against statsmodels numbers.

The rules are the documented ones (service/core/polynomial/selection.py): hierarchical
candidates; sequential_f adds the next power while its partial F against the larger
model's residual mean square is significant; the criteria pick the minimum (AIC,
AICc, BIC, PRESS) or maximum (adjusted R²). Oracles: statsmodels OLS results of each
candidate (aic, bic, rsquared_adj, partial F via compare_f_test, get_prediction).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats
import statsmodels.api as sm

from service.core import FitOptions, GridSpec, ModelSpec, fit_series, predict


def _data(seed, n=40):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0, 4, n))
    y = 1 + 0.5 * x - 0.4 * x**2 + 0.08 * x**3 + rng.normal(0, 0.15, n)
    return x, y


def _ols(x, y, degree):
    return sm.OLS(y, np.vander(x, degree + 1, increasing=True)).fit()


@pytest.mark.parametrize("seed", range(6))
def test_sequential_f_follows_the_documented_rule(seed):
    x, y = _data(seed)
    rep = fit_series(x, y, model=ModelSpec(max_degree=5, min_degree=1, select="sequential_f"))
    fits = {d: _ols(x, y, d) for d in range(1, 6)}
    expected = 1
    for d in range(2, 6):
        # oracle: statsmodels compare_f_test (larger model against the smaller one)
        f, p, _ = fits[d].compare_f_test(fits[d - 1])
        if p >= 0.05:
            break
        expected = d
    assert rep.selection.chosen_degree == expected
    assert rep.selection.reason.startswith(f"Degree {expected}")
    assert [c.degree for c in rep.selection.candidates] == [1, 2, 3, 4, 5]


@pytest.mark.parametrize("method,attr,pick", [
    ("aic", "aic", np.argmin), ("bic", "bic", np.argmin), ("adj_r2", "rsquared_adj", np.argmax),
])
def test_criteria_pick_the_statsmodels_optimum(method, attr, pick):
    for seed in range(4):
        x, y = _data(100 + seed)
        rep = fit_series(x, y, model=ModelSpec(max_degree=5, min_degree=1, select=method))
        values = [getattr(_ols(x, y, d), attr) for d in range(1, 6)]  # oracle
        assert rep.selection.chosen_degree == 1 + int(pick(values))


def test_press_and_aicc_pick_their_table_minimum():
    x, y = _data(7)
    for method in ("press", "aicc"):
        rep = fit_series(x, y, model=ModelSpec(max_degree=5, select=method))
        cands = rep.selection.candidates
        values = [getattr(c, method) for c in cands]
        assert rep.selection.chosen_degree == cands[int(np.argmin(values))].degree


def test_fixed_degree_reports_fixed_method():
    x, y = _data(1)
    sel = fit_series(x, y, model=ModelSpec(degree=2)).selection
    assert sel.method == "fixed" and sel.chosen_degree == 2 and len(sel.candidates) == 1


@pytest.mark.parametrize("m", [1, 4])
def test_observation_band_for_mean_of_m_and_working_hotelling(m):
    x, y = _data(3)
    res = _ols(x, y, 2)
    gx = np.array([0.0, 1.3, 3.9, 5.0])
    fitted = fit_series(x, y, model=ModelSpec(degree=2)).model
    pr = predict(fitted, gx, level=0.9, m=m)
    frame = res.get_prediction(np.vander(gx, 3, increasing=True)).summary_frame(alpha=0.1)
    # oracle numbers: statsmodels mean_se and scale; formulas are textbook (common practice):
    # mean of m new observations: var = se² + sigma²/m; Working-Hotelling: sqrt(p F(p, df))
    t = scipy.stats.t.ppf(0.95, res.df_resid)
    half = t * np.sqrt(frame["mean_se"] ** 2 + res.scale / m)
    np.testing.assert_allclose(pr.obs_lower, frame["mean"] - half, rtol=1e-9)
    np.testing.assert_allclose(pr.obs_upper, frame["mean"] + half, rtol=1e-9)
    wh = np.sqrt(3 * scipy.stats.f.ppf(0.9, 3, res.df_resid))
    np.testing.assert_allclose(pr.band_upper, frame["mean"] + wh * frame["mean_se"], rtol=1e-9)
    np.testing.assert_allclose(pr.band_lower, frame["mean"] - wh * frame["mean_se"], rtol=1e-9)
    assert pr.extrapolated.tolist() == [gx[0] < x.min(), False, gx[2] > x.max(), True]
    assert pr.level == 0.9


def test_grid_step_and_stored_model_agree_exactly():
    x, y = _data(9)
    rep = fit_series(x, y, model=ModelSpec(max_degree=4),
                     options=FitOptions(grid=GridSpec(start=-1, stop=5, step=0.25)))
    again = predict(rep.model, rep.grid.x)
    for name in ("fit", "se_mean", "mean_lower", "mean_upper", "obs_lower", "obs_upper",
                 "band_lower", "band_upper"):
        assert np.array_equal(getattr(again, name), getattr(rep.grid, name)), name
    assert "extrapolation" in {f.code for f in rep.flags}


def test_predict_leaves_the_callers_array_writable():
    x, y = _data(2)
    gx = np.linspace(0, 4, 5)
    predict(fit_series(x, y, model=ModelSpec(degree=1)).model, gx)
    gx[0] = 1.0  # results are frozen copies; the caller's array is untouched
    assert gx.flags.writeable


def test_prediction_overflow_far_outside_the_data_is_nan_not_inf():
    x, y = _data(4)
    fitted = fit_series(x, y, model=ModelSpec(degree=3)).model
    pr = predict(fitted, [1.0, 1e120])
    assert np.isfinite(pr.fit[0]) and np.isnan(pr.fit[1]) and np.isnan(pr.obs_upper[1])
    assert pr.extrapolated.tolist() == [False, True]


@pytest.mark.parametrize("start, stop, step", [(0.1, 0.7, 0.2), (0.0, 0.3, 0.1),
                                               (1.0, 2.1, 0.1), (-0.7, -0.1, 0.2)])
def test_a_step_grid_ending_on_the_data_ends_exactly_there(start, stop, step):
    # start + 3 * 0.2 is 0.7000000000000001 in doubles (Python's own arithmetic): the last
    # grid point must be the stop asked for, not past the data, which flagged it extrapolated
    x = np.linspace(start, stop, 7)
    y = 1.0 + 2.0 * x + np.random.default_rng(3).normal(0.0, 0.1, 7)
    report = fit_series(x, y, model=ModelSpec(degree=1),
                        options=FitOptions(grid=GridSpec(start=start, stop=stop, step=step)))
    assert report.grid.x[-1] == stop
    assert not report.grid.extrapolated.any()
    assert "extrapolation" not in {f.code for f in report.flags}
