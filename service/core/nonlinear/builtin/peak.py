"""A Gaussian peak on a constant baseline.

Parameterization::

    gaussian_peak: y = baseline + height*exp(-(x - centre)^2/(2*width^2))

``width`` is the standard deviation of the bell (reported > 0; the curve is the
same for -width); the full width at half maximum 2 sqrt(2 ln 2) width is
reported beside the parameters.
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
    u_span,
)

CENTRES, WIDTHS = 25, 16
FWHM = 2.0 * math.sqrt(2.0 * math.log(2.0))


def _basis(series: Series, nl) -> tuple[np.ndarray, ...]:
    bell = np.exp(-0.5 * ((series.u - nl["centre"]) / nl["width"]) ** 2)
    return np.ones_like(bell), bell


def _axes(series: Series):
    lo, hi, span = u_span(series)
    levels = np.unique(series.u)
    gaps = np.diff(levels)
    finest = float(gaps.min()) if gaps.size else span / 100.0
    return {"centre": np.linspace(lo - 0.1 * span, hi + 0.1 * span, CENTRES),
            "width": np.geomspace(finest / 2.0, 2.0 * span, WIDTHS)}


def _shape(series: Series):
    """Centre at the largest departure from the median; width from the half-height crossings."""
    levels, means = shapes.by_u(series.u, series.y)
    if levels.size < 3:
        return None
    departure = means - np.median(means)
    top = int(np.argmax(np.abs(departure)))
    half = 0.5 * abs(departure[top])
    inside = np.abs(departure) >= half
    left, right = top, top
    while left > 0 and inside[left - 1]:
        left -= 1
    while right < levels.size - 1 and inside[right + 1]:
        right += 1
    spread = levels[right] - levels[left]
    width = spread / FWHM if spread > 0 else u_span(series)[2] / 10.0
    return {"centre": float(levels[top]), "width": float(width)}


def _positive_width(values: dict[str, float]) -> dict[str, float]:
    return {**values, "width": abs(values["width"])}


GAUSSIAN_PEAK = Builtin(
    name="gaussian_peak",
    description="A Gaussian peak on a constant baseline: baseline, height, centre, width; "
                "reports the full width at half maximum. Automatic start values.",
    equations={"linear": "baseline + height*exp(-(x - centre)^2/(2*width^2))"},
    parameters=(
        ParameterInfo("baseline", "The level far from the peak; units of y.", "any"),
        ParameterInfo("height", "Peak height above the baseline (negative: a dip); units "
                      "of y.", "any"),
        ParameterInfo("centre", "The x of the peak's top; units of x.", "any"),
        ParameterInfo("width", "Standard deviation of the bell; units of x.",
                      "> 0 (reported so)")),
    linear=("baseline", "height"), basis=_basis, axes=_axes, shape_start=_shape,
    canonical=_positive_width,
    derived=(Derived("fwhm", "Full width at half maximum, 2 sqrt(2 ln 2) width; units of x.",
                     "width", lambda w: FWHM * w, lambda w: FWHM + 0.0 * w, (0.0, np.inf)),))
