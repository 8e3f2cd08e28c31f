"""Views: figures."""

from __future__ import annotations

from flask import Response, current_app, request
from flask_smorest import Blueprint

from schemas.plots import PlotRequestSchema
from service.api.error_docs import error_responses
from service.core import fit_series
from service.core.compare import compare
from service.core.errors import SpecError
from service.http.limits import check_series
from service.http.requests import fit_options, model_spec
from service.plots import MAX_POINTS, MEDIA_TYPES, PlotOptions, check_log_x, render
from service.plots.data import not_drawn

blp = Blueprint("plots", __name__, description="Figures.")

ERRORS = {400: "Unparsable body (not strict JSON: e.g. NaN or Infinity tokens).",
          413: "Body or number of points over the limit.",
          415: "Body not sent as application/json.",
          422: "Invalid or unfittable input, a figure size, dpi or panel list out of range, "
               "a size too small for the panels' least plotting area, x_scale log with no "
               "x > 0 to draw, or the selection panel of a nonlinear fit that "
               "compared nothing; errors names each field and its fix."}
_BINARY = {"schema": {"type": "string", "format": "binary"}}
NOT_DRAWN = "X-Points-Not-Drawn"
_NOT_DRAWN_DOC = {"description": "With x_scale log only: how many points at x <= 0 (e.g. "
                                 "zero-dose blanks) were fitted with the rest but are not "
                                 "drawn, a log axis having no place for them (0: every point "
                                 "drawn). The figure's note line says the same.",
                  "schema": {"type": "integer", "minimum": 0}}
_IMAGE_DOC = {"responses": {"200": {"description": "The figure (PNG or SVG); the same body "
                                                   "always gives the same bytes.",
                                    "headers": {NOT_DRAWN: _NOT_DRAWN_DOC},
                                    "content": {"image/png": _BINARY,
                                                "image/svg+xml": _BINARY}}}}
_NEEDED = frozenset({"selection", "grid", "diagnostics", "coefficients"})


document_errors = error_responses(blp, ERRORS)


def chosen_format(asked: str | None) -> str:
    """The body's ``plot.format``; else the Accept header's preference; else png."""
    if asked:
        return asked
    best = request.accept_mimetypes.best_match(["image/png", "image/svg+xml"])
    return "svg" if best == "image/svg+xml" else "png"


@blp.route("/v1/plot", methods=["POST"])
@blp.arguments(PlotRequestSchema(), description="A /v1/fit body plus the plot options.")
@blp.doc(**_IMAGE_DOC)
@document_errors
def plot(body):
    """Fit one series and draw it as PNG or SVG."""
    settings = current_app.config["CURVEWISE"]
    check_series(body, settings)
    asked = body["plot"]
    options = PlotOptions(panels=tuple(asked["panels"]), width=asked["width"],
                          height=asked["height"], dpi=asked["dpi"],
                          format=chosen_format(asked["format"]),
                          simultaneous=asked["simultaneous"], title=asked["title"],
                          x_label=asked["x_label"], y_label=asked["y_label"],
                          x_scale=asked["x_scale"])
    limit = MAX_POINTS[options.format]
    if len(body["x"]) > limit:
        raise SpecError(f"{len(body['x'])} points are too many to draw as {options.format} "
                        f"(limit {limit}).", field="x", code="limit_exceeded",
                        fix="Fit the full series with /v1/fit and plot a sample of it"
                            + (", or ask for png." if options.format == "svg" else "."))
    if options.log_x:  # refused before fitting when nothing positive would be drawn
        check_log_x(body["x"])
    model, fit_body = body["model"], {**body, "include": sorted(_NEEDED)}
    options_fit = fit_options(fit_body, settings)
    comparison = None
    if "candidates" in model:
        comparison = compare(body["x"], body["y"], body["weights"],
                             candidates=tuple(model_spec(m) for m in model["candidates"]),
                             select=model["select"], alpha=model["alpha"], options=options_fit)
        report = comparison.report
    else:
        report = fit_series(body["x"], body["y"], body["weights"], model=model_spec(model),
                            options=options_fit)
    image = render(report, body["x"], body["y"], body["weights"], options, comparison)
    response = Response(image, mimetype=MEDIA_TYPES[options.format])
    response.headers["Vary"] = "Accept"
    if options.log_x:  # every point is fitted; x <= 0 cannot be placed on the log axis
        response.headers[NOT_DRAWN] = str(not_drawn(report, body["x"]))
    return response
