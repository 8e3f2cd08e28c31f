"""Profile-likelihood limits against a brute-force profile and exact linear-model limits.

Oracles:
* brute force, written here: a grid of 81 fixed values of theta_j over +-4
  Wald standard errors, each a full scipy.optimize.least_squares
  re-minimisation over the other parameters (tight tolerances), the profile t
  interpolated by scipy's CubicSpline and its roots at +-critical found by brentq
  (the profile definition of Bates & Watts 1988, sec. 6.1);
* for a model linear in its parameters the profile t is exactly linear, so the
  profile limits are the t limits: statsmodels OLS ``conf_int``.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from scipy.interpolate import CubicSpline
from scipy.optimize import brentq, least_squares

from service.core.errors import SpecError
from service.core.nonlinear.inference import infer
from service.core.nonlinear.profile import profile_limits
from service.core.nonlinear.solver import solve
from tests.core.nonlinear.models import (
    ComplexStepModel,
    Logistic4,
    MichaelisMenten,
    Quadratic,
    logistic_data,
)

RTOL = 1e-6


def _profile_sum_of_squares(model, x, y, w, estimates, j, b, warm):
    others = [k for k in range(estimates.size) if k != j]
    sw = np.sqrt(w)

    def full(t):
        theta = np.empty(estimates.size)
        theta[others], theta[j] = t, b
        return theta

    fit = least_squares(lambda t: sw * (model.values(x, full(t)) - y), warm,
                        jac=lambda t: sw[:, None] * model.jacobian(x, full(t))[:, others],
                        method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15)
    return 2.0 * fit.cost, fit.x


def brute_force_limits(model, x, y, w, sol, j, crit, scale, se):
    """Roots of the interpolated brute-force profile t at -crit and +crit."""
    est = sol.estimates
    grid = est[j] + se * np.linspace(-4.0, 4.0, 81)
    warm = np.delete(est, j)
    taus = []
    for b in grid:
        rss, _ = _profile_sum_of_squares(model, x, y, w, est, j, b, warm)
        taus.append(np.sign(b - est[j]) * np.sqrt(max(rss - sol.rss, 0.0)) / scale)
    spline = CubicSpline(grid, taus)
    return (brentq(lambda b: spline(b) + crit, grid[0], est[j]),
            brentq(lambda b: spline(b) - crit, est[j], grid[-1]))


@pytest.mark.parametrize("seed", [0, 3])
def test_logistic_limits_equal_brute_force(seed):
    x, y, _ = logistic_data(seed)
    sol = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5])
    inf = infer(sol)
    result = profile_limits(sol)
    crit = stats.t.ppf(0.975, x.size - 4)
    assert result.critical_value == pytest.approx(crit, rel=1e-12)
    for j, lim in enumerate(result.limits):
        assert (lim.lower_status, lim.upper_status) == ("found", "found")
        lo, hi = brute_force_limits(Logistic4(), x, y, np.ones_like(x), sol, j, crit, inf.sigma,
                                    inf.parameters[j].std_error)
        assert lim.lower == pytest.approx(lo, rel=RTOL)
        assert lim.upper == pytest.approx(hi, rel=RTOL)


def test_known_sd_limits_equal_brute_force():
    rng = np.random.default_rng(13)
    x = np.array([0.5, 1.0, 2.0, 4.0, 8.0, 16.0] * 2)
    sd = 0.2 + 0.03 * x
    y = MichaelisMenten().values(x, np.array([10.0, 2.0])) + rng.normal(0.0, sd)
    w = 1.0 / sd ** 2
    sol = solve(MichaelisMenten(), x, y, [5.0, 1.0], weights=w)
    inf = infer(sol, weight_mode="known_sd")
    result = profile_limits(sol, weight_mode="known_sd", level=0.9)
    z = stats.norm.ppf(0.95)  # known SDs: Delta S = z^2, no sigma
    for j, lim in enumerate(result.limits):
        lo, hi = brute_force_limits(MichaelisMenten(), x, y, w, sol, j, z, 1.0,
                                    inf.parameters[j].std_error)
        assert (lim.lower, lim.upper) == pytest.approx((lo, hi), rel=RTOL)


def test_linear_model_profile_limits_are_the_t_limits():
    rng = np.random.default_rng(6)
    x = np.linspace(0.0, 5.0, 15)
    y = 2.0 - x + 0.2 * x ** 2 + rng.normal(0.0, 0.5, x.size)
    sol = solve(Quadratic(), x, y, [0.0, 0.0, 0.0])
    ref = sm.OLS(y, np.column_stack([np.ones_like(x), x, x ** 2])).fit().conf_int(0.05)
    limits = profile_limits(sol).limits
    np.testing.assert_allclose([[lim.lower, lim.upper] for lim in limits], ref, rtol=1e-8)


def test_one_parameter_profile_is_the_sum_of_squares_itself():
    # nothing to re-fit: the limits solve S(b) - S(est) = (t s)^2 directly (scipy brentq)
    rng = np.random.default_rng(12)
    x = np.linspace(0.0, 3.0, 12)
    y = np.exp(-0.7 * x) + rng.normal(0.0, 0.05, x.size)
    model = ComplexStepModel(lambda xx, b: np.exp(-b[0] * xx), ("rate",))
    sol = solve(model, x, y, [1.0])
    s2 = sol.rss / (x.size - 1)
    crit = stats.t.ppf(0.975, x.size - 1)

    def excess(b):
        r = y - np.exp(-b * x)
        return float(r @ r) - sol.rss - crit ** 2 * s2

    est = sol.estimates[0]
    (lim,) = profile_limits(sol).limits
    assert lim.lower == pytest.approx(brentq(excess, est - 1.0, est, xtol=1e-14), rel=RTOL)
    assert lim.upper == pytest.approx(brentq(excess, est, est + 1.0, xtol=1e-14), rel=RTOL)


def _unsaturated_michaelis_menten():
    # x never reaches saturation: the data cannot rule out a very large km (demo data)
    rng = np.random.default_rng(1)
    x = np.array([0.25, 0.5, 1.0, 2.0, 4.0])
    y = MichaelisMenten().values(x, np.array([10.0, 4.0])) + rng.normal(0.0, 0.3, x.size)
    return x, y, solve(MichaelisMenten(), x, y, [10.0, 4.0])


def test_unbounded_side_is_nan_with_status_and_is_really_below_critical():
    x, y, sol = _unsaturated_michaelis_menten()
    result = profile_limits(sol, parameters=("km",))
    (lim,) = result.limits
    assert lim.name == "km" and lim.lower_status == "found"
    assert lim.upper_status == "unbounded" and np.isnan(lim.upper)
    assert "30 standard errors" in lim.reason
    assert [n.code for n in result.notices] == ["profile_unbounded"]
    # the claim itself, by brute force: at +30 SE the profile t is still below critical
    inf = infer(sol)
    se = inf.parameters[1].std_error
    far = sol.estimates[1] + 30.0 * se
    rss, _ = _profile_sum_of_squares(MichaelisMenten(), x, y, np.ones_like(x), sol.estimates,
                                     1, far, np.array([sol.estimates[0] * 5]))
    assert np.sqrt(rss - sol.rss) / inf.sigma < result.critical_value


def test_bound_stops_the_search():
    x, y, free = _unsaturated_michaelis_menten()
    bound = free.estimates[1] + 2.0 * infer(free).parameters[1].std_error
    sol = solve(MichaelisMenten(), x, y, [10.0, 4.0], upper=[np.inf, bound])
    result = profile_limits(sol, parameters=("km",))
    (lim,) = result.limits
    # the constrained confidence set {km <= bound : |tau| <= c} ends at the bound
    assert lim.upper_status == "bound" and lim.upper == bound and "bound" in lim.reason
    assert [n.code for n in result.notices] == ["profile_at_bound"]


def test_not_computed_when_the_fit_did_not_converge_and_bad_names():
    x, y, _ = logistic_data(0)
    sol = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5], max_iterations=2)
    assert not sol.converged
    result = profile_limits(sol)
    assert all(lim.lower_status == lim.upper_status == "not_computed" for lim in result.limits)
    assert "did not converge" in result.limits[0].reason
    with pytest.raises(SpecError) as err:
        profile_limits(sol, parameters=("slope",))
    assert err.value.field == "profile.parameters"


def test_a_side_not_computed_for_its_own_reason_is_a_warning():
    # A "converged" solution moved one standard error above the minimum along the slope
    # (as a solver stopping early would leave it): the lower side's profile meets a lower
    # sum of squares and cannot compute that limit. The response schema sends readers to
    # the warnings for the reason, so the reason must be there.
    from dataclasses import replace

    x, y, _ = logistic_data(0)
    free = solve(Logistic4(), x, y, [0.0, 1.0, 3.0, 1.5])
    j = 1
    estimates = free.estimates.copy()
    estimates[j] += infer(free).parameters[j].std_error
    fitted = Logistic4().values(x, estimates)
    moved = replace(free, estimates=estimates, rss=float(np.sum((y - fitted) ** 2)))
    result = profile_limits(moved, parameters=(moved.parameter_names[j],))
    (lim,) = result.limits
    assert lim.lower_status == "not_computed"
    (note,) = [n for n in result.notices if n.code == "profile_not_computed"]
    assert note.message.startswith(f"{lim.name}: lower: a lower sum of squares exists")


def test_each_profile_notice_carries_only_its_own_side():
    # km of the unsaturated fit: its upper side is unbounded (30 SE); a lower bound one SE
    # below the estimate ends the lower side there. Each notice names its own side only.
    x, y, free = _unsaturated_michaelis_menten()
    bound = free.estimates[1] - infer(free).parameters[1].std_error
    sol = solve(MichaelisMenten(), x, y, [10.0, 4.0], lower=[-np.inf, bound])
    result = profile_limits(sol, parameters=("km",))
    (lim,) = result.limits
    assert (lim.lower_status, lim.upper_status) == ("bound", "unbounded")
    notes = {n.code: n.message for n in result.notices}
    assert notes["profile_at_bound"].startswith("km: lower: ") and "upper" not in \
        notes["profile_at_bound"]
    assert notes["profile_unbounded"].startswith("km: upper: ") and "lower" not in \
        notes["profile_unbounded"]
