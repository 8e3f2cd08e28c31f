"""Two-parameter curves: Michaelis-Menten saturation and the power law.

Parameterization::

    michaelis_menten: y = vmax*x/(km + x)
    power:            y = coefficient*x^exponent        (x >= 0)

NIST's DanWood curve ``b1*x**b2`` is the power law with coefficient = b1 and
exponent = b2.
"""

from __future__ import annotations

import numpy as np

from service.core.nonlinear.builtin import shapes
from service.core.nonlinear.builtin.definition import Builtin, ParameterInfo, Series

KM_POINTS = 40
POWERS = np.linspace(-15.0, 15.0, 61)  # exponent x ln(x_max/x_min): the curve's bend


def _positive_x(series: Series) -> np.ndarray:
    x = np.abs(series.x)
    return x[x > 0]


def _mm_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    return (series.x / (nl["km"] + series.x),)


def _mm_axes(series: Series):
    x = _positive_x(series)
    lo, hi = (x.min(), x.max()) if x.size else (1.0, 1.0)
    return {"km": np.geomspace(lo / 100.0, 100.0 * hi, KM_POINTS)}


def _mm_shape(series: Series):
    """The Hanes-Woolf line x/y = km/vmax + x/vmax: km = intercept/slope."""
    keep = (series.y != 0) & (series.x != 0)
    fit = shapes.line(series.x[keep], series.x[keep] / series.y[keep])
    if fit is None or fit[1] == 0 or not fit[0] / fit[1] > 0:
        return None
    return {"km": fit[0] / fit[1]}


def _power_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    return (series.x ** nl["exponent"],)


def _power_axes(series: Series):
    x = _positive_x(series)
    ratio = float(x.max() / x.min()) if x.size else 1.0
    exponents = POWERS / (np.log(ratio) if ratio > 1.0 else 1.0)
    if (series.x == 0).any():  # 0^exponent is finite only for exponent > 0
        exponents = exponents[exponents > 0]
    return {"exponent": exponents}


def _power_shape(series: Series):
    """The straight line log|y| = log|coefficient| + exponent*log x."""
    keep = (series.x > 0) & (series.y != 0)
    fit = shapes.line(np.log(series.x[keep]), np.log(np.abs(series.y[keep])))
    return None if fit is None else {"exponent": fit[1]}


MICHAELIS_MENTEN = Builtin(
    name="michaelis_menten",
    description="Michaelis-Menten saturation curve through the origin: limiting value "
                "vmax, half-saturation km. Automatic start values.",
    equations={"linear": "vmax*x/(km + x)"},
    parameters=(
        ParameterInfo("vmax", "The limiting y as x grows (the maximum rate); units of y.",
                      "any (> 0 for rates)"),
        ParameterInfo("km", "The x at which y = vmax/2 (the Michaelis constant); units of x.",
                      "> 0")),
    linear=("vmax",), basis=_mm_basis, axes=_mm_axes, shape_start=_mm_shape)

POWER = Builtin(
    name="power",
    description="Power law y = coefficient*x^exponent (x >= 0). Automatic start values.",
    equations={"linear": "coefficient*x^exponent"},
    parameters=(
        ParameterInfo("coefficient", "The y at x = 1; units of y.", "any"),
        ParameterInfo("exponent", "The power of x (dimensionless): y changes by the factor "
                      "2^exponent when x doubles.", "any (> 0 when some x = 0)")),
    linear=("coefficient",), basis=_power_basis, axes=_power_axes, shape_start=_power_shape,
    x_domain="nonnegative")
