"""The spread panel's numbers: scaled squared residuals and the Breusch-Pagan auxiliary curve.

The service tests constant variance with Koenker's studentized Breusch-Pagan
test: ``LM = n R²`` of the squared weighted residuals regressed on
``1, t, ..., t^d`` (the powers of x the polynomial uses, unweighted; see
:mod:`service.core.polynomial.diagnostics`). The panel shows exactly that
regression: ``e² / mean(e²)`` at each x and the auxiliary fit through them
(both scaled by the mean, which leaves ``R²`` and the test unchanged). For a nonlinear
family the regressors are ``1, x`` (raw x), as the core tests it. A flat
curve at 1 is constant spread; the test's p-value says how far from flat.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.plots import basis
from service.plots.data import curve_x as curve_points

CURVE_POINTS = 200


@dataclass(frozen=True, slots=True)
class Spread:
    """``scaled`` (one per point, NaN where undefined) and the curve (``curve_x``,
    ``curve_y``; empty when the test was not run), with the test's numbers."""

    scaled: np.ndarray
    curve_x: np.ndarray
    curve_y: np.ndarray
    statistic: float
    p_value: float
    degree: int


def spread(data) -> Spread:
    """The spread panel's content for a :class:`service.plots.data.PlotData`."""
    e2 = data.residual * data.residual
    with np.errstate(all="ignore"):
        mean = float(np.mean(e2)) if e2.size else np.nan
        scaled = e2 / mean if mean > 0 else np.full_like(e2, np.nan)
    test = data.breusch_pagan
    none = np.empty(0)
    if test is None or not np.isfinite(test.p_value) or not test.df:
        return Spread(scaled, none, none, np.nan, np.nan, 0)
    degree = int(test.df[0])
    curve_x = curve_points(data.x_min, data.x_max, data.log_x, CURVE_POINTS)
    coef = np.linalg.lstsq(basis.powers(basis.scaled_x(data.model, data.x), degree), scaled,
                           rcond=None)[0]
    curve_y = basis.powers(basis.scaled_x(data.model, curve_x), degree) @ coef
    return Spread(scaled, curve_x, curve_y, float(test.statistic), float(test.p_value), degree)
