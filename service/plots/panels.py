"""One function per panel: ``draw(ax, data, options)`` on a matplotlib Axes (object API only).

Residual panels use the forms the core computes (``service.core.polynomial.diagnostics``):
weighted residuals, internally studentized ("standardized") and externally
studentized residuals, leverage and Cook's distance. Positions in the normal
quantile panel are Blom's ``(i - 3/8) / (n + 1/4)`` (common practice).
"""

from __future__ import annotations

import numpy as np
from matplotlib import ticker
from scipy import special

from service.plots import style
from service.plots.data import PlotData
from service.plots.options import PANEL_TITLES, PlotOptions

COOK_CONTOURS = (0.5, 1.0)  # the usual reference levels of Cook's distance (common practice)
BEST_LEGEND_MAX_POINTS = 2000  # 'best' legend placement scans every point: only when cheap


def _legend(ax, n: int) -> None:
    ax.legend(loc="best" if n <= BEST_LEGEND_MAX_POINTS else "upper right",
              fontsize=style.FONT_SIZE - 1, frameon=True, framealpha=0.85,
              edgecolor="#CCCCCC")


def _finish(ax, name: str, xlabel: str, ylabel: str) -> None:
    ax.set_title(PANEL_TITLES[name], fontsize=style.TITLE_SIZE, loc="left")
    ax.set_xlabel(xlabel, fontsize=style.FONT_SIZE)
    ax.set_ylabel(ylabel, fontsize=style.FONT_SIZE)
    style.style_axes(ax)


def _level(level: float) -> str:
    return f"{100 * level:.4g}%"


def draw_fit(ax, data: PlotData, options: PlotOptions) -> None:
    """Data, the fitted curve, the band for the mean and for a new observation."""
    grid, level = data.grid, _level(data.grid.level)
    ax.fill_between(grid.x, grid.mean_lower, grid.mean_upper, label=f"{level} band, mean",
                    **style.MEAN_BAND)
    ax.plot(grid.x, grid.obs_lower, label=f"{level} band, new observation", **style.OBS_BAND)
    ax.plot(grid.x, grid.obs_upper, **style.OBS_BAND)
    if options.simultaneous:
        ax.plot(grid.x, grid.band_lower, label=f"{level} simultaneous band, whole curve",
                **style.SIM_BAND)
        ax.plot(grid.x, grid.band_upper, **style.SIM_BAND)
    ax.plot(grid.x, grid.fit, label=f"fitted polynomial, degree {data.degree}", **style.CURVE)
    ax.plot(data.x, data.y, label="data", **style.DATA)
    if data.flagged.any():
        ax.plot(data.x[data.flagged], data.y[data.flagged], label="flagged point",
                **style.FLAGGED)
    if grid.x.size and (grid.x.min() < data.x_min or grid.x.max() > data.x_max):
        for edge in (data.x_min, data.x_max):
            ax.axvline(edge, **style.REFERENCE)
    _legend(ax, data.n)
    _finish(ax, "fit", options.x_label or "x", options.y_label or "y")


def draw_residuals(ax, data: PlotData, options: PlotOptions) -> None:
    """Residuals against fitted values, with the zero line."""
    ax.axhline(0.0, **style.REFERENCE)
    ax.plot(data.fitted, data.residual, **style.DATA)
    _flagged(ax, data, data.fitted, data.residual)
    _finish(ax, "residuals", data.fitted_label,
            "Weighted residual" if data.weighted else "Residual")


def draw_normal_quantiles(ax, data: PlotData, options: PlotOptions) -> None:
    """Sorted externally studentized residuals against standard normal quantiles."""
    ok = np.isfinite(data.studentized)
    values, flagged = data.studentized[ok], data.flagged[ok]
    order = np.argsort(values, kind="stable")
    n = values.size
    theory = special.ndtri((np.arange(1, n + 1) - 0.375) / (n + 0.25)) if n else values
    sorted_values, sorted_flags = values[order], flagged[order]
    if n:
        span = np.array([min(theory[0], sorted_values[0]), max(theory[-1], sorted_values[-1])])
        ax.plot(span, span, **style.REFERENCE)
    ax.plot(theory, sorted_values, **style.DATA)
    if sorted_flags.any():
        ax.plot(theory[sorted_flags], sorted_values[sorted_flags], **style.FLAGGED)
    _finish(ax, "normal_quantiles", "Standard normal quantile", "Studentized residual")


def draw_scale_location(ax, data: PlotData, options: PlotOptions) -> None:
    """Square root of the absolute standardized residuals against fitted values."""
    spread = np.sqrt(np.abs(data.standardized))
    ax.plot(data.fitted, spread, **style.DATA)
    _flagged(ax, data, data.fitted, spread)
    _finish(ax, "scale_location", data.fitted_label, "√|standardized residual|")


def draw_leverage(ax, data: PlotData, options: PlotOptions) -> None:
    """Standardized residuals against leverage, with Cook's distance contours."""
    h, r = data.leverage, data.standardized
    ok = np.isfinite(h) & np.isfinite(r)
    ax.axhline(0.0, **style.REFERENCE)
    ax.plot(h[ok], r[ok], **style.DATA)
    _flagged(ax, data, h, r)
    top = float(np.max(np.abs(r[ok]))) if ok.any() else 1.0
    limit = max(2.5, 1.15 * top)
    h_max = float(np.max(h[ok])) if ok.any() else 0.5
    hh = np.linspace(max(1e-3, 0.2 * h_max / 10), min(0.999, 1.1 * h_max), 200)
    for i, d in enumerate(COOK_CONTOURS):
        bound = np.sqrt(d * data.n_parameters * (1 - hh) / hh)
        label = "Cook's distance " + " and ".join(f"{c:g}" for c in COOK_CONTOURS)
        ax.plot(hh, bound, label=label if i == 0 else None,
                **{**style.CONTOUR, "linestyle": "--" if i == 0 else "-."})
        ax.plot(hh, -bound, **{**style.CONTOUR, "linestyle": "--" if i == 0 else "-."})
    ax.set_ylim(-limit, limit)
    ax.set_xlim(0.0, min(1.0, 1.15 * h_max))
    _legend(ax, data.n)
    _finish(ax, "leverage", "Leverage", "Standardized residual")


def draw_selection(ax, data: PlotData, options: PlotOptions) -> None:
    """AIC, AICc and BIC by candidate degree, plus the method's own criterion if different."""
    selection = data.selection
    degrees = np.array([c.degree for c in selection.candidates], dtype=float)
    for key, label, colour, marker in style.CRITERIA:
        values = np.array([getattr(c, key) for c in selection.candidates], dtype=float)
        ax.plot(degrees, values, color=colour, marker=marker, markersize=4, linewidth=1.2,
                label=label)
    ax.axvline(selection.chosen_degree, label=f"chosen degree {selection.chosen_degree}",
               **style.CHOSEN)
    second = _method_axis(ax, selection, degrees)
    handles, labels = ax.get_legend_handles_labels()
    if second is not None:
        more_h, more_l = second.get_legend_handles_labels()
        handles, labels = handles + more_h, labels + more_l
    on_top = second if second is not None else ax  # a twin axis is drawn over the first one
    on_top.legend(handles, labels, loc="best", fontsize=style.FONT_SIZE - 1, framealpha=0.85,
                  edgecolor="#CCCCCC")
    ax.set_xticks(degrees)
    method = "fixed by the caller" if selection.method == "fixed" else (
        f"chosen by {selection.method.replace('_', ' ')}")
    _finish(ax, "selection", f"Degree ({method})", "Information criterion")


def _method_axis(ax, selection, degrees):
    """A second y axis for sequential F p-values, PRESS or adjusted R² when they decide."""
    specs = {"sequential_f": ("p_last", "p-value of the highest power", True),
             "press": ("press", "PRESS", False),
             "adj_r2": ("adj_r_squared", "Adjusted R²", False)}
    if selection.method not in specs:
        return None
    key, label, log = specs[selection.method]
    values = np.array([getattr(c, key) for c in selection.candidates], dtype=float)
    second = ax.twinx()
    second.plot(degrees, values, color=style.OKABE_ITO["reddish_purple"], marker="D",
                markersize=4, linewidth=1.0, linestyle="--", label=label)
    if log and np.any(np.isfinite(values) & (values > 0)):
        second.set_yscale("log")
        # p-values span many decades: a few labelled decades, no minor ticks and plain
        # labels (1e-08): the default minor ticks and mathtext labels triple the render time
        second.yaxis.set_major_locator(ticker.LogLocator(numticks=6))
        second.yaxis.set_minor_locator(ticker.NullLocator())
        second.yaxis.set_major_formatter(ticker.FuncFormatter(lambda v, _: f"{v:g}"))
        second.axhline(selection.alpha, label=f"alpha {selection.alpha:g}",
                       **{**style.REFERENCE, "linestyle": "--"})
    second.set_ylabel(label, fontsize=style.FONT_SIZE)
    second.tick_params(labelsize=style.FONT_SIZE - 0.5, length=3)
    second.spines["top"].set_visible(False)
    return second


def _flagged(ax, data: PlotData, xs: np.ndarray, ys: np.ndarray) -> None:
    if data.flagged.any():
        ax.plot(xs[data.flagged], ys[data.flagged], **style.FLAGGED)


DRAW = {
    "fit": draw_fit,
    "residuals": draw_residuals,
    "normal_quantiles": draw_normal_quantiles,
    "scale_location": draw_scale_location,
    "leverage": draw_leverage,
    "selection": draw_selection,
}
