"""The trust-flag rules of service.core.checks.flags on seeded invented series (demo data).

Each check builds a series with one known property and asks for the flag and
severity the rule in the flags module docstring says it gets. The rates of the
rules on many series are in tests/core/test_flag_calibration.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.core import FitOptions, ModelSpec, fit_series
from service.core.checks.flags import FAMILY_ALPHA, TEST_ALPHA, TESTED

QUADRATIC = ModelSpec(degree=2)


def _flags(x, y, include=None):
    options = FitOptions(grid=None) if include is None else FitOptions(grid=None,
                                                                      include=include)
    report = fit_series(x, y, model=QUADRATIC, options=options)
    return {f.code: f for f in report.flags}, report


def _clean(n, seed=1, x=None):
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 1.0, n) if x is None else x
    return x, 1.0 + 2.0 * x - 1.5 * x * x + rng.normal(0.0, 0.3, x.size)


def test_the_family_wise_rule_is_bonferroni_over_the_five_tests():
    assert len(TESTED) == 5 and TEST_ALPHA == pytest.approx(FAMILY_ALPHA / 5)


def test_design_leverage_alone_is_info():
    # evenly spaced: the end points always exceed 2p/n (Hoaglin & Welsch); that is the design
    x, y = _clean(30)
    flags, report = _flags(x, y)
    assert report.diagnostics.high_leverage    # the rule finds them ...
    assert flags["high_leverage"].severity == "info"   # ... and it is not a caution
    assert all(f.severity == "info" for f in flags.values())


def test_a_far_point_has_a_large_cooks_distance_but_is_info_without_an_outlier():
    rng = np.random.default_rng(3)
    x = np.r_[rng.uniform(0.0, 1.0, 19), 3.0]
    x, y = _clean(20, seed=3, x=x)
    flags, report = _flags(x, y)
    assert 19 in report.diagnostics.high_leverage
    if "influential_points" in flags:
        assert flags["influential_points"].severity == "info"
    assert "outliers" not in flags and flags["high_leverage"].severity == "info"


def test_a_spike_at_the_far_point_is_an_outlier_that_moves_the_curve():
    rng = np.random.default_rng(3)
    x = np.r_[rng.uniform(0.0, 1.0, 29), 1.3]    # leverage 0.71 > 2p/n = 0.2
    x, y = _clean(30, seed=3, x=x)
    y[29] += 3.0                                 # 10 sigma: deletion residual 4.3 > 4.13
    flags, report = _flags(x, y)
    d = report.diagnostics
    assert d.outliers == (29,) and 29 in d.influential and 29 in d.high_leverage
    assert flags["outliers"].severity == "caution"
    assert flags["influential_points"].severity == "caution"
    assert flags["influential_points"].evidence["outlying"] == (29,)
    assert flags["high_leverage"].severity == "caution"
    assert flags["high_leverage"].evidence["influential_outliers"] == (29,)


def test_serial_correlation_is_one_sided_positive():
    x = np.linspace(0.0, 1.0, 40)
    rng = np.random.default_rng(8)
    smooth = 0.3 * np.sin(12 * x) + rng.normal(0.0, 0.05, x.size)   # long runs: d << 2
    flags, report = _flags(x, 1.0 + x + smooth)
    dw = {t.name: t for t in report.diagnostics.tests}["durbin_watson"]
    assert dw.statistic < 1.0 and dw.p_value < TEST_ALPHA
    evidence = flags["serial_correlation"].evidence
    assert evidence["alternative"] == "positive" and evidence["p_value"] == dw.p_value
    assert evidence["alpha"] == TEST_ALPHA
    alternating = 0.3 * (-1.0) ** np.arange(x.size) + rng.normal(0.0, 0.05, x.size)
    flags, report = _flags(x, 1.0 + x + alternating)              # d near 4: negative
    dw = {t.name: t for t in report.diagnostics.tests}["durbin_watson"]
    assert dw.statistic > 3.0 and dw.p_value > 0.99
    assert "serial_correlation" not in flags


def test_tests_flag_at_the_per_test_level():
    # each test flag fires exactly when its p-value is below TEST_ALPHA (0.01)
    rng = np.random.default_rng(21)
    fired = {"non_normal_residuals": 0, "non_constant_variance": 0}
    for seed in range(60):
        x = np.linspace(0.0, 1.0, 40)
        noise = stats.expon.rvs(size=x.size, random_state=seed) - 1.0   # skewed
        y = 1.0 + x + 0.3 * noise * (0.2 + 2.0 * x * rng.uniform(0.0, 1.0))
        flags, report = _flags(x, y)
        tests = {t.name: t for t in report.diagnostics.tests}
        for code, name in (("non_normal_residuals", "shapiro_wilk"),
                           ("non_constant_variance", "breusch_pagan")):
            assert (code in flags) == (tests[name].p_value < TEST_ALPHA), (seed, code)
            fired[code] += code in flags
    assert all(count > 0 for count in fired.values())   # both branches were seen


def test_few_points_per_parameter_is_info():
    x, y = _clean(8)
    flags, _ = _flags(x, y)
    assert flags["few_points_per_parameter"].severity == "info"


def test_flags_are_the_same_whatever_include_returns():
    x, y = _clean(40, seed=5)
    y[10] += 3.0
    full, report = _flags(x, y)
    assert "outliers" in full
    for include in (frozenset(), frozenset({"coefficients"}), frozenset({"grid"})):
        flags, bare = _flags(x, y, include)
        assert bare.diagnostics is None
        assert bare.flags == report.flags, include
