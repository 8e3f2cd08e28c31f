"""Four- and five-parameter logistic dose-response curves, on x or on log x.

Parameterization (documented in ``GET /v1/families``)::

    logistic4, scale log:    y = y_right + (y_left - y_right)/(1 + x^slope/ec50^slope)
    logistic4, scale linear: y = y_right + (y_left - y_right)/(1 + exp(slope*(x - ec50)))
    logistic5: the denominator (1 + c*z)^asymmetry with c = 2^(1/asymmetry) - 1

where z is ``(x/ec50)^slope`` or ``exp(slope*(x - ec50))``. ``ec50`` is the x of
the half-way response in both families (the constant c puts it there for any
asymmetry), so the five-parameter curve nests the four-parameter one at
asymmetry = 1 with every other parameter keeping its meaning. The log-scale
form is written with ``x^slope/ec50^slope`` so that x = 0 (zero-dose controls)
is a valid point with exact derivatives. The four-parameter curve is reported
with slope > 0: the same curve with slope < 0 is the mirror
``(y_left, y_right, slope) -> (y_right, y_left, -slope)``. The five-parameter
curve has no such mirror (its asymmetry sits at the y_right end when slope > 0),
so both signs of the slope are searched.
"""

from __future__ import annotations

import numpy as np

from service.core.nonlinear.builtin import shapes
from service.core.nonlinear.builtin.definition import (
    LINEAR,
    LOG,
    Builtin,
    ParameterInfo,
    Series,
    u_span,
)

MID_POINTS, STEEPNESS = 17, np.geomspace(0.5, 100.0, 10)  # slope x (u range)
ASYMMETRY = np.array([0.1, 0.25, 0.5, 1.0, 2.0, 4.0, 10.0])

_LEFT = ParameterInfo("y_left", "Asymptote at the low-x end (x -> 0 on the log scale, "
                      "x -> -infinity on the linear scale) when slope > 0; units of y.", "any")
_RIGHT = ParameterInfo("y_right", "Asymptote at the high-x end (x -> infinity) when "
                       "slope > 0; units of y.", "any")
_EC50 = ParameterInfo("ec50", "The x of the half-way response, y = (y_left + y_right)/2 "
                      "(EC50 or IC50 for doses); units of x.",
                      "> 0 on the log scale; any on the linear scale")


def _slope(constraint: str) -> ParameterInfo:
    return ParameterInfo("slope", "Steepness: per unit of ln x on the log scale (the Hill "
                         "coefficient), per unit of x on the linear scale; y goes from y_left "
                         "to y_right as x grows when slope > 0.", constraint)


def _z(series: Series, slope: np.ndarray, ec50: np.ndarray) -> np.ndarray:
    """``(x/ec50)^slope`` (log scale) or ``exp(slope (x - ec50))``, vectorized over a grid."""
    if series.scale == LOG:
        return np.exp(slope * (series.u - np.log(ec50)))
    return np.exp(slope * (series.u - ec50))


def _basis4(series: Series, nl) -> tuple[np.ndarray, ...]:
    s = 1.0 / (1.0 + _z(series, nl["slope"], nl["ec50"]))
    return s, 1.0 - s


def _basis5(series: Series, nl) -> tuple[np.ndarray, ...]:
    g = nl["asymmetry"]
    s = (1.0 + (2.0 ** (1.0 / g) - 1.0) * _z(series, nl["slope"], nl["ec50"])) ** (-g)
    return s, 1.0 - s


def _mid_and_slopes(series: Series) -> tuple[np.ndarray, np.ndarray]:
    lo, hi, span = u_span(series)
    mids = np.linspace(lo - 0.25 * span, hi + 0.25 * span, MID_POINTS)
    return (np.exp(mids) if series.scale == LOG else mids), STEEPNESS / span


def _axes4(series: Series):
    ec50, slopes = _mid_and_slopes(series)
    return {"slope": slopes, "ec50": ec50}


def _axes5(series: Series):
    ec50, slopes = _mid_and_slopes(series)
    if series.scale == LOG and np.isinf(series.u).any():  # x = 0: only slope > 0 is finite
        signed = slopes
    else:
        signed = np.concatenate([-slopes[::-1], slopes])
    return {"slope": signed, "ec50": ec50, "asymmetry": ASYMMETRY}


def _shape4(series: Series):
    left, right = shapes.ends(series.u, series.y)
    mid = shapes.crossing(series.u, series.y, 0.5 * (left + right))
    slope = shapes.logit_slope(series.u, series.y, left, right)
    if mid is None or slope is None or slope <= 0:
        return None
    return {"slope": slope, "ec50": float(np.exp(mid)) if series.scale == LOG else mid}


def _shape5(series: Series):
    found = _shape4(series)
    return None if found is None else {**found, "asymmetry": 1.0}


def _mirror(values: dict[str, float]) -> dict[str, float]:
    if values["slope"] >= 0:
        return values
    return {**values, "y_left": values["y_right"], "y_right": values["y_left"],
            "slope": -values["slope"]}


_LOG4 = "y_right + (y_left - y_right)/(1 + x^slope/ec50^slope)"
_LIN4 = "y_right + (y_left - y_right)/(1 + exp(slope*(x - ec50)))"
_C = "(2^(1/asymmetry) - 1)"

LOGISTIC4 = Builtin(
    name="logistic4",
    description="Four-parameter logistic dose-response curve (two asymptotes, slope, ec50) "
                "on log x (default) or on x; automatic start values.",
    equations={LOG: _LOG4, LINEAR: _LIN4},
    parameters=(_LEFT, _RIGHT, _slope("> 0 (a falling curve has y_right < y_left)"), _EC50),
    linear=("y_left", "y_right"), basis=_basis4, axes=_axes4, shape_start=_shape4,
    canonical=_mirror)

LOGISTIC5 = Builtin(
    name="logistic5",
    description="Five-parameter logistic dose-response curve: logistic4 with an asymmetry "
                "(1 gives logistic4); ec50 stays the half-way x. Automatic start values.",
    equations={LOG: f"y_right + (y_left - y_right)/(1 + {_C}*x^slope/ec50^slope)^asymmetry",
               LINEAR: f"y_right + (y_left - y_right)/(1 + {_C}*exp(slope*(x - ec50)))"
                       "^asymmetry"},
    parameters=(_LEFT, _RIGHT, _slope("any but 0; with slope < 0 the ends swap (y_left is "
                                      "then the high-x asymptote)"), _EC50,
                ParameterInfo("asymmetry", "1 for the symmetric logistic4; with slope > 0 "
                              "the curve approaches y_right at asymmetry times the rate at "
                              "which it leaves y_left (dimensionless).", "> 0")),
    linear=("y_left", "y_right"), basis=_basis5, axes=_axes5, shape_start=_shape5)
