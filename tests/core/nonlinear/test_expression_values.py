"""Values of compiled expressions, and NaN/inf flowing out without errors or warnings.

Oracle: the same equation written by hand with numpy (tests/core/nonlinear/catalogue.py),
evaluated in float64. The compiled program may group operations differently from the
hand-written formula only where the equation text does, so agreement is to rounding.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from service.core.nonlinear.expression import compile_model
from tests.core.nonlinear.catalogue import CATALOGUE

IDS = [entry.label for entry in CATALOGUE]


def _points(entry, n=24):
    return np.linspace(*entry.x_range, n)


@pytest.mark.parametrize("entry", CATALOGUE, ids=IDS)
def test_values_match_hand_written_numpy(entry):
    # oracle: numpy evaluation of the hand-typed formula
    model = compile_model(entry.text, entry.names)
    x = _points(entry)
    expected = entry.formula(np, x, *entry.theta)
    np.testing.assert_allclose(model.values(x, entry.theta), expected, rtol=4e-15, atol=0)


@pytest.mark.parametrize("entry", CATALOGUE, ids=IDS)
def test_one_pass_gives_the_same_values_and_jacobian(entry):
    # oracle: the separate entry points of the same model (values, jacobian) must agree exactly
    model = compile_model(entry.text, entry.names)
    x = _points(entry)
    values, jacobian = model.values_and_jacobian(x, entry.theta)
    assert values.shape == (x.size,) and jacobian.shape == (x.size, len(entry.names))
    assert np.array_equal(values, model.values(x, entry.theta))
    assert np.array_equal(jacobian, model.jacobian(x, entry.theta))


def test_parameters_follow_the_callers_order():
    # oracle: hand derivatives of a*x + b: d/da = x, d/db = 1, columns in the declared order
    x = np.array([1.0, 2.0, 5.0])
    model = compile_model("a*x + b", ["b", "a"])
    assert model.parameter_names == ("b", "a")
    np.testing.assert_array_equal(model.values(x, [10.0, 3.0]), 3.0 * x + 10.0)
    np.testing.assert_array_equal(model.jacobian(x, [10.0, 3.0]), np.column_stack([x * 0 + 1, x]))


def test_model_without_x_is_broadcast_over_the_points():
    # oracle: arithmetic; a constant model b1 is b1 at every point, derivative 1 and slope 0
    model = compile_model("b1", ["b1"])
    x = np.arange(4.0)
    values, jacobian = model.values_and_jacobian(x, [2.5])
    np.testing.assert_array_equal(values, np.full(4, 2.5))
    np.testing.assert_array_equal(jacobian, np.ones((4, 1)))
    np.testing.assert_array_equal(model.derivative_x(x, [2.5]), np.zeros(4))


def test_constant_parts_are_folded_to_the_same_numbers():
    # oracle: numpy float64 arithmetic on the same constants, in the same order
    model = compile_model("b1*(2*pi)/sqrt(2) + log10(1000)*x", ["b1"])
    x = np.array([0.5, 1.5])
    expected = 3.0 * (2 * np.pi) / np.sqrt(2.0) + np.log10(1000.0) * x
    np.testing.assert_array_equal(model.values(x, [3.0]), expected)


@pytest.mark.parametrize(("text", "x", "theta", "expected"), [
    # oracle: IEEE 754 float64 semantics as numpy implements them (common practice)
    ("log(b1*x)", [-1.0, 0.0, 1.0], [2.0], [np.nan, -np.inf, np.log(2.0)]),
    ("exp(b1*x)", [1.0, 1000.0], [1.0], [np.e, np.inf]),
    ("b1/x", [0.0, -0.0, 2.0], [1.0], [np.inf, -np.inf, 0.5]),
    ("sqrt(x - b1)", [0.0, 4.0], [3.0], [np.nan, 1.0]),
    ("(x*b1)^0.5 + x^b1", [-4.0], [0.5], [np.nan]),
    ("b1^x", [2000.0], [10.0], [np.inf]),
])
def test_nan_and_inf_flow_out_silently(text, x, theta, expected):
    model = compile_model(text, ["b1"])
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # any RuntimeWarning (overflow, invalid, ...) fails
        values = model.values(x, theta)
        values2, jacobian = model.values_and_jacobian(x, theta)
        slope = model.derivative_x(x, theta)
    np.testing.assert_array_equal(values, np.array(expected))
    np.testing.assert_array_equal(values2, values)
    assert jacobian.shape == (len(x), 1) and slope.shape == (len(x),)


def test_nan_parameters_flow_out_silently():
    # oracle: IEEE 754 / C99 pow: NaN propagates, except pow(1, NaN) = 1 (so x = c gives 0.5)
    model = compile_model("d + (a - d)/(1 + (x/c)^b)", ["a", "b", "c", "d"])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        values, jacobian = model.values_and_jacobian([1.0, 2.0, 3.0], [1.0, np.nan, 1.0, 0.0])
    assert values[0] == 0.5
    assert np.isnan(values[1:]).all() and np.isnan(jacobian[1:, 1]).all()


def test_bad_array_shapes_are_programming_errors():
    model = compile_model("a*x", ["a"])
    with pytest.raises(ValueError, match="theta"):
        model.values([1.0], [1.0, 2.0])
    with pytest.raises(ValueError, match="x must be 1-D"):
        model.values([[1.0]], [1.0])
