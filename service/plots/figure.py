"""Lay panels out on one matplotlib ``Figure`` (Agg canvas, never pyplot) and render bytes."""

from __future__ import annotations

import re

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from service.core import FitReport
from service.plots import layout, legend, style
from service.plots.data import gather
from service.plots.options import PlotOptions
from service.plots.panels import DRAW

DEFAULT_OPTIONS = PlotOptions()
_SVG_SIZE = re.compile(rb'<svg([^>]*?) width="[^"]*" height="[^"]*"')


def build_figure(report: FitReport, x, y, weights=None,
                 options: PlotOptions = DEFAULT_OPTIONS) -> Figure:
    """A figure with the requested panels of ``report`` (x, y, weights as fitted).

    The width is fixed first (as asked, or grown to the widest row); the panels are drawn,
    the legend strip is measured at that width, and then the height is fixed (as asked,
    or grown) and every panel put in place (:mod:`service.plots.layout`).

    Raises
    ------
    SpecError
        When the asked height leaves a panel less than the minimum plotting area once
        the legend strip is known (``plot.height``), or no size within the limits fits
        the panels at this dpi (``plot.dpi``).
    """
    data = gather(report, x, y, weights)
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


def render(report: FitReport, x, y, weights=None, options: PlotOptions = DEFAULT_OPTIONS) -> bytes:
    """PNG or SVG bytes of the figure; the same input gives the same bytes.

    An SVG states its size in pixels (``width="800px"``) with matplotlib's
    point-based ``viewBox`` kept, so it scales exactly like the PNG.
    """
    figure = build_figure(report, x, y, weights, options)
    data = style.to_bytes(figure, options.format, options.dpi)
    if options.format == "svg":
        width, height = (round(v * options.dpi) for v in figure.get_size_inches())
        size = b' width="%dpx" height="%dpx"' % (width, height)
        data = _SVG_SIZE.sub(lambda m: b"<svg" + m.group(1) + size, data, count=1)
    return data
