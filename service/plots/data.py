"""The numbers a figure needs, gathered once from a core report and the caller's data.

Any family's report: a polynomial ``FitReport`` or a nonlinear family's report (its
``model`` a ``FittedCurve``: no degree selection, parameters by name). With a
comparison (``model.candidates``) the chosen candidate's report is drawn and
``candidates`` holds every fitted candidate's curve for the selection panel. On a log x
axis the curve is evaluated on geometrically spaced x so it is smooth on that axis, from
the smallest positive x: points at x <= 0 (zero-dose blanks) are fitted with the rest but
cannot be placed on that axis, and ``hidden`` counts them for the figure's note.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from service.core import Prediction, Selection, predict
from service.core.results import TestResult

DEFAULT_GRID_POINTS = 200
FLAG_KINDS = ("outlier", "high_leverage", "influential")  # the diagnostics' three point flags


@dataclass(frozen=True, slots=True)
class CandidateCurve:
    """One candidate of a comparison: its label, criterion value and curve on the grid."""

    label: str
    criterion: float
    chosen: bool
    x: np.ndarray
    fit: np.ndarray


@dataclass(frozen=True, slots=True)
class PlotData:
    """Used points (original positions ``index``) with their residual forms and the curve.

    ``residual`` is on the fitting scale (after ``transform_y``) and weighted
    (``sqrt(w) (y - fit)``) for weighted fits, so all residual forms share one
    variance; ``studentized`` is externally studentized. ``flags`` maps each of
    :data:`FLAG_KINDS` to a mask of the points the core's diagnostics flagged,
    and ``thresholds`` holds the cut-offs it used (``Diagnostics.thresholds``:
    ``outlier_t``, ``leverage``, ``cooks_distance``...), empty without diagnostics.
    ``x_min``, ``x_max`` are the x range drawn: the fit's, from the smallest positive x on
    a log axis, where ``hidden`` used points at x <= 0 are fitted but not drawn.
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
    selection: Selection | None
    model: object
    degree: int | None
    n_parameters: int
    weighted: bool
    x_min: float
    x_max: float
    family: str = "polynomial"
    candidates: tuple[CandidateCurve, ...] = ()
    criterion_name: str = ""
    log_x: bool = False
    hidden: int = 0

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


def hidden_note(data: PlotData) -> str:
    """``"; 2 points at x ≤ 0 fitted, not drawn"`` for a panel's note line ("" when none)."""
    if not data.hidden:
        return ""
    return f"; {data.hidden} point{'s' if data.hidden != 1 else ''} at x ≤ 0 fitted, not drawn"


def not_drawn(report, x) -> int:
    """How many points ``report`` fitted at x <= 0 (a log x axis cannot draw them)."""
    used = np.delete(np.asarray(x, dtype=float), np.asarray(report.dropped, dtype=int))
    return int(np.count_nonzero(used <= 0))


def describe(data: PlotData) -> str:
    """A short name of the fitted model: ``polynomial of degree 2``, ``logistic4``..."""
    if data.family == "polynomial":
        return f"polynomial of degree {data.degree}"
    return "the caller's equation" if data.family == "expression" else data.family


def curve_x(x_min: float, x_max: float, log_x: bool, points: int = DEFAULT_GRID_POINTS):
    """Where a curve is drawn: equally spaced, or geometrically on a log x axis."""
    if log_x and x_min > 0:
        return np.geomspace(x_min, x_max, points)
    return np.linspace(x_min, x_max, points)


def gather(report, x, y, weights=None, *, log_x: bool = False, comparison=None) -> PlotData:
    """Collect what the panels draw.

    Parameters
    ----------
    report : FitReport or NonlinearReport
        The core's analysis of ``x``, ``y`` (and ``weights``); with a comparison, the
        chosen candidate's.
    x, y, weights : array_like
        The arrays the report was computed from (original positions).
    log_x : bool
        The x axis is logarithmic (every x > 0): curves on a geometric grid.
    comparison : Comparison, optional
        :func:`service.core.compare.compare`'s result, for the selection panel.
    """
    x_all, y_all = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    model, diag = report.model, report.diagnostics
    if diag is not None:
        index = np.asarray(diag.index, dtype=int)
    else:
        index = np.setdiff1d(np.arange(report.n_input), np.asarray(report.dropped, dtype=int))
    x_used = x_all[index]
    x_min, hidden = model.x_min, 0
    if log_x:
        hidden = int(np.count_nonzero(x_used <= 0))
        x_min = float(x_used[x_used > 0].min()) if hidden else model.x_min
        grid = predict(model, curve_x(x_min, model.x_max, True))
    elif report.grid is not None and report.grid.x.size:
        grid = report.grid
    else:
        grid = predict(model, curve_x(model.x_min, model.x_max, False))
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
    return PlotData(index=index, x=x_used, y=y_all[index], residual=residual,
                    studentized=studentized, leverage=leverage, weights=used_weights,
                    flags=flags, thresholds=thresholds, breusch_pagan=breusch_pagan,
                    grid=grid, selection=getattr(report, "selection", None), model=model,
                    degree=getattr(model, "degree", None),
                    n_parameters=int(report.statistics.n_parameters),
                    weighted=model.weighted, x_min=x_min, x_max=model.x_max,
                    family=getattr(model, "family", None) or "polynomial",
                    candidates=_candidates(comparison, log_x, x_min if hidden else None),
                    criterion_name=_criterion(comparison), log_x=log_x, hidden=hidden)


def _criterion(comparison) -> str:
    """The criterion the comparison ranks by (the F-test walk ends by AICc)."""
    if comparison is None:
        return ""
    return {"aic": "AIC", "bic": "BIC"}.get(comparison.select, "AICc")


def _candidates(comparison, log_x: bool, positive: float | None = None,
                ) -> tuple[CandidateCurve, ...]:
    """Every fitted candidate's curve over the x range of all of them (from ``positive``,
    the smallest positive x, on a log axis over data with x <= 0)."""
    if comparison is None:
        return ()
    key = "aicc" if comparison.select == "f_test" else comparison.select
    fitted = [(row, r) for row, r in zip(comparison.candidates, comparison.reports,
                                         strict=True) if r is not None]
    if not fitted:
        return ()
    lo = positive if positive is not None else min(r.model.x_min for _, r in fitted)
    hi = max(r.model.x_max for _, r in fitted)
    xs = curve_x(lo, hi, log_x)
    chosen = comparison.candidates[comparison.chosen].label
    return tuple(CandidateCurve(row.label, float(getattr(row, key)), row.label == chosen, xs,
                                np.asarray(predict(r.model, xs).fit, dtype=float))
                 for row, r in fitted)
