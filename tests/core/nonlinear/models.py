"""Test-only models for the nonlinear engine (hand-written, exact derivatives).

``ComplexStepModel`` turns any analytic numpy function ``f(x, b)`` into a
model whose Jacobian comes from complex-step differentiation
(Squire & Trapp 1998, SIAM Review 40(1):110-112): ``Im f(b + i h e_j) / h`` with
``h = 1e-30`` has no subtractive cancellation, so it is exact to rounding for
analytic ``f``. The other classes carry hand-derived analytic Jacobians.
"""

from __future__ import annotations

import numpy as np

STEP = 1e-30


class ComplexStepModel:
    """``f(x, b)`` (analytic in ``b``) with its complex-step Jacobian."""

    def __init__(self, function, names):
        self.function = function
        self.parameter_names = tuple(names)

    def values(self, x, theta):
        with np.errstate(all="ignore"):
            return np.asarray(self.function(x, np.asarray(theta, dtype=float)), dtype=float)

    def jacobian(self, x, theta):
        theta = np.asarray(theta, dtype=float)
        columns = []
        with np.errstate(all="ignore"):
            for j in range(theta.size):
                shifted = theta.astype(complex)
                shifted[j] += 1j * STEP
                columns.append(np.imag(self.function(x, shifted)) / STEP)
        return np.column_stack(columns)

    def values_and_jacobian(self, x, theta):
        return self.values(x, theta), self.jacobian(x, theta)


class Logistic4:
    """Four-parameter logistic ``d + (a - d) / (1 + (x / c)^b)`` for x > 0."""

    parameter_names = ("a", "b", "c", "d")

    def values(self, x, theta):
        a, b, c, d = theta
        return d + (a - d) / (1.0 + (x / c) ** b)

    def values_and_jacobian(self, x, theta):
        a, b, c, d = theta
        u = (x / c) ** b
        den = 1.0 + u
        g = (a - d) * u / den ** 2
        jac = np.empty((np.size(x), 4))
        jac[:, 0] = 1.0 / den
        jac[:, 1] = -g * np.log(x / c)
        jac[:, 2] = g * b / c
        jac[:, 3] = u / den
        return d + (a - d) / den, jac

    def jacobian(self, x, theta):
        return self.values_and_jacobian(x, theta)[1]


class MichaelisMenten:
    """``vmax x / (km + x)``."""

    parameter_names = ("vmax", "km")

    def values(self, x, theta):
        return theta[0] * x / (theta[1] + x)

    def values_and_jacobian(self, x, theta):
        den = theta[1] + x
        return theta[0] * x / den, np.column_stack([x / den, -theta[0] * x / den ** 2])

    def jacobian(self, x, theta):
        return self.values_and_jacobian(x, theta)[1]


class Quadratic:
    """``b0 + b1 x + b2 x^2`` written as a (linear-in-parameters) model."""

    parameter_names = ("b0", "b1", "b2")

    def values(self, x, theta):
        return theta[0] + theta[1] * x + theta[2] * x * x

    def jacobian(self, x, theta):
        return np.column_stack([np.ones_like(x), x, x * x])

    def values_and_jacobian(self, x, theta):
        return self.values(x, theta), self.jacobian(x, theta)


def logistic_data(seed: int = 0, n: int = 24):
    """Seeded 4PL design: 8 log-spaced doses in triplicate, noise SD 0.08 (demo data)."""
    rng = np.random.default_rng(seed)
    x = np.repeat(np.geomspace(0.1, 100.0, n // 3), 3)
    truth = np.array([0.1, 1.2, 5.0, 2.0])
    return x, Logistic4().values(x, truth) + rng.normal(0.0, 0.08, x.size), truth
