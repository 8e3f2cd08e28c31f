"""The numbers a figure needs, gathered once from a core ``FitReport`` and the caller's data."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from service.core import FitReport, Prediction, Selection, predict
from service.core.data import transforms

DEFAULT_GRID_POINTS = 200


@dataclass(frozen=True, slots=True)
class PlotData:
    """Used points (original positions ``index``) with their residual forms and the curve.

    ``fitted`` and ``residual`` are on the fitting scale (after ``transform_y``);
    ``residual`` is weighted (``sqrt(w) (y - fit)``) for weighted fits, so all
    residual forms share one variance. ``flagged`` marks outliers and
    influential points as the core's diagnostics found them.
    """

    index: np.ndarray
    x: np.ndarray
    y: np.ndarray
    fitted: np.ndarray
    residual: np.ndarray
    standardized: np.ndarray
    studentized: np.ndarray
    leverage: np.ndarray
    flagged: np.ndarray
    grid: Prediction
    selection: Selection
    degree: int
    n_parameters: int
    weighted: bool
    fitted_label: str
    x_min: float
    x_max: float

    @property
    def n(self) -> int:
        """Number of points drawn."""
        return int(self.x.size)


def gather(report: FitReport, x, y, weights=None) -> PlotData:
    """Collect what the panels draw.

    Parameters
    ----------
    report : FitReport
        The core's analysis of ``x``, ``y`` (and ``weights``).
    x, y, weights : array_like
        The arrays the report was computed from (original positions).
    """
    x_all, y_all = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    model, diag = report.model, report.diagnostics
    if diag is not None:
        index = np.asarray(diag.index, dtype=int)
    else:
        index = np.setdiff1d(np.arange(report.n_input), np.asarray(report.dropped, dtype=int))
    xs, ys = x_all[index], y_all[index]
    grid = report.grid if report.grid is not None and report.grid.x.size else predict(
        model, np.linspace(model.x_min, model.x_max, DEFAULT_GRID_POINTS))
    empty = np.full(index.size, np.nan)
    fitted = residual = standardized = studentized = leverage = empty
    flagged = np.zeros(index.size, dtype=bool)
    if diag is not None:
        raw = np.asarray(diag.residuals, dtype=float)
        y_fit_scale = transforms.apply(model.transform_y, ys, field="y", index=index)
        fitted = y_fit_scale - raw
        residual = raw
        if weights is not None and model.weighted:
            residual = raw * np.sqrt(np.asarray(weights, dtype=float)[index])
        standardized = np.asarray(diag.standardized, dtype=float)
        studentized = np.asarray(diag.studentized, dtype=float)
        leverage = np.asarray(diag.leverage, dtype=float)
        flagged = np.isin(index, np.asarray(diag.outliers + diag.influential, dtype=int))
    label = "Fitted value" if model.transform_y == "none" else (
        f"Fitted value ({model.transform_y} of y)")
    return PlotData(index=index, x=xs, y=ys, fitted=fitted, residual=residual,
                    standardized=standardized, studentized=studentized, leverage=leverage,
                    flagged=flagged, grid=grid, selection=report.selection,
                    degree=model.degree, n_parameters=len(model.terms),
                    weighted=model.weighted, fitted_label=label,
                    x_min=model.x_min, x_max=model.x_max)
