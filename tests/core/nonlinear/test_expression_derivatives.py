"""Exact derivatives: Jacobian and d/dx against high-precision and complex-step references.

Oracles:
* mpmath.diff at 40 significant digits of the hand-typed formula
  (tests/core/nonlinear/catalogue.py) at the same float64 inputs;
* complex-step differentiation (Im f(t + ih)/h, h = 1e-30; exact to rounding for
  functions analytic in the parameter, common practice) with numpy's complex arithmetic.
Agreement asked: 1e-12 relative, with an absolute floor of 1e-14 times the column's largest
magnitude for entries that are themselves cancellations near zero (float64 evaluation of
any formula cannot do better there). Finite differences would miss by ~1e-8.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

from service.core.nonlinear.expression import compile_model
from tests.core.nonlinear.catalogue import CATALOGUE, MP

IDS = [entry.label for entry in CATALOGUE]
RTOL = 1e-12
FLOOR = 1e-14
H = 1e-30


def _assert_close(ours, reference, label):
    ours = np.asarray(ours, dtype=float)
    reference = np.asarray(reference, dtype=float)
    scale = np.max(np.abs(reference), axis=0, keepdims=reference.ndim > 1)
    bound = RTOL * np.abs(reference) + FLOOR * scale
    excess = np.abs(ours - reference) - bound
    assert np.all(excess <= 0), f"{label}: worst excess {np.max(excess):.3e}"


def _mp_jacobian(entry, x):
    rows, slopes = [], []
    with mpmath.workdps(40):
        theta = [mpmath.mpf(t) for t in entry.theta]
        for xi in map(mpmath.mpf, x):
            row = []
            for j in range(len(theta)):
                def along_j(t, j=j, xi=xi):
                    shifted = list(theta)
                    shifted[j] = t
                    return entry.formula(MP, xi, *shifted)
                row.append(float(mpmath.diff(along_j, theta[j])))
            rows.append(row)
            slopes.append(float(mpmath.diff(lambda t: entry.formula(MP, t, *theta), xi)))
    return np.array(rows), np.array(slopes)


@pytest.mark.parametrize("entry", CATALOGUE, ids=IDS)
def test_jacobian_and_slope_match_mpmath(entry):
    model = compile_model(entry.text, entry.names)
    x = np.linspace(*entry.x_range, 5)
    jacobian_ref, slope_ref = _mp_jacobian(entry, x)  # oracle: mpmath.diff, 40 digits
    _assert_close(model.jacobian(x, entry.theta), jacobian_ref, "jacobian")
    _assert_close(model.derivative_x(x, entry.theta), slope_ref, "d/dx")


@pytest.mark.parametrize("entry", [e for e in CATALOGUE if e.analytic],
                         ids=[e.label for e in CATALOGUE if e.analytic])
def test_jacobian_and_slope_match_complex_step(entry):
    model = compile_model(entry.text, entry.names)
    x = np.linspace(*entry.x_range, 24)
    columns = []
    for j in range(len(entry.theta)):  # oracle: complex step in theta_j
        theta = np.array(entry.theta, dtype=complex)
        theta[j] += 1j * H
        columns.append(entry.formula(np, x.astype(complex), *theta).imag / H)
    _assert_close(model.jacobian(x, entry.theta), np.column_stack(columns), "jacobian")
    slope = entry.formula(np, x + 1j * H, *np.array(entry.theta)).imag / H  # step in x
    _assert_close(model.derivative_x(x, entry.theta), slope, "d/dx")


def test_constant_power_of_negative_base():
    # oracle: calculus, d/dx b1*x^k = k*b1*x^(k-1), exact in float64 for these small integers
    model = compile_model("b1*x^2 + b2*x^3", ["b1", "b2"])
    x = np.array([-3.0, -0.5, 0.0, 2.0])
    np.testing.assert_array_equal(model.derivative_x(x, [1.5, -2.0]),
                                  2 * 1.5 * x + 3 * -2.0 * x ** 2)
    np.testing.assert_array_equal(model.jacobian(x, [1.5, -2.0]), np.column_stack([x**2, x**3]))


def test_parameter_exponent_at_zero_base():
    # oracle: mpmath.diff of t -> 0^t (identically 0 for t > 0) and of t -> t*0^1.5;
    # the rule y*log(u) alone would give 0 * -inf = NaN here
    model = compile_model("b1*x^b2", ["b1", "b2"])
    jacobian = model.jacobian([0.0, 2.0], [3.0, 1.5])
    with mpmath.workdps(40):
        d_b2_at_0 = mpmath.diff(lambda t: 3 * mpmath.mpf(0) ** t, 1.5)
        d_b2_at_2 = mpmath.diff(lambda t: 3 * mpmath.mpf(2) ** t, 1.5)
    assert jacobian[0, 1] == float(d_b2_at_0) == 0.0
    assert jacobian[1, 1] == pytest.approx(float(d_b2_at_2), rel=1e-15)
    assert model.derivative_x([0.0], [3.0, 1.5])[0] == 0.0  # 1.5*3*0^0.5


def test_abs_derivative_is_the_sign():
    # oracle: d|u|/du = sign(u) away from 0 (calculus); mpmath.diff confirms at 40 digits
    model = compile_model("b1*abs(x - b2)", ["b1", "b2"])
    x = np.array([-1.0, 0.25, 3.0])
    jacobian = model.jacobian(x, [2.0, 0.5])
    np.testing.assert_array_equal(jacobian[:, 1], -2.0 * np.sign(x - 0.5))
    with mpmath.workdps(40):
        ref = mpmath.diff(lambda t: 2 * abs(mpmath.mpf(3) - t), 0.5)
    assert jacobian[2, 1] == float(ref)


def test_repeated_parameter_sums_its_occurrences():
    # oracle: d/da (a*x + a^2) = x + 2a (calculus)
    model = compile_model("a*x + a^2", ["a"])
    x = np.array([1.0, 4.0])
    np.testing.assert_array_equal(model.jacobian(x, [3.0])[:, 0], x + 6.0)
