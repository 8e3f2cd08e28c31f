"""Sigmoidal growth curves from zero: logistic growth and the Gompertz curve.

Parameterization (asymptote, rate, x of the inflection point)::

    logistic_growth: y = asymptote/(1 + exp(-rate*(x - inflection)))
    gompertz:        y = asymptote*exp(-exp(-rate*(x - inflection)))

Both start at 0 for x -> -infinity (rate > 0) and rise to the asymptote; the
logistic curve is symmetric about its inflection (y = asymptote/2 there, maximum
slope asymptote*rate/4), the Gompertz curve is not (y = asymptote/e at the
inflection, maximum slope asymptote*rate/e). NIST's Rat42 curve
``b1/(1 + exp(b2 - b3*x))`` is logistic growth with asymptote = b1, rate = b3
and inflection = b2/b3.
"""

from __future__ import annotations

import numpy as np

from service.core.nonlinear.builtin import shapes
from service.core.nonlinear.builtin.definition import Builtin, ParameterInfo, Series, u_span

MID_POINTS, STEEPNESS = 17, np.geomspace(0.5, 100.0, 10)  # rate x (x range)


def _asymptote(level: str) -> ParameterInfo:
    return ParameterInfo("asymptote", f"The level y approaches as x grows (rate > 0); y is "
                         f"{level} of it at the inflection; units of y.", "any (> 0 for growth)")


def _rate(peak: str) -> ParameterInfo:
    return ParameterInfo("rate", f"Rate constant, per unit of x; the steepest slope is "
                         f"asymptote*rate{peak} at the inflection.", "any but 0 (> 0: growth)")


_INFLECTION = ParameterInfo("inflection", "The x of the inflection point (the steepest "
                            "growth); units of x.", "any")


def _axes(series: Series):
    lo, hi, span = u_span(series)
    rates = STEEPNESS / span
    return {"rate": np.concatenate([-rates[::-1], rates]),
            "inflection": np.linspace(lo - 0.25 * span, hi + 0.25 * span, MID_POINTS)}


def _logistic_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    return (1.0 / (1.0 + np.exp(-nl["rate"] * (series.u - nl["inflection"]))),)


def _gompertz_basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    return (np.exp(-np.exp(-nl["rate"] * (series.u - nl["inflection"]))),)


def _shape(series: Series, share: float, link):
    """Asymptote from the end farther from 0; inflection where y crosses share*asymptote;
    rate from the linearized curve link(y/asymptote) = rate*(x - inflection)."""
    left, right = shapes.ends(series.u, series.y)
    asymptote = right if abs(right) >= abs(left) else left
    if asymptote == 0:
        return None
    mid = shapes.crossing(series.u, series.y, share * asymptote)
    p = series.y / (1.02 * asymptote)
    inside = (p > 0.05) & (p < 0.95)
    fit = shapes.line(series.u[inside], link(p[inside])) if inside.sum() >= 2 else None
    if mid is None or fit is None or fit[1] == 0:
        return None
    return {"rate": fit[1], "inflection": mid}


def _logistic_shape(series: Series):
    return _shape(series, 0.5, lambda p: np.log(p / (1 - p)))


def _gompertz_shape(series: Series):
    return _shape(series, float(np.exp(-1.0)), lambda p: -np.log(-np.log(p)))


LOGISTIC_GROWTH = Builtin(
    name="logistic_growth",
    description="Logistic (symmetric sigmoidal) growth from 0 to an asymptote: asymptote, "
                "rate, x of the inflection. Automatic start values.",
    equations={"linear": "asymptote/(1 + exp(-rate*(x - inflection)))"},
    parameters=(_asymptote("half"), _rate("/4"), _INFLECTION),
    linear=("asymptote",), basis=_logistic_basis, axes=_axes, shape_start=_logistic_shape)

GOMPERTZ = Builtin(
    name="gompertz",
    description="Gompertz (asymmetric sigmoidal) growth from 0 to an asymptote: asymptote, "
                "rate, x of the inflection. Automatic start values.",
    equations={"linear": "asymptote*exp(-exp(-rate*(x - inflection)))"},
    parameters=(_asymptote("1/e"), _rate("/e"), _INFLECTION),
    linear=("asymptote",), basis=_gompertz_basis, axes=_axes, shape_start=_gompertz_shape)
