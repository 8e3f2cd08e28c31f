"""First-order approach to an asymptote, and its two extensions (two rates; Weibull shape).

Parameterization::

    exponential:   y = plateau + (y0 - plateau)*exp(-k*x)
    biexponential: y = a_fast*exp(-k_fast*x) + a_slow*exp(-k_slow*x)
    weibull:       y = plateau + (y0 - plateau)*exp(-x^shape/tau^shape)     (x >= 0)

``exponential`` covers decay (y0 > plateau) and rise (y0 < plateau) alike and
reports the half-life ln 2 / k; NIST's Misra1a and BoxBOD curves
``b1*(1 - exp(-b2*x))`` are the exponential with y0 held at 0
(``fixed: {"y0": 0}``), plateau = b1 and k = b2. The biexponential is reported
with k_fast > k_slow (the two terms swapped if needed). The Weibull curve is the
exponential with k = 1/tau when shape = 1; it is written with
``x^shape/tau^shape`` so that x = 0 is a valid point with exact derivatives.
"""

from __future__ import annotations

import math

import numpy as np

from service.core.nonlinear.builtin import shapes
from service.core.nonlinear.builtin.definition import (
    Builtin,
    Derived,
    ParameterInfo,
    Series,
    finite_u,
    u_span,
)

RATES = np.geomspace(0.05, 50.0, 20)        # k x (x range)
TWO_RATES = np.geomspace(0.02, 100.0, 26)   # biexponential rates x (x range)
SHAPES = np.geomspace(0.25, 8.0, 11)
LN2 = math.log(2.0)


def _half_life(name: str, rate: str, what: str) -> Derived:
    return Derived(name, f"ln 2 / {rate}: the x-distance over which {what} halves; units "
                   f"of x.", rate, lambda k: LN2 / k, lambda k: -LN2 / (k * k), (0.0, np.inf))


def _exp_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    e = np.exp(-nl["k"] * series.u)
    return e, 1.0 - e


def _exp_axes(series: Series):
    rates = RATES / u_span(series)[2]
    return {"k": np.concatenate([-rates[::-1], rates])}


def _exp_shape(series: Series):
    """k from the straight line of log |y - plateau| on x (plateau: the high-x end)."""
    left, right = shapes.ends(series.u, series.y)
    change = left - right
    distance = np.sign(change) * (series.y - right)
    keep = distance > 0.05 * abs(change)
    fit = shapes.line(series.u[keep], np.log(distance[keep])) if change else None
    return None if fit is None or fit[1] == 0 else {"k": -fit[1]}


def _biexp_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    return np.exp(-nl["k_fast"] * series.u), np.exp(-nl["k_slow"] * series.u)


def _biexp_axes(series: Series):
    rates = TWO_RATES / u_span(series)[2]
    return {"k_fast": rates, "k_slow": rates}


def _biexp_shape(series: Series):
    """Curve peeling: the slow rate from the late half, the fast one from what is left early."""
    u, y = series.u, series.y
    late = u >= np.median(u)
    sign = 1.0 if y[late].mean() >= 0 else -1.0
    keep = late & (sign * y > 0)
    slow = shapes.line(u[keep], np.log(sign * y[keep]))
    if slow is None:
        return None
    rest = y - sign * np.exp(slow[0] + slow[1] * u)
    sign = 1.0 if rest[~late].mean() >= 0 else -1.0
    keep = ~late & (sign * rest > 0)
    fast = shapes.line(u[keep], np.log(sign * rest[keep]))
    if fast is None or not -fast[1] > -slow[1]:
        return None
    return {"k_fast": -fast[1], "k_slow": -slow[1]}


def _biexp_order(values: dict[str, float]) -> dict[str, float]:
    if values["k_fast"] >= values["k_slow"]:
        return values
    return {"a_fast": values["a_slow"], "k_fast": values["k_slow"],
            "a_slow": values["a_fast"], "k_slow": values["k_fast"]}


def _weibull_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    with np.errstate(divide="ignore"):
        log_x = np.log(series.x)
    e = np.exp(-np.exp(nl["shape"] * (log_x - np.log(nl["tau"]))))
    return e, 1.0 - e


def _weibull_axes(series: Series):
    positive = finite_u(series)
    positive = positive[positive > 0]
    lo, hi = (positive.min(), positive.max()) if positive.size else (1.0, 1.0)
    return {"tau": np.geomspace(lo / 3.0, 3.0 * hi, 20), "shape": SHAPES}


def _weibull_shape(series: Series):
    """tau where 1 - 1/e of the change is done; shape from log(-log p) on log x."""
    y0, plateau = shapes.ends(series.u, series.y)
    if y0 == plateau:
        return None
    tau = shapes.crossing(series.u, series.y, plateau + math.exp(-1.0) * (y0 - plateau))
    p = (series.y - plateau) / (y0 - plateau)
    keep = (p > 0.05) & (p < 0.95) & (series.x > 0)
    fit = shapes.line(np.log(series.x[keep]), np.log(-np.log(p[keep])))
    if tau is None or tau <= 0 or fit is None or fit[1] <= 0:
        return None
    return {"tau": tau, "shape": fit[1]}


_Y0 = ParameterInfo("y0", "The response at x = 0; units of y.", "any")
_PLATEAU = ParameterInfo("plateau", "The level y approaches as x grows; units of y.", "any")

EXPONENTIAL = Builtin(
    name="exponential",
    description="First-order approach to a plateau (decay or rise) at rate k; reports the "
                "half-life ln 2/k. Hold y0 at 0 with fixed for b1*(1 - exp(-b2*x)). "
                "Automatic start values.",
    equations={"linear": "plateau + (y0 - plateau)*exp(-k*x)"},
    parameters=(_Y0, _PLATEAU, ParameterInfo(
        "k", "Rate constant, per unit of x: the distance to the plateau shrinks by the "
        "factor exp(-k) per unit of x.", "any but 0 (> 0: approach to the plateau)")),
    linear=("y0", "plateau"), basis=_exp_basis, axes=_exp_axes, shape_start=_exp_shape,
    derived=(_half_life("half_life", "k", "the distance to the plateau"),))

BIEXPONENTIAL = Builtin(
    name="biexponential",
    description="Sum of two exponential decays to 0 (fast and slow phase); reports both "
                "half-lives. Automatic start values.",
    equations={"linear": "a_fast*exp(-k_fast*x) + a_slow*exp(-k_slow*x)"},
    parameters=(
        ParameterInfo("a_fast", "Size of the fast phase at x = 0; units of y.", "any"),
        ParameterInfo("k_fast", "Rate constant of the fast phase, per unit of x.",
                      "> k_slow (reported so)"),
        ParameterInfo("a_slow", "Size of the slow phase at x = 0; units of y.", "any"),
        ParameterInfo("k_slow", "Rate constant of the slow phase, per unit of x.",
                      "any (> 0: decay)")),
    linear=("a_fast", "a_slow"), basis=_biexp_basis, axes=_biexp_axes,
    shape_start=_biexp_shape, canonical=_biexp_order,
    derived=(_half_life("half_life_fast", "k_fast", "the fast phase"),
             _half_life("half_life_slow", "k_slow", "the slow phase")))

WEIBULL = Builtin(
    name="weibull",
    description="Weibull approach to a plateau: the exponential with a shape exponent "
                "(shape 1 gives exponential with k = 1/tau). Automatic start values.",
    equations={"linear": "plateau + (y0 - plateau)*exp(-x^shape/tau^shape)"},
    parameters=(_Y0, _PLATEAU, ParameterInfo(
        "tau", "The x where 1 - 1/e (63.2 %) of the change from y0 to the plateau is done; "
        "units of x.", "> 0"), ParameterInfo(
        "shape", "Shape exponent (dimensionless): 1 is first-order, above 1 an S-shaped "
        "start, below 1 a fast start and slow finish.", "> 0")),
    linear=("y0", "plateau"), basis=_weibull_basis, axes=_weibull_axes,
    shape_start=_weibull_shape, x_domain="nonnegative")
