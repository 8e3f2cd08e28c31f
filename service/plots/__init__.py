"""Figures of a fit, built with matplotlib's object API (``Figure`` + Agg, never pyplot).

Fed by core results only (imports ``service.core``, never the web layer)::

    render(report, x, y, weights=None, options=PlotOptions()) -> bytes   # PNG or SVG

Panels (:data:`PANELS`): ``fit`` (data, curve, mean and new-observation bands,
optionally the simultaneous band); ``studentized_residuals`` (against x, under
the fit panel on its x axis, with the Bonferroni outlier limits); ``influence``
(studentized residual against leverage with the flags' own cut-offs: leverage,
Cook's distance, outlier limits); ``spread`` (squared residuals against x with
the Breusch-Pagan auxiliary fit and its p-value); ``half_normal``
(|studentized residuals| in a simulated envelope) and ``selection`` (criteria
by candidate degree; for a comparison of models, every candidate's curve over the
data). Any family is drawn (nonlinear fits: the tangent-plane leverages and
Jacobian stand for the design), on a linear or log x axis. Layout:
:mod:`service.plots.layout`. Output is reproducible byte for byte: fixed SVG id
salt, seeded simulations, no dates in metadata.
"""

from service.plots.figure import build_figure, render  # noqa: F401
from service.plots.layout import rows  # noqa: F401
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
    X_SCALES,
    PlotOptions,
    check_log_x,
)
