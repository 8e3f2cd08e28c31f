"""Failures as data: typed errors for bad input, termination codes for bad fits.

Oracles: the expected behaviour is fixed by construction of each model and data
set (stated beside each case); where an answer exists, scipy's least_squares
(tight tolerances) provides it. No Python warning may escape the engine, so
every test here turns warnings into errors.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import least_squares

from service.core.errors import DataError, DesignError, SpecError
from service.core.nonlinear.inference import infer
from service.core.nonlinear.profile import profile_limits
from service.core.nonlinear.solver import solve
from tests.core.nonlinear.models import ComplexStepModel, MichaelisMenten

X = np.linspace(1.0, 10.0, 20)
RNG_Y = np.random.default_rng(8).normal(0.0, 0.1, X.size)


@pytest.fixture(autouse=True)
def _warnings_are_errors():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        yield


def test_model_not_finite_at_start_names_the_parameters_field():
    # log(b x) with b = -1 is NaN at every x > 0
    model = ComplexStepModel(lambda x, b: b[0] * np.log(b[1] * x), ("scale", "rate"))
    with pytest.raises(SpecError) as err:
        solve(model, X, np.log(X), [1.0, -1.0])
    assert err.value.field == "model.parameters"
    assert "scale=1" in err.value.message and "rate=-1" in err.value.message
    assert "changing rate (e.g. rate=1) alone" in err.value.message


def test_jacobian_not_finite_at_start_names_the_parameter():
    # offset + sqrt(root) x at root = 0 is finite, its derivative x / (2 sqrt(root)) is not
    class SquareRoot:
        parameter_names = ("offset", "root")

        def values(self, x, theta):
            return theta[0] + np.sqrt(theta[1]) * x

        def jacobian(self, x, theta):
            return np.column_stack([np.ones_like(x), x / (2.0 * np.sqrt(theta[1]))])

        def values_and_jacobian(self, x, theta):
            return self.values(x, theta), self.jacobian(x, theta)

    with pytest.raises(SpecError) as err:
        solve(SquareRoot(), X, X, [0.0, 0.0])
    assert err.value.field == "model.parameters"
    assert "respect to root" in err.value.message


@pytest.mark.parametrize("kwargs, error, field", [
    ({"start": [1.0, 5.0], "upper": [np.inf, 4.0]}, SpecError, "model.upper"),
    ({"start": [1.0, 1.0], "lower": [0.0, 2.0], "upper": [1.0, 2.0]}, SpecError, "model.lower"),
    ({"start": [np.nan, 1.0]}, SpecError, "model.parameters"),
    ({"start": [1.0]}, SpecError, "model.parameters"),
    ({"start": [1.0, 1.0], "weights": np.r_[1.0, 1.0, -1.0, np.ones(17)]}, DataError,
     "weights[2]"),
    ({"start": [1.0, 1.0], "y": np.r_[1.0, np.nan, np.ones(18)]}, DataError, "y[1]"),
    ({"start": [1.0, 1.0], "x": X[:5]}, DataError, "x"),
    ({"start": [1.0, 1.0], "x": X[:1], "y": [1.0]}, DesignError, "y"),
    ({"start": [1.0, 1.0], "tolerance": 0.0}, SpecError, "options.tolerance"),
])
def test_bad_input_raises_a_typed_error_naming_the_field(kwargs, error, field):
    args = {"x": X, "y": MichaelisMenten().values(X, np.array([2.0, 3.0])), **kwargs}
    with pytest.raises(error) as err:
        solve(MichaelisMenten(), args.pop("x"), args.pop("y"), args.pop("start"), **args)
    assert err.value.field == field


def test_overflow_on_the_way_is_a_rejected_step():
    # From k = -2 the first Gauss-Newton step overshoots to exp(k x) = inf at x = 100;
    # those trial points are rejected and the fit still reaches the least-squares answer.
    x = np.linspace(0.0, 100.0, 30)
    y = 2.0 * np.exp(-0.05 * x) + np.random.default_rng(3).normal(0.0, 0.02, x.size)
    model = ComplexStepModel(lambda xx, b: b[0] * np.exp(b[1] * xx), ("a", "k"))
    sol = solve(model, x, y, [0.1, -2.0])
    ref = least_squares(lambda t: model.values(x, t) - y, [2.0, -0.05], xtol=1e-15,
                        ftol=1e-15, gtol=1e-15, jac=lambda t: model.jacobian(x, t))
    assert sol.converged
    assert any(n.code == "non_finite_trial_points" for n in sol.notices)
    np.testing.assert_allclose(sol.estimates, ref.x, rtol=1e-8)


def test_model_raising_during_iterations_is_data():
    # The model raises for k > 0.5 (as a model with a domain check might); steps there are
    # rejected and the fit converges inside the domain.
    def guarded(x, b):
        if np.real(b[1]) > 0.5:
            raise ValueError("outside the model's domain")
        return b[0] * np.exp(b[1] * x)

    y = 3.0 * np.exp(0.2 * X) + RNG_Y
    sol = solve(ComplexStepModel(guarded, ("a", "k")), X, y, [1.0, 0.45])
    assert sol.converged
    assert sol.estimates[1] == pytest.approx(0.2, abs=0.01)


def test_parameters_appearing_only_as_a_product_are_reported_singular():
    # a * b * x: the Jacobian columns (b x, a x) are parallel at every point
    model = ComplexStepModel(lambda x, b: b[0] * b[1] * x, ("a", "b"))
    y = 3.0 * X + RNG_Y
    sol = solve(model, X, y, [1.0, 1.0])
    assert sol.termination == "singular_jacobian" and not sol.converged
    assert sol.rank == 1 and "a, b" in sol.message
    # the product is determined: the least-squares slope through the origin, x'y / x'x
    assert sol.estimates[0] * sol.estimates[1] == pytest.approx((X @ y) / (X @ X), rel=1e-8)
    inf = infer(sol)
    assert np.isnan([r.std_error for r in inf.parameters]).all()
    assert {n.code for n in inf.notices} >= {"jacobian_rank_deficient", "not_converged"}
    limits = profile_limits(sol).limits
    assert all(lim.lower_status == "not_computed" and np.isnan(lim.lower) for lim in limits)


def test_a_minimum_at_infinity_is_reported_as_divergence():
    # exp(-b x) > 0 while every y < 0: the sum of squares falls for ever as b grows
    y = -0.1 + 0.01 * RNG_Y
    model = ComplexStepModel(lambda x, b: np.exp(-b[0] * x), ("b",))
    sol = solve(model, X, y, [1.0])
    assert sol.termination == "diverged" and not sol.converged
    assert "b" in sol.message and sol.estimates[0] > 1.0


def test_a_model_that_stops_being_finite_ends_with_its_code():
    # finite at the start values only (a model with a broken implementation)
    class BreaksAfterStart:
        parameter_names = ("a", "b")

        def __init__(self):
            self.calls = 0

        def values(self, x, theta):
            self.calls += 1
            return theta[0] + theta[1] * x if self.calls == 1 else np.full(x.size, np.nan)

        def jacobian(self, x, theta):
            return np.column_stack([np.ones_like(x), x])

        def values_and_jacobian(self, x, theta):
            return self.values(x, theta), self.jacobian(x, theta)

    sol = solve(BreaksAfterStart(), X, 2.0 * X, [1.0, 1.0])
    assert sol.termination == "non_finite_model" and not sol.converged
    assert np.isnan(sol.fitted).all()
    assert any(n.code == "non_finite_trial_points" for n in sol.notices)


def test_iteration_budget():
    # a far start needs about a dozen iterations (checked below); a budget of 3 stops it
    y = 3.0 * np.exp(0.2 * X) + RNG_Y
    model = ComplexStepModel(lambda x, b: b[0] * np.exp(b[1] * x), ("a", "k"))
    sol = solve(model, X, y, [100.0, -1.0], max_iterations=3)
    assert sol.termination == "iteration_limit" and not sol.converged
    assert sol.njev == 3 and "3 iterations" in sol.message
    assert solve(model, X, y, [100.0, -1.0]).converged
