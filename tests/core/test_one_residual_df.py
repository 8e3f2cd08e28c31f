"""With one residual degree of freedom the residual tests say nothing about the data.

The weighted residuals of a linear least-squares fit lie in the orthogonal complement of
the design's columns; with n - p = 1 that is one line, so the residuals are one fixed
vector times a scale, and every scale-free statistic of them (Shapiro-Wilk's W, Koenker's
Breusch-Pagan LM, Durbin-Watson's d) is a function of the x design alone. Oracle:
scipy.stats.shapiro gives W = 0.75 (its smallest value for 3 points) for every straight
line through 3 evenly spaced points, whatever y is, and a p-value near 0: before, every
such fit got the caution flag ``non_normal_residuals`` (seeded invented series).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.core import FitOptions, ModelSpec, fit_series
from service.core.batch.curves import fit_many_curves
from service.core.batch.driver import fit_batch

RESIDUAL_TESTS = ("shapiro_wilk", "breusch_pagan", "durbin_watson")
TEST_FLAGS = {"non_normal_residuals", "non_constant_variance", "serial_correlation"}


def _lines(count=20, seed=20261205):
    rng = np.random.default_rng(seed)
    x = np.array([1.0, 2.0, 3.0])
    return [(x, rng.normal(0.0, 1.0, 3) + 0.5 * x) for _ in range(count)]


def test_scipy_shows_the_statistic_is_fixed_by_the_design():
    for x, y in _lines():
        residuals = y - np.polyval(np.polyfit(x, y, 1), x)
        w, p = stats.shapiro(residuals)    # oracle: scipy
        assert w == pytest.approx(0.75, abs=1e-9) and p < 0.01


def test_single_fits_with_one_residual_df_run_no_residual_test():
    for x, y in _lines():
        report = fit_series(x, y, model=ModelSpec(degree=1), options=FitOptions(grid=None))
        assert report.statistics.df_residual == 1
        assert not TEST_FLAGS & {f.code for f in report.flags}
        tests = {t.name: t for t in report.diagnostics.tests}
        for name in RESIDUAL_TESTS:
            assert np.isnan(tests[name].p_value), name
            assert "one residual degree of freedom" in tests[name].note, name


def test_two_residual_df_are_still_tested():
    x = np.array([1.0, 2.0, 3.0, 4.0])
    y = np.array([1.0, 2.5, 2.0, 4.0])
    report = fit_series(x, y, model=ModelSpec(degree=1), options=FitOptions(grid=None))
    sw = next(t for t in report.diagnostics.tests if t.name == "shapiro_wilk")
    residuals = y - np.polyval(np.polyfit(x, y, 1), x)
    assert sw.statistic == pytest.approx(stats.shapiro(residuals)[0], rel=1e-9)  # oracle: scipy


def test_the_polynomial_batch_agrees():
    result = fit_batch(_lines(), model=ModelSpec(degree=1))
    assert result.ok.all()
    for name in ("shapiro_wilk_p", "breusch_pagan_p", "durbin_watson_p"):
        assert np.isnan(result.columns[name]).all(), name
    assert not TEST_FLAGS & {c for g in range(len(result)) for c, _ in result.flag_severities(g)}


def test_the_nonlinear_batch_agrees():
    rng = np.random.default_rng(7)
    x = np.array([0.0, 1.0, 2.0, 4.0])          # exponential: 3 parameters, 4 points
    ys = [1.0 + 4.0 * np.exp(-0.7 * x) + rng.normal(0.0, 0.05, 4) for _ in range(12)]
    result = fit_many_curves(np.tile(x, 12), np.concatenate(ys), [4] * 12,
                             model=ModelSpec(family="exponential"))
    fitted = np.flatnonzero(result.ok)
    assert fitted.size >= 6
    for name in ("shapiro_wilk_p", "breusch_pagan_p", "durbin_watson_p"):
        assert np.isnan(result.columns[name][fitted]).all(), name
    assert not TEST_FLAGS & {c for g in fitted for c, _ in result.flag_severities(g)}
