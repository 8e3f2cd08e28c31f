"""The precision profile (CV of a back-calculated concentration) of logistic calibrations.

Oracle: a seeded Monte Carlo of back-calculated values, independent of the service's
code: 10,000 draws of the parameters from N(estimates, covariance) (drawn, not refitted)
and of the mean of m new readings from N(f(x0), sigma^2/m), f written again in numpy
(tests/core/nonlinear/builtin_designs.py), each read back through the textbook
closed-form inverse of the four- (five-) parameter logistic. A draw whose reading lies
beyond an asymptote of its curve has no concentration; it is counted at the matching
extreme (0 or +inf), which the quantiles below tolerate as long as fewer than 15.87%
of the draws fall there on either side.

The CV compared is the one the service defines (service/core/models/precision_profile.py):
half the central 68.27% range of the back-calculated values over their median,
(q84.13 - q15.87) / (2 q50). The standard deviation of the draws is no reference near a
plateau: a share of the readings there has no finite concentration (its variance is
undefined), which one test shows. "Agree within 5%" means: at each reported end of the
working range, the Monte Carlo CV is within 5% of the limit (relative); at interior
points of the profile, within 5% of the service's CV; and in x, the x where the Monte
Carlo CV crosses the limit is within 5% of the reported end (1-3% for seeds 11, 12, 15).
Over the 30 log-scale logistic4 curves of seeds 0-39 of the design below (60 ends), the
Monte Carlo CV at the ends was within 5% of the limit at 58 (mean +1.9%, largest +5.9%:
the parameters' own nonlinearity, which the delta method in the parameters leaves out);
the seeds tested
here are the ones this file used before the method changed. For logistic5 the agreement
depends on how well the asymmetry is determined: within 7% on the seeded plates below
whose asymmetry has a relative standard error under 15%, up to 42% off at the upper end
when it is 38% (documented in docs/fitted-model.md). The series are seeded invented
designs (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core import ModelSpec, fit_series
from service.core.models.precision_profile import back_calculated_cv, precision_profile
from tests.core.nonlinear.builtin_designs import _log5 as log5
from tests.core.nonlinear.builtin_designs import cases

DRAWS, M = 10_000, 2
QUANTILES = (15.865525393145708, 50.0, 84.13447460685429)  # Phi(-1), Phi(0), Phi(1) in %


def _fitted(seed: int, family: str = "logistic4"):
    case = cases(family, 1, seed)[0]
    assert case.scale == "log"
    report = fit_series(case.x, case.y, model=ModelSpec(family=family, scale="log"))
    return report.model, case.curve


def _plate5(seed: int):
    """A seeded logistic5 standard curve: 12 doses over four decades in triplicate."""
    rng = np.random.default_rng(seed)
    x = np.repeat(np.geomspace(0.01, 100, 12), 3)
    y = log5(x, 0.1, 2.5, 1.2, 1.0, 2.0) + rng.normal(0, 0.03, x.size)
    return fit_series(x, y, model=ModelSpec(family="logistic5", scale="log")).model


def _back_calculated(fitted, curve, x0: float, seed: int) -> np.ndarray:
    """10,000 Monte Carlo back-calculated values at the true x0 (see the module docstring)."""
    rng = np.random.default_rng(seed)
    theta = rng.multivariate_normal(fitted.estimates, fitted.covariance, DRAWS)
    y_true = curve(np.array([x0]), *fitted.estimates)[0]
    y = y_true + np.sqrt(fitted.noise_variance / M) * rng.standard_normal(DRAWS)
    y_left, y_right, slope, ec50 = theta.T[:4]
    with np.errstate(all="ignore"):
        ratio = (y_left - y_right) / (y - y_right)  # (1 + c z^slope)^g with z = x / ec50
        if theta.shape[1] == 5:  # logistic5: c = 2^(1/g) - 1
            g = theta[:, 4]
            power = (ratio ** (1.0 / g) - 1.0) / (2.0 ** (1.0 / g) - 1.0)
        else:
            power = ratio - 1.0
        x = ec50 * power ** (1.0 / slope)
    beyond = ~(power > 0)  # the reading is past an asymptote of this draw's curve
    past_right = np.sign(y - y_right) != np.sign(y_left - y_right)
    x[beyond] = np.where(past_right[beyond] == (slope[beyond] > 0), np.inf, 0.0)
    return x


def _monte_carlo_cv(fitted, curve, x0: float, seed: int) -> float:
    low, median, high = np.percentile(_back_calculated(fitted, curve, x0, seed), QUANTILES)
    return float((high - low) / (2.0 * median))


@pytest.mark.parametrize("fitted", [_fitted(11)[0], _fitted(12)[0], _fitted(15)[0],
                                    _plate5(0)], ids=["4pl-11", "4pl-12", "4pl-15", "5pl-0"])
def test_the_working_range_ends_sit_at_the_limit(fitted):
    profile = precision_profile(fitted, replicates=M)
    assert profile.available
    assert fitted.x_min <= profile.lower < profile.upper <= fitted.x_max
    ends = back_calculated_cv(fitted, [profile.lower, profile.upper], replicates=M)
    np.testing.assert_allclose(ends, 0.2, rtol=1e-9)
    inside = (profile.x > profile.lower) & (profile.x < profile.upper)
    assert np.all(profile.cv[inside] <= 0.2)
    outside = (profile.x < profile.lower) | (profile.x > profile.upper)
    assert np.all(~(profile.cv[outside] <= 0.2))


def _ends_against_monte_carlo(fitted, curve, seed: int) -> list[float]:
    """Monte Carlo CV / limit - 1 at each end of the working range set by the limit."""
    profile = precision_profile(fitted, replicates=M)
    deviations = []
    for k, x0 in enumerate((profile.lower, profile.upper)):
        if x0 in (fitted.x_min, fitted.x_max):
            continue  # the range, not the limit, ends the working range here
        deviations.append(_monte_carlo_cv(fitted, curve, x0, seed=100 * seed + k) / 0.2 - 1)
    return deviations


@pytest.mark.parametrize("seed", [11, 12, 15])
def test_the_working_range_ends_agree_with_a_monte_carlo(seed):
    fitted, curve = _fitted(seed)
    deviations = _ends_against_monte_carlo(fitted, curve, seed)
    assert len(deviations) == 2
    assert max(abs(d) for d in deviations) <= 0.05, deviations


def test_logistic5_ends_agree_when_the_asymmetry_is_determined():
    checked = 0
    for seed in range(12):
        fitted = _plate5(seed)
        if np.sqrt(fitted.covariance[4, 4]) / abs(fitted.estimates[4]) >= 0.15:
            continue
        deviations = _ends_against_monte_carlo(fitted, log5, seed)
        assert max(abs(d) for d in deviations) <= 0.07, (seed, deviations)
        checked += 1
    assert checked >= 5


@pytest.mark.parametrize("seed", [11, 15])
def test_the_whole_profile_agrees_with_a_monte_carlo(seed):
    fitted, curve = _fitted(seed)
    profile = precision_profile(fitted, replicates=M)
    xs = np.geomspace(profile.lower, profile.upper, 6)[1:-1]
    for k, (x0, cv) in enumerate(zip(xs, back_calculated_cv(fitted, xs, replicates=M),
                                     strict=True)):
        assert abs(_monte_carlo_cv(fitted, curve, x0, seed=7 + k) / cv - 1.0) <= 0.05, (x0, cv)


def test_a_tighter_limit_or_more_replicates_change_the_range_as_they_must():
    fitted, _ = _fitted(11)
    wide = precision_profile(fitted, replicates=M)
    tight = precision_profile(fitted, cv_limit=0.1, replicates=M)
    more = precision_profile(fitted, replicates=4 * M)
    assert wide.lower < tight.lower < tight.upper < wide.upper
    assert more.lower < wide.lower and wide.upper < more.upper


def test_the_standard_deviation_is_no_reference_at_the_ends():
    # at the upper end some readings lie past the upper asymptote (no concentration), and
    # the first-order CV sqrt(se^2 + sigma^2/m) / |dy/dx| / x understates the spread there
    fitted, curve = _fitted(11)
    profile = precision_profile(fitted, replicates=M)
    x = _back_calculated(fitted, curve, profile.upper, seed=3)
    assert 0 < np.mean(~np.isfinite(x)) < 0.1587
    from service.core.nonlinear.analysis import predict
    se = predict(fitted, [profile.upper], m=M).se_mean[0]
    slope = fitted.model.derivative_x(np.array([profile.upper]), fitted.estimates)[0]
    first_order = np.sqrt(se ** 2 + fitted.noise_variance / M) / abs(slope) / profile.upper
    assert first_order < 0.2 * 0.95


def test_other_families_have_no_profile():
    case = cases("exponential", 1, 11)[0]
    fitted = fit_series(case.x, case.y, model=ModelSpec(family="exponential")).model
    profile = precision_profile(fitted)
    assert not profile.available and "logistic4" in profile.reason


@pytest.mark.parametrize("seed", [11, 15])
def test_the_working_range_ends_agree_in_x_with_the_monte_carlo_ends(seed):
    # where the Monte Carlo CV itself crosses the limit (common random numbers: the same
    # seeded draws at every x, so the Monte Carlo CV is a smooth function of x), found by
    # Brent's method within 12% of each reported end
    from scipy import optimize

    fitted, curve = _fitted(seed)
    profile = precision_profile(fitted, replicates=M)
    for k, x0 in enumerate((profile.lower, profile.upper)):
        def excess(x, k=k):
            return _monte_carlo_cv(fitted, curve, x, seed=1000 + k) - 0.2

        found = optimize.brentq(excess, x0 / 1.12, x0 * 1.12, xtol=1e-6 * x0)
        assert abs(found / x0 - 1) <= 0.05, (x0, found)
