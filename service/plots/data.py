"""The numbers a figure needs, gathered once from a core ``FitReport`` and the caller's data."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from service.core import FitReport, Prediction, Selection, predict
from service.core.results import TestResult

DEFAULT_GRID_POINTS = 200
FLAG_KINDS = ("outlier", "high_leverage", "influential")  # the diagnostics' three point flags


@dataclass(frozen=True, slots=True)
class PlotData:
    """Used points (original positions ``index``) with their residual forms and the curve.

    ``residual`` is on the fitting scale (after ``transform_y``) and weighted
    (``sqrt(w) (y - fit)``) for weighted fits, so all residual forms share one
    variance; ``studentized`` is externally studentized. ``flags`` maps each of
    :data:`FLAG_KINDS` to a mask of the points the core's diagnostics flagged,
    and ``thresholds`` holds the cut-offs it used (``Diagnostics.thresholds``:
    ``outlier_t``, ``leverage``, ``cooks_distance``...), empty without diagnostics.
    """

    index: np.ndarray
    x: np.ndarray
    y: np.ndarray
    residual: np.ndarray
    studentized: np.ndarray
    leverage: np.ndarray
    weights: np.ndarray | None
    flags: Mapping[str, np.ndarray]
    thresholds: Mapping[str, float]
    breusch_pagan: TestResult | None
    grid: Prediction
    selection: Selection
    model: object
    degree: int
    n_parameters: int
    weighted: bool
    x_min: float
    x_max: float

    @property
    def n(self) -> int:
        """Number of points drawn."""
        return int(self.x.size)

    @property
    def df_residual(self) -> int:
        """Residual degrees of freedom of the fit, ``n - p``."""
        return self.n - self.n_parameters

    def threshold(self, name: str) -> float:
        """One cut-off of the diagnostics, NaN when it was not computed."""
        return float(self.thresholds.get(name, np.nan))


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
    grid = report.grid if report.grid is not None and report.grid.x.size else predict(
        model, np.linspace(model.x_min, model.x_max, DEFAULT_GRID_POINTS))
    used_weights = None
    if weights is not None and model.weighted:
        used_weights = np.asarray(weights, dtype=float)[index]
    empty = np.full(index.size, np.nan)
    residual = studentized = leverage = empty
    flags = {kind: np.zeros(index.size, dtype=bool) for kind in FLAG_KINDS}
    thresholds, breusch_pagan = {}, None
    if diag is not None:
        residual = np.asarray(diag.residuals, dtype=float)
        if used_weights is not None:
            residual = residual * np.sqrt(used_weights)
        studentized = np.asarray(diag.studentized, dtype=float)
        leverage = np.asarray(diag.leverage, dtype=float)
        for kind, positions in zip(FLAG_KINDS, (diag.outliers, diag.high_leverage,
                                                diag.influential), strict=True):
            flags[kind] = np.isin(index, np.asarray(positions, dtype=int))
        thresholds = dict(diag.thresholds)
        breusch_pagan = next((t for t in diag.tests if t.name == "breusch_pagan"), None)
    return PlotData(index=index, x=x_all[index], y=y_all[index], residual=residual,
                    studentized=studentized, leverage=leverage, weights=used_weights,
                    flags=flags, thresholds=thresholds, breusch_pagan=breusch_pagan,
                    grid=grid, selection=report.selection, model=model,
                    degree=model.degree, n_parameters=len(model.terms),
                    weighted=model.weighted, x_min=model.x_min, x_max=model.x_max)
