"""One function per panel: ``draw(ax, data, options)`` on a matplotlib Axes (object API only).

``fit`` and ``selection`` are here; the residual panels are in
:mod:`service.plots.panels_checks`. Panels label what they draw and never add
a legend of their own: the figure gathers one strip (:mod:`service.plots.legend`).
"""

from __future__ import annotations

import numpy as np
from matplotlib import ticker

from service.plots import marks, style
from service.plots.data import PlotData, describe, hidden_note
from service.plots.options import COMPARISON_TITLE, PANEL_TITLES, PlotOptions
from service.plots.panels_checks import (
    draw_half_normal,
    draw_influence,
    draw_spread,
    draw_studentized_residuals,
)

METHOD_NAMES = {"sequential_f": "sequential F tests", "aic": "AIC", "aicc": "AICc",
                "bic": "BIC", "press": "PRESS", "adj_r2": "adjusted R²"}


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
    curve = (f"fitted polynomial, degree {data.degree}" if data.family == "polynomial"
             else f"fitted {describe(data)}")
    ax.plot(grid.x, grid.fit, label=curve, **style.CURVE)
    ax.plot(data.x, data.y, label="data", **style.DATA)
    marks.flags(ax, data, data.x, data.y)
    if grid.x.size and (grid.x.min() < data.x_min or grid.x.max() > data.x_max):
        for edge in (data.x_min, data.x_max):
            ax.axvline(edge, **style.REFERENCE)
    marks.finish(ax, PANEL_TITLES["fit"], f"{describe(data)}, {data.n} points, "
                 f"{data.n_parameters} parameters{hidden_note(data)}", options.x_label or "x",
                 options.y_label or "y")


def draw_selection(ax, data: PlotData, options: PlotOptions) -> None:
    """AIC, AICc and BIC by candidate degree, plus the method's own criterion if different;
    for a comparison of candidate models, their curves over the data."""
    if data.candidates:
        draw_candidates(ax, data, options)
        return
    selection = data.selection
    degrees = np.array([c.degree for c in selection.candidates], dtype=float)
    for key, label, colour, marker in style.CRITERIA:
        values = np.array([getattr(c, key) for c in selection.candidates], dtype=float)
        ax.plot(degrees, values, color=colour, marker=marker, markersize=4, linewidth=1.2,
                label=label)
    ax.axvline(selection.chosen_degree, label=f"chosen degree {selection.chosen_degree}",
               **style.CHOSEN)
    _method_axis(ax, selection, degrees)
    ax.set_xticks(degrees)
    method = "fixed by the caller" if selection.method == "fixed" else (
        f"chosen by {METHOD_NAMES.get(selection.method, selection.method)}")
    marks.finish(ax, PANEL_TITLES["selection"], method, "degree", "information criterion")


def draw_candidates(ax, data: PlotData, options: PlotOptions) -> None:
    """Every fitted candidate's curve over the data, the chosen one solid and thick, each
    labelled with the criterion the comparison ranked by."""
    ax.plot(data.x, data.y, label="data", **style.DATA)
    others = iter(style.CANDIDATES)
    for curve in data.candidates:
        look = style.CHOSEN_CANDIDATE if curve.chosen else next(others, style.CANDIDATES[-1])
        look = {**look, "zorder": 2.0 if curve.chosen else 2.5}  # the others stay visible
        ax.plot(curve.x, curve.fit, label=f"{'chosen: ' if curve.chosen else ''}{curve.label}, "
                f"{data.criterion_name} {curve.criterion:.4g}", **look)
    note = f"{len(data.candidates)} candidates fitted, ranked by {data.criterion_name}"
    if "fit" not in options.panels:
        note += hidden_note(data)
    marks.finish(ax, COMPARISON_TITLE, note, options.x_label or "x", options.y_label or "y")


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


DRAW = {
    "fit": draw_fit,
    "studentized_residuals": draw_studentized_residuals,
    "influence": draw_influence,
    "spread": draw_spread,
    "half_normal": draw_half_normal,
    "selection": draw_selection,
}
