"""Lay panels out on one matplotlib ``Figure`` (Agg canvas, never pyplot) and render bytes."""

from __future__ import annotations

import re

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from service.core import FitReport
from service.core.errors import SpecError
from service.plots import layout, legend, style
from service.plots.basis import is_polynomial
from service.plots.data import gather
from service.plots.options import PlotOptions, check_log_x
from service.plots.panels import DRAW

DEFAULT_OPTIONS = PlotOptions()
ALONG_X = ("fit", "studentized_residuals", "spread")  # panels drawn against x
_SVG_SIZE = re.compile(rb'<svg([^>]*?) width="[^"]*" height="[^"]*"')


def build_figure(report: FitReport, x, y, weights=None,
                 options: PlotOptions = DEFAULT_OPTIONS, comparison=None) -> Figure:
    """A figure with the requested panels of ``report`` (x, y, weights as fitted).

    ``report`` is any family's report; with ``comparison``
    (:func:`service.core.compare.compare`) it is the chosen candidate's, and the
    selection panel overlays every candidate's curve.

    The width is fixed first (as asked, or grown to the widest row); the panels are drawn,
    the legend strip is measured at that width, and then the height is fixed (as asked,
    or grown) and every panel put in place (:mod:`service.plots.layout`).

    Raises
    ------
    SpecError
        A log x axis with no x > 0 to draw (``plot.x_scale``; points at x <= 0 are
        fitted but not drawn, and the fit panel's note says how many); the selection
        panel of a nonlinear fit that compared nothing (``plot.panels``). When the asked
        height leaves a panel less than the minimum plotting area once
        the legend strip is known (``plot.height``), or no size within the limits fits
        the panels at this dpi (``plot.dpi``).
    """
    if options.log_x:
        check_log_x(x)
    compared = comparison is not None and any(r is not None for r in comparison.reports)
    if "selection" in options.panels and not compared and not is_polynomial(report.model):
        raise SpecError("The selection panel shows a choice: a polynomial's degree selection "
                        "or a comparison of candidate models; this fit chose nothing.",
                        field="plot.panels", fix="Leave selection out, or send "
                        "model.candidates to compare models.")
    data = gather(report, x, y, weights, log_x=options.log_x,
                  comparison=comparison if compared else None)
    grid, titled, dpi = layout.rows(options.panels), bool(options.title), options.dpi
    width_px = options.pixel_width()
    first_height = options.height or options.pixel_height(width_px, layout.LEGEND_LINE)
    figure = Figure(figsize=(width_px / dpi, first_height / dpi), dpi=dpi)
    FigureCanvasAgg(figure)
    axes = {}
    for row in grid:
        for name in row:
            shared = axes.get("fit") if name == "studentized_residuals" else None
            axes[name] = figure.add_axes((0.0, 0.0, 1.0, 1.0), sharex=shared)
            DRAW[name](axes[name], data, options)
            if options.log_x and (name in ALONG_X or (name == "selection" and data.candidates)):
                style.log_x_axis(axes[name], data.x_min, data.x_max)
    if "fit" in axes and "studentized_residuals" in axes:  # one x axis for the column
        axes["fit"].tick_params(labelbottom=False)
        axes["fit"].set_xlabel("")
    strip, strip_height = legend.strip(figure, layout.legend_room(width_px / dpi))
    height_px = options.pixel_height(width_px, strip_height)
    if height_px != first_height:
        figure.set_size_inches(width_px / dpi, height_px / dpi)
    width_in, height_in = width_px / dpi, height_px / dpi
    for name, box in layout.boxes(grid, width_in, height_in, titled, strip_height).items():
        axes[name].set_position(box)
    legend.place(strip, layout.legend_corner(width_in, height_in, titled))
    if options.title:
        figure.suptitle(options.title, fontsize=style.TITLE_SIZE + 1, va="top",
                        y=1 - layout.PAD_TOP / height_in)
    return figure


def render(report: FitReport, x, y, weights=None, options: PlotOptions = DEFAULT_OPTIONS,
           comparison=None) -> bytes:
    """PNG or SVG bytes of the figure; the same input gives the same bytes.

    An SVG states its size in pixels (``width="800px"``) with matplotlib's
    point-based ``viewBox`` kept, so it scales exactly like the PNG.
    """
    figure = build_figure(report, x, y, weights, options, comparison)
    data = style.to_bytes(figure, options.format, options.dpi)
    if options.format == "svg":
        width, height = (round(v * options.dpi) for v in figure.get_size_inches())
        size = b' width="%dpx" height="%dpx"' % (width, height)
        data = _SVG_SIZE.sub(lambda m: b"<svg" + m.group(1) + size, data, count=1)
    return data
