"""Lay panels out on one matplotlib ``Figure`` (Agg canvas, never pyplot) and render bytes."""

from __future__ import annotations

import re

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from service.core import FitReport
from service.plots import style
from service.plots.data import gather
from service.plots.layout import grid_shape, margins
from service.plots.options import PlotOptions
from service.plots.panels import DRAW

DEFAULT_OPTIONS = PlotOptions()
_SVG_SIZE = re.compile(rb'<svg([^>]*?) width="[^"]*" height="[^"]*"')


def build_figure(report: FitReport, x, y, weights=None,
                 options: PlotOptions = DEFAULT_OPTIONS) -> Figure:
    """A figure with the requested panels of ``report`` (x, y, weights as fitted)."""
    data = gather(report, x, y, weights)
    figure = Figure(figsize=(options.width / options.dpi, options.height / options.dpi),
                    dpi=options.dpi)
    FigureCanvasAgg(figure)
    rows, cols = grid_shape(len(options.panels))
    figure.subplots_adjust(**margins(len(options.panels), options.width / options.dpi,
                                     options.height / options.dpi, title=bool(options.title),
                                     second_axis="selection" in options.panels))
    for i, name in enumerate(options.panels):
        ax = figure.add_subplot(rows, cols, i + 1)
        DRAW[name](ax, data, options)
    if options.title:
        figure.suptitle(options.title, fontsize=style.TITLE_SIZE + 1)
    return figure


def render(report: FitReport, x, y, weights=None, options: PlotOptions = DEFAULT_OPTIONS) -> bytes:
    """PNG or SVG bytes of the figure; the same input gives the same bytes.

    An SVG states its size in pixels (``width="800px"``) with matplotlib's
    point-based ``viewBox`` kept, so it scales exactly like the PNG.
    """
    figure = build_figure(report, x, y, weights, options)
    data = style.to_bytes(figure, options.format, options.dpi)
    if options.format == "svg":
        size = b' width="%dpx" height="%dpx"' % (options.width, options.height)
        data = _SVG_SIZE.sub(lambda m: b"<svg" + m.group(1) + size, data, count=1)
    return data
