"""Model equations used by the expression tests, each with its formula written by hand.

Each entry's ``formula(m, x, *theta)`` is the same equation typed again in
Python, independently of the parser; ``m`` is the math backend: ``numpy``
(values, complex-step derivatives) or :data:`MP` (mpmath at high precision).
The model forms are the usual textbook ones (4-parameter logistic,
Michaelis-Menten, ...) and those of the NIST StRD nonlinear problems (forms
written from memory; they are also checked against the stored NIST files at
run time in test_expression_reference.py). Parameter values and x ranges
are only evaluation points chosen for the tests, not reference data.
"""

from __future__ import annotations

from types import SimpleNamespace
from typing import NamedTuple

import mpmath

MP = SimpleNamespace(exp=mpmath.exp, log=mpmath.log, log10=mpmath.log10, sqrt=mpmath.sqrt,
                     sin=mpmath.sin, cos=mpmath.cos, tan=mpmath.tan, arctan=mpmath.atan,
                     abs=abs, pi=mpmath.pi)


class Entry(NamedTuple):
    label: str
    text: str
    names: tuple[str, ...]
    theta: tuple[float, ...]
    x_range: tuple[float, float]
    formula: object
    analytic: bool = True  # complex-step differentiation applies


def _enso(m, x, b1, b2, b3, b4, b5, b6, b7, b8, b9):
    w = 2 * m.pi * x
    return (b1 + b2 * m.cos(w / 12) + b3 * m.sin(w / 12) + b5 * m.cos(w / b4)
            + b6 * m.sin(w / b4) + b8 * m.cos(w / b7) + b9 * m.sin(w / b7))


CATALOGUE = (
    Entry("logistic4", "d + (a - d)/(1 + (x/c)^b)", ("a", "b", "c", "d"),
          (2.0, 1.3, 1.7, 0.2), (0.1, 8.0),
          lambda m, x, a, b, c, d: d + (a - d) / (1 + (x / c) ** b)),
    Entry("michaelis_menten", "vmax*x/(km + x)", ("vmax", "km"), (3.0, 0.8), (0.05, 10.0),
          lambda m, x, vmax, km: vmax * x / (km + x)),
    Entry("exponential_decay", "a*exp(-k*x) + c", ("a", "k", "c"), (5.0, 0.7, 0.3),
          (0.0, 6.0), lambda m, x, a, k, c: a * m.exp(-k * x) + c),
    Entry("gaussian_peak", "h*exp(-(x - mu)^2/(2*s^2))", ("h", "mu", "s"), (2.5, 3.0, 0.9),
          (0.5, 5.5), lambda m, x, h, mu, s: h * m.exp(-((x - mu) ** 2) / (2 * s ** 2))),
    Entry("misra1a", "b1*(1-exp(-b2*x))", ("b1", "b2"), (240.0, 5.5e-4), (70.0, 800.0),
          lambda m, x, b1, b2: b1 * (1 - m.exp(-b2 * x))),
    Entry("rat42", "b1 / (1+exp(b2-b3*x))", ("b1", "b2", "b3"), (72.0, 2.6, 0.067),
          (9.0, 80.0), lambda m, x, b1, b2, b3: b1 / (1 + m.exp(b2 - b3 * x))),
    Entry("chwirut", "exp(-b1*x)/(b2+b3*x)", ("b1", "b2", "b3"), (0.19, 6.1e-3, 1.05e-2),
          (0.5, 6.0), lambda m, x, b1, b2, b3: m.exp(-b1 * x) / (b2 + b3 * x)),
    Entry("roszman1", "b1 - b2*x - arctan(b3/(x-b4))/pi", ("b1", "b2", "b3", "b4"),
          (0.2, -6e-6, 1200.0, -180.0), (-4800.0, -460.0),
          lambda m, x, b1, b2, b3, b4: b1 - b2 * x - m.arctan(b3 / (x - b4)) / m.pi),
    Entry("mgh09", "b1*(x^2+x*b2) / (x^2+x*b3+b4)", ("b1", "b2", "b3", "b4"),
          (0.19, 0.19, 0.12, 0.14), (0.06, 4.0),
          lambda m, x, b1, b2, b3, b4: b1 * (x ** 2 + x * b2) / (x ** 2 + x * b3 + b4)),
    Entry("eckerle4", "(b1/b2) * exp(-0.5*((x-b3)/b2)^2)", ("b1", "b2", "b3"),
          (1.55, 4.09, 451.5), (440.0, 465.0),
          lambda m, x, b1, b2, b3: (b1 / b2) * m.exp(-0.5 * ((x - b3) / b2) ** 2)),
    Entry("bennett5", "b1 * (b2+x)^(-1/b3)", ("b1", "b2", "b3"), (-2523.0, 46.7, 0.93),
          (7.0, 12.0), lambda m, x, b1, b2, b3: b1 * (b2 + x) ** (-1 / b3)),
    Entry("mgh10", "b1 * exp(b2/(x+b3))", ("b1", "b2", "b3"), (0.0056, 6181.0, 345.0),
          (50.0, 125.0), lambda m, x, b1, b2, b3: b1 * m.exp(b2 / (x + b3))),
    Entry("rat43", "b1 / ((1+exp(b2-b3*x))^(1/b4))", ("b1", "b2", "b3", "b4"),
          (700.0, 5.3, 0.76, 1.3), (1.0, 15.0),
          lambda m, x, b1, b2, b3, b4: b1 / ((1 + m.exp(b2 - b3 * x)) ** (1 / b4))),
    Entry("enso", "b1 + b2*cos(2*pi*x/12) + b3*sin(2*pi*x/12) + b5*cos(2*pi*x/b4) "
          "+ b6*sin(2*pi*x/b4) + b8*cos(2*pi*x/b7) + b9*sin(2*pi*x/b7)",
          tuple(f"b{i}" for i in range(1, 10)),
          (10.5, 3.1, 0.5, 44.0, -1.6, 0.5, 26.9, -0.2, -0.2), (1.0, 168.0), _enso),
    Entry("power_law", "a*x^b", ("a", "b"), (0.77, 3.86), (1.3, 2.2),
          lambda m, x, a, b: a * x ** b),
    Entry("growth_base", "a*b^x - c", ("a", "b", "c"), (1.5, 1.2, 0.4), (-3.0, 4.0),
          lambda m, x, a, b, c: a * b ** x - c),
    Entry("base_and_exponent", "(b1 + x)^(b2*x)", ("b1", "b2"), (1.5, 0.7), (0.2, 3.0),
          lambda m, x, b1, b2: (b1 + x) ** (b2 * x)),
    Entry("functions", "a*sqrt(x) + b*log10(x) - c*abs(x - 2) + tan(d*x) + e*log(x)",
          ("a", "b", "c", "d", "e"), (1.1, -0.4, 0.6, 0.2, 0.3), (0.3, 3.0),
          lambda m, x, a, b, c, d, e: (a * m.sqrt(x) + b * m.log10(x) - c * m.abs(x - 2)
                                       + m.tan(d * x) + e * m.log(x)), analytic=False),
    Entry("signs_and_powers", "-a*x^2 + x/b^-1 - (c*x)^3 + 2^3^2/c", ("a", "b", "c"),
          (0.5, 1.7, 0.3), (-2.0, 2.0),
          lambda m, x, a, b, c: -a * x ** 2 + x / b ** -1 - (c * x) ** 3 + 2 ** 3 ** 2 / c),
)
