"""Figures of a fit, built with matplotlib's object API (``Figure`` + Agg, never pyplot).

Fed by core results only (imports ``service.core``, never the web layer)::

    render(report, x, y, weights=None, options=PlotOptions()) -> bytes   # PNG or SVG

Panels (:data:`PANELS`): ``fit`` (data, curve, mean and new-observation bands,
optionally the simultaneous band), ``residuals``, ``normal_quantiles``,
``scale_location``, ``leverage`` (with Cook's distance contours) and
``selection`` (criteria by candidate degree). Output is reproducible byte for
byte: fixed SVG id salt, no dates in metadata.
"""

from service.plots.figure import build_figure, render  # noqa: F401
from service.plots.layout import grid_shape  # noqa: F401
from service.plots.options import (  # noqa: F401
    FORMATS,
    MAX_AREA,
    MAX_DPI,
    MAX_LABEL,
    MAX_PIXELS,
    MAX_POINTS,
    MEDIA_TYPES,
    MIN_DPI,
    MIN_PIXELS,
    PANELS,
    PlotOptions,
)
