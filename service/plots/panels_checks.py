"""The residual panels: studentized residuals along x, the influence map, spread, half-normal.

Every cut-off drawn is a number of the fit's own ``Diagnostics.thresholds``
(``outlier_t``, ``leverage``, ``cooks_distance``), never a constant here, and
points carry the flags the diagnostics raised (:func:`service.plots.marks.flags`).
Residual forms are the core's (``service.core.checks.kernels.point_forms``):
externally studentized ``t``, leverage ``h``.
"""

from __future__ import annotations

import numpy as np

from service.plots import basis, marks, style
from service.plots.data import PlotData, hidden_note
from service.plots.envelope import envelope
from service.plots.options import PANEL_TITLES, PlotOptions
from service.plots.spread import spread

CONTOUR_POINTS = 400
H_END = 0.999  # the contour meets zero at leverage one, where Cook's distance is undefined
UNDEFINED = "not defined for this fit (an exact fit, or fewer than 2 residual df)"


def draw_studentized_residuals(ax, data: PlotData, options: PlotOptions) -> None:
    """Externally studentized residuals against x, with the outlier limits."""
    t = data.studentized
    ok = np.isfinite(t)
    ax.axhline(0.0, **style.REFERENCE)
    limit = marks.outlier_limits(ax, data) if ok.any() else np.nan
    ax.plot(data.x[ok], t[ok], **style.DATA)
    marks.flags(ax, data, data.x, t)
    ax.set_ylim(-(reach := marks.symmetric_limit(t, limit)), reach)
    note = (f"Bonferroni limits ±{limit:.3g} (α = {data.threshold('outlier_alpha'):g})"
            if np.isfinite(limit) else UNDEFINED) + _hidden(data, options)
    marks.finish(ax, PANEL_TITLES["studentized_residuals"], note, options.x_label or "x",
                 "studentized residual")


def _hidden(data: PlotData, options: PlotOptions) -> str:
    """The points not drawn on a log x axis, said here when no fit panel says it."""
    return "" if "fit" in options.panels else hidden_note(data)


def cook_contour(data: PlotData, h_max: float) -> tuple[np.ndarray, np.ndarray]:
    """Leverages and |studentized residual| at Cook's distance = the flag cut-off.

    Cook's distance ``D = r² h / (p (1 - h))`` with ``r`` internally studentized,
    and ``t² = r² (df - 1) / (df - r²)`` (the two studentizations, common practice);
    so the contour is ``r² = D p (1 - h) / h``, defined where ``r² < df``, that is
    for ``h`` above ``D p / (df + D p)``.
    """
    cut, p, df = data.threshold("cooks_distance"), data.n_parameters, data.df_residual
    if not (np.isfinite(cut) and cut > 0 and df > 1 and p > 0):
        return np.empty(0), np.empty(0)
    start, end = cut * p / (df + cut * p), min(h_max, H_END)
    if start >= end:
        return np.empty(0), np.empty(0)
    h = start + (end - start) * np.linspace(0.0, 1.0, CONTOUR_POINTS)[1:] ** 2
    r2 = cut * p * (1 - h) / h
    return h, np.sqrt(r2 * (df - 1) / (df - r2))


def draw_influence(ax, data: PlotData, options: PlotOptions) -> None:
    """Studentized residuals against leverage, with the three cut-offs of the flags."""
    h, t = data.leverage, data.studentized
    ok = np.isfinite(h) & np.isfinite(t)
    lev, cook = data.threshold("leverage"), data.threshold("cooks_distance")
    ax.axhline(0.0, **style.REFERENCE)
    limit = marks.outlier_limits(ax, data) if ok.any() else np.nan
    lev = lev if ok.any() and 0 < lev < 1 else np.nan  # a cut-off at 1 or above flags nothing
    reach_h = [0.1]
    if ok.any():
        reach_h.append(1.12 * float(h[ok].max()))
    if np.isfinite(lev):
        reach_h.append(1.25 * lev)
        ax.axvline(lev, label=f"leverage cut-off {lev:.3g}", **style.LEVERAGE_CUT)
    right = min(1.0, max(reach_h))
    contour_h, contour_t = cook_contour(data, right)
    if contour_h.size and ok.any():
        ax.plot(contour_h, contour_t, label=f"Cook's distance cut-off {cook:.3g}",
                **style.COOK_CUT)
        ax.plot(contour_h, -contour_t, **style.COOK_CUT)
    ax.plot(h[ok], t[ok], **style.DATA)
    marks.flags(ax, data, h, t)
    ax.set_xlim(0.0, 1.04 * right)  # room for the rings of points at leverage one
    ax.set_ylim(-(reach := marks.symmetric_limit(t[ok], limit)), reach)
    flagged = int(np.count_nonzero(np.logical_or.reduce(list(data.flags.values()))))
    note = f"{flagged} of {data.n} points flagged" if ok.any() else UNDEFINED
    marks.finish(ax, PANEL_TITLES["influence"], note, "leverage h", "studentized residual")


def draw_spread(ax, data: PlotData, options: PlotOptions) -> None:
    """Squared residuals over their mean against x, with the Breusch-Pagan auxiliary fit."""
    found = spread(data)
    ok = np.isfinite(found.scaled)
    ax.axhline(1.0, label="constant spread", **style.REFERENCE)
    ax.plot(data.x[ok], found.scaled[ok], **style.DATA)
    marks.flags(ax, data, data.x, found.scaled)
    if found.curve_x.size:
        ax.plot(found.curve_x, found.curve_y,
                label=f"Breusch–Pagan auxiliary fit, degree {found.degree}", **style.AUXILIARY)
        note = f"Breusch–Pagan p = {found.p_value:.2g}"
    else:
        note = "Breusch–Pagan test not computed"
    top = [1.0]
    if ok.any():
        top.append(float(np.max(found.scaled[ok])))
    if found.curve_y.size:
        top.append(float(np.max(found.curve_y)))
    ax.set_ylim(0.0, 1.08 * max(top))
    marks.finish(ax, PANEL_TITLES["spread"], note + _hidden(data, options),
                 options.x_label or "x", "e² ÷ mean e²")


def draw_half_normal(ax, data: PlotData, options: PlotOptions) -> None:
    """Sorted |studentized residuals| at half-normal positions, in a simulated envelope."""
    found = None
    if np.isfinite(data.studentized).sum() >= 2:
        q = basis.residual_basis(data.model, data.x, data.weights)
        found = envelope(data.studentized, q) if np.isfinite(q).all() else None
    note = UNDEFINED
    if found is not None:
        ax.fill_between(found.positions, found.lower, found.upper,
                        label=f"envelope of {found.simulations} simulated fits",
                        **style.ENVELOPE)
        ax.plot(found.positions, found.mean, label="mean of the simulated fits",
                **style.ENVELOPE_MEAN)
        ax.plot(found.positions, found.observed, **style.DATA)
        marks.flags(ax, data, found.positions, found.observed, order=found.order)
        ax.set_xlim(0.0, 1.08 * float(found.positions[-1]))
        ax.set_ylim(0.0, 1.1 * float(np.nanmax([found.observed[-1], found.upper[-1]])))
        note = f"band: {found.simulations} simulated fits"
    marks.finish(ax, PANEL_TITLES["half_normal"], note, "half-normal quantile",
                 "|studentized residual|")
