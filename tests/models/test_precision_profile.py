"""The precision profile (CV of a back-calculated concentration) of logistic4 calibrations.

Oracle: a seeded Monte Carlo of back-calculated values, independent of the service's
code: 10,000 draws of the parameters from N(estimates, covariance) and of the mean of m
new readings from N(f(x0), sigma^2/m), each read back through the textbook closed-form
inverse of the four-parameter logistic, x = ec50 ((y_left - y)/(y - y_right))^(1/slope).
The delta-method CV agrees with the Monte Carlo CV within 5% where it is small (7% and
under); towards the 20% limit the inverse is visibly nonlinear and the first-order CV is
optimistic on the upper-plateau side, which the last test pins down (a known limit of the
method, documented in service/core/models/precision_profile.py). The series are seeded
invented designs (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core import ModelSpec, fit_series
from service.core.models.precision_profile import back_calculated_cv, precision_profile
from tests.core.nonlinear.builtin_designs import cases

DRAWS, M = 10_000, 2


def _fitted(seed: int):
    case = cases("logistic4", 1, seed)[0]
    report = fit_series(case.x, case.y, model=ModelSpec(family="logistic4", scale="log"))
    assert report.model.parameter_names == ("y_left", "y_right", "slope", "ec50")
    return report.model


def _monte_carlo_cv(fitted, x0: float, seed: int) -> float:
    rng = np.random.default_rng(seed)
    theta = rng.multivariate_normal(fitted.estimates, fitted.covariance, DRAWS)
    y_true = fitted.model.values(np.array([x0]), fitted.estimates)[0]
    y = y_true + np.sqrt(fitted.noise_variance / M) * rng.standard_normal(DRAWS)
    y_left, y_right, slope, ec50 = theta.T
    with np.errstate(all="ignore"):
        x = ec50 * ((y_left - y) / (y - y_right)) ** (1.0 / slope)
    finite = np.isfinite(x)
    assert finite.mean() == 1.0  # every draw read back: no truncation of the distribution
    return float(np.std(x) / x0)


@pytest.mark.parametrize("seed", [11, 12, 15])
def test_the_working_range_ends_sit_at_the_limit(seed):
    fitted = _fitted(seed)
    profile = precision_profile(fitted, replicates=M)
    assert profile.available
    assert fitted.x_min <= profile.lower < profile.upper <= fitted.x_max
    ends = back_calculated_cv(fitted, [profile.lower, profile.upper], replicates=M)
    np.testing.assert_allclose(ends, 0.2, rtol=1e-9)
    inside = (profile.x > profile.lower) & (profile.x < profile.upper)
    assert np.all(profile.cv[inside] <= 0.2)


@pytest.mark.parametrize("seed", [11, 12])  # seed 15's curve has no CV under 7% (13% at best)
def test_small_cvs_match_a_monte_carlo_of_back_calculated_values(seed):
    fitted = _fitted(seed)
    profile = precision_profile(fitted, replicates=M)
    xs = np.geomspace(profile.lower, profile.upper, 9)[1:-1]
    cvs = back_calculated_cv(fitted, xs, replicates=M)
    checked = 0
    for x0, cv in zip(xs, cvs, strict=True):
        if cv <= 0.07:
            assert abs(_monte_carlo_cv(fitted, x0, seed) / cv - 1.0) <= 0.05, (x0, cv)
            checked += 1
    assert checked >= 2


def test_the_upper_end_is_optimistic_against_the_monte_carlo():
    # at the upper end of the working range (towards the upper plateau) the first-order
    # CV is 20% while the Monte Carlo CV is larger: the end is an optimistic bound
    fitted = _fitted(11)
    profile = precision_profile(fitted, replicates=M)
    with np.errstate(all="ignore"):
        rng = np.random.default_rng(7)
        theta = rng.multivariate_normal(fitted.estimates, fitted.covariance, DRAWS)
        y = (fitted.model.values(np.array([profile.upper]), fitted.estimates)[0]
             + np.sqrt(fitted.noise_variance / M) * rng.standard_normal(DRAWS))
        x = theta[:, 3] * ((theta[:, 0] - y) / (y - theta[:, 1])) ** (1.0 / theta[:, 2])
    x = x[np.isfinite(x)]
    assert np.std(x) / profile.upper > 0.2 * 1.05


def test_other_families_have_no_profile():
    case = cases("exponential", 1, 11)[0]
    fitted = fit_series(case.x, case.y, model=ModelSpec(family="exponential")).model
    profile = precision_profile(fitted)
    assert not profile.available and "logistic4" in profile.reason
