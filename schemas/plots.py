"""POST /v1/plot: the /v1/fit body plus a ``plot`` object saying what to draw.

The names and limits repeat those of ``service.plots`` (the contract must not
import the service); ``tests/plots/test_plot_schema.py`` keeps them in step.
"""

from __future__ import annotations

from marshmallow import ValidationError, fields, validate, validates_schema

from schemas.common import StrictSchema
from schemas.fields import StrictBoolean, StrictInteger, StrictString, one_of_message
from schemas.fit import FitRequestSchema

PANELS = ("fit", "studentized_residuals", "influence", "spread", "half_normal", "selection")
FORMATS = ("png", "svg")
X_SCALES = ("linear", "log")
MIN_PIXELS, MAX_PIXELS = 200, 4000
MAX_AREA = 8_000_000
MIN_DPI, MAX_DPI = 50, 300
MAX_LABEL = 200
MIN_PANEL_INCHES = (1.7, 1.3)  # plotting area of each panel, width x height
BASE_SIZE = (800, 600)

_PANELS_DESCRIPTION = (
    "Panels to draw (default [\"fit\"]). fit: data, fitted curve, band for the mean and for "
    "a new observation. studentized_residuals: externally studentized residuals against x, "
    "directly under the fit panel on the same x axis, with the Bonferroni outlier limits. "
    "influence: studentized residual against leverage with the cut-offs the diagnostics "
    "flag by (leverage, Cook's distance contour, outlier limits), flagged points marked by "
    "flag. spread: squared residuals over their mean against x with the Breusch-Pagan "
    "auxiliary fit and the test's p-value. half_normal: sorted |studentized residuals| "
    "against half-normal quantiles inside an envelope simulated from the fit (seeded). "
    "selection: AIC, AICc, BIC and the selection method's own criterion by candidate "
    "degree; for a comparison of models (model.candidates), every fitted candidate's curve "
    "over the data, the chosen one bold, each with its criterion (a nonlinear fit without "
    "candidates has no selection panel: 422). Every family is drawn; for nonlinear fits "
    "the leverages and the half-normal envelope use the tangent plane (the Jacobian at the "
    "estimates). Layout: fit and studentized_residuals in one column at the top, the others "
    "in rows of up to three in the order given, one legend strip above the panels.")


def _pixels(name: str, base: int) -> StrictInteger:
    least_w, least_h = MIN_PANEL_INCHES
    return StrictInteger(
        load_default=None,
        validate=validate.Range(MIN_PIXELS, MAX_PIXELS,
                                error=f"Must be {MIN_PIXELS} to {MAX_PIXELS} pixels."),
        metadata={"description": f"Figure {name} in pixels; an SVG states the same size in px. "
                                 f"width x height at most {MAX_AREA}. Each panel needs at "
                                 f"least {least_w} x {least_h} inches of plotting area (times "
                                 f"dpi in pixels) besides its labels: a smaller {name} is "
                                 f"refused with a 422 naming plot.{name} and the least that "
                                 f"fits. When absent or null the figure grows to what its panels "
                                 f"need, never below {base} px."})


def _label(description: str) -> StrictString:
    return StrictString(load_default=None, allow_none=True,
                        validate=validate.Length(max=MAX_LABEL,
                                                 error=f"At most {MAX_LABEL} characters."),
                        metadata={"description": description})


class PlotOptionsSchema(StrictSchema):
    """What to draw, how large, and in which format."""

    panels = fields.List(
        StrictString(validate=validate.OneOf(PANELS, error=one_of_message(PANELS)),
                     metadata={"enum": list(PANELS)}),
        load_default=lambda: ["fit"],
        validate=validate.Length(min=1, max=len(PANELS),
                                 error=f"Give 1 to {len(PANELS)} panel names."),
        error_messages={"invalid": "Must be an array of panel names."},
        metadata={"description": _PANELS_DESCRIPTION})
    width = _pixels("width", BASE_SIZE[0])
    height = _pixels("height", BASE_SIZE[1])
    dpi = StrictInteger(
        load_default=100,
        validate=validate.Range(MIN_DPI, MAX_DPI, error=f"Must be {MIN_DPI} to {MAX_DPI}."),
        metadata={"description": "Pixels per inch: larger dpi means larger text and lines "
                                 "at the same pixel size (default 100)."})
    format = StrictString(
        load_default=None, allow_none=True,
        validate=validate.OneOf(FORMATS, error=one_of_message(FORMATS)),
        metadata={"enum": list(FORMATS),
                  "description": "png or svg. When absent, the Accept header decides "
                                 "(image/png or image/svg+xml); otherwise png."})
    simultaneous = StrictBoolean(load_default=False, metadata={
        "description": "Also draw the simultaneous band for the whole curve on the fit panel."})
    x_scale = StrictString(
        load_default="linear",
        validate=validate.OneOf(X_SCALES, error=one_of_message(X_SCALES)),
        metadata={"enum": list(X_SCALES),
                  "description": "linear (default) or log: the x axis of the panels drawn "
                                 "against x (fit, studentized_residuals, spread, the candidates' "
                                 "curves). Dose-response curves are read on log concentration. "
                                 "On log, every point is still fitted, but points at x <= 0 "
                                 "(zero-dose blanks) cannot be placed on the axis: they are "
                                 "not drawn, the figure's note line says how many, and so does "
                                 "the X-Points-Not-Drawn response header; a body with no x > 0 "
                                 "is refused with a 422 naming plot.x_scale. Curves are drawn "
                                 "on geometrically spaced x from the smallest positive x."})
    title = _label("A title over the whole figure.")
    x_label = _label("Label of the x axis on the fit panel (default x).")
    y_label = _label("Label of the y axis on the fit panel (default y).")

    @validates_schema
    def _consistent(self, data, **kwargs):
        panels = data.get("panels") or []
        repeated = sorted({p for p in panels if panels.count(p) > 1})
        if repeated:
            raise ValidationError(f"Each panel at most once; repeated: {', '.join(repeated)}.",
                                  "panels")
        width, height = data.get("width"), data.get("height")
        if width is not None and height is not None and width * height > MAX_AREA:
            raise ValidationError(f"width x height is {width * height} pixels; the limit is "
                                  f"{MAX_AREA}. Make the figure smaller.", "width")


def _default_plot() -> dict:
    return PlotOptionsSchema().load({})


class PlotRequestSchema(FitRequestSchema):
    """A /v1/fit body plus ``plot``: fit one series and draw it (``include`` is ignored)."""

    plot = fields.Nested(PlotOptionsSchema, load_default=_default_plot, metadata={
        "description": "What to draw. Default: the fit panel, 800 x 600 px at 100 dpi."})
