"""Views: predict and invert with a fitted-model document."""

from __future__ import annotations

from dataclasses import asdict

import numpy as np
from flask import current_app
from flask_smorest import Blueprint

from schemas.models import (
    InvertRequestSchema,
    InvertResponseSchema,
    PredictRequestSchema,
    PredictResponseSchema,
)
from service.api.error_docs import error_responses
from service.core import family_of, predict, read_document
from service.core.checks.exact_fit import NO_RESIDUAL_VARIANCE
from service.core.errors import SpecError

blp = Blueprint("models", __name__, description="Predict and invert with a fitted-model document.")

ERRORS = {400: "Unparsable body (not strict JSON: e.g. NaN or Infinity tokens).",
          413: "Body over the size limit.",
          415: "Body not sent as application/json.",
          422: "Invalid request, or a fitted_model document that is malformed, of an unknown "
               "schema_version, or fails its checksum; errors names each field and its fix."}


document_errors = error_responses(blp, ERRORS)


_PREDICT_COLUMNS = ("x", "fit", "se_mean", "mean_lower", "mean_upper", "obs_lower", "obs_upper",
                    "band_lower", "band_upper", "extrapolated", "unbounded")


@blp.route("/v1/predict", methods=["POST"])
@blp.arguments(PredictRequestSchema, description="A fitted_model document and new x.")
@blp.response(200, PredictResponseSchema, description="Fitted values and bands, in x order.")
@document_errors
def predict_view(body):
    """Predict with intervals at new x from a stored fitted model."""
    fitted = read_document(body["fitted_model"], field_prefix="fitted_model.")
    _check_count("x", len(body["x"]))
    result = predict(fitted, body["x"], level=body["level"], m=body["replicates"],
                     weights=body.get("weights"))
    columns = {name: getattr(result, name) for name in _PREDICT_COLUMNS}
    if columns["unbounded"] is None:  # a family that does not mark unbounded limits
        columns["unbounded"] = [False] * len(result.x)
    answer = {"predictions": columns, "level": result.level, "replicates": body["replicates"],
              "extrapolated_count": int(result.extrapolated.sum()),
              "undefined_count": int(np.count_nonzero(~np.isfinite(result.fit)))}
    withheld = [n for n in result.notices if n.code == NO_RESIDUAL_VARIANCE]
    if withheld:  # written only when it applies (other answers are unchanged)
        answer["intervals_withheld"] = {"code": withheld[0].code, "message": withheld[0].message}
    return answer


@blp.route("/v1/invert", methods=["POST"])
@blp.arguments(InvertRequestSchema, description="A fitted_model document and observed y.")
@blp.response(200, InvertResponseSchema, description="x estimates with calibration intervals "
              "and statuses, in y order; the calibration's figures of merit.")
@document_errors
def invert_view(body):
    """Read x back from observed y, with calibration intervals and figures of merit."""
    fitted = read_document(body["fitted_model"], field_prefix="fitted_model.")
    _check_count("y", len(body["y"]))
    entry = family_of(fitted)
    if entry.invert is None:
        raise SpecError(f"The {entry.name} family cannot be read backwards.",
                        field="fitted_model.family", fix="Invert a model of a family that "
                        "GET /v1/families lists as invertible.")
    result = entry.invert(fitted, body["y"], replicates=body["replicates"], level=body["level"],
                          weights=body.get("weights"))
    slopes = _slopes(entry.sensitivity, fitted, [e.x for e in result.estimates])
    columns = {name: [getattr(e, name) for e in result.estimates]
               for name in ("y", "replicates", "x", "lower", "upper", "status", "other_roots")}
    columns["sensitivity"] = slopes
    figures = entry.figures_of_merit(fitted, alpha=body["detection_alpha"],
                               beta=body["detection_beta"])
    return {"estimates": columns, "level": result.level, "monotone": result.monotone,
            "turning_points": list(result.turning_points), "x_min": result.x_min,
            "x_max": result.x_max, "calibration": asdict(figures),
            "working_range": _working_range(entry, fitted, body)}


def _working_range(entry, fitted, body) -> dict | None:
    """The precision profile's working range (logistic calibrations), else None."""
    if entry.precision_profile is None:
        return None
    m = body["replicates"] if isinstance(body["replicates"], int) else 1
    profile = entry.precision_profile(fitted, cv_limit=body["cv_limit"], replicates=m)
    if not profile.available:
        return None
    return {"cv_limit": profile.cv_limit, "replicates": m, "lower": profile.lower,
            "upper": profile.upper}


def _check_count(name: str, count: int) -> None:
    limit = current_app.config["CURVEWISE"].max_grid_points
    if count > limit:
        raise SpecError(f"{name} has {count} values; the limit is {limit}.", field=name,
                        fix="Split the values over several requests, or raise "
                            "CURVEWISE_MAX_GRID_POINTS.", code="limit_exceeded")


def _slopes(sensitivity, fitted, xs: list[float]) -> list[float]:
    """dy/dx at each estimate; NaN where there is no estimate."""
    found = [i for i, x in enumerate(xs) if x == x]
    out = [float("nan")] * len(xs)
    if found:
        for i, value in zip(found, sensitivity(fitted, [xs[i] for i in found]), strict=True):
            out[i] = float(value)
    return out
