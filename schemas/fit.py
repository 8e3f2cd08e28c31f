"""POST /v1/fit: the request (strictly validated) and the response (documented)."""

from __future__ import annotations

import numpy as np
from marshmallow import ValidationError, fields, post_load, pre_load, validate, validates_schema

from schemas.common import GRID_SPACINGS, MISSING_POLICIES, SECTIONS, WEIGHTINGS, StrictSchema
from schemas.fields import (
    CodedMessage,
    NumberArray,
    StrictFloat,
    StrictInteger,
    also_at,
    choice,
)
from schemas.fit_response import FitResponseSchema  # noqa: F401  (re-exported)
from schemas.model_field import ModelField, misplaced_model_options
from schemas.polynomial import ModelSchema  # noqa: F401  (re-exported)

_LEVEL = validate.Range(0, 1, min_inclusive=False, max_inclusive=False,
                        error="Must be strictly between 0 and 1, e.g. 0.95.")


class GridSchema(StrictSchema):
    """Where to evaluate the curve and its bands: one of x; count; start+stop(+step or count)."""

    count = StrictInteger(
        validate=validate.Range(min=2, error="Must be 2 or more."),
        metadata={"description": "Evenly spaced points (over the data range unless start and "
                                 "stop are given). Default 200."})
    start = StrictFloat(metadata={"description": "First grid x (with stop)."})
    stop = StrictFloat(metadata={"description": "Last grid x (with start); must be > start."})
    step = StrictFloat(validate=validate.Range(min=0, min_inclusive=False,
                                               error="Must be greater than 0."),
                       metadata={"description": "Spacing from start to stop (inclusive)."})
    x = NumberArray(metadata={"description": "Explicit grid points."}, error_messages={
        "item_null": "Grid points must be numbers. Remove the null."})
    spacing = choice(GRID_SPACINGS, "How count points are spaced: linear (equal steps) or log "
                     "(equal ratios, for a log x axis; needs x > 0 over the grid). Default: log "
                     "for a built-in curve on log x (model.scale log, e.g. logistic4) with no "
                     "start and stop, linear otherwise. A log grid over data with a zero-dose "
                     "blank runs from the smallest positive x to the largest, with x = 0 as "
                     "its own first point (the curve is defined there).")

    @validates_schema
    def _one_form(self, data, **kwargs):
        if "x" in data:
            extra = sorted(k for k in data if k != "x")
            if extra:
                raise ValidationError(f"Give x alone; remove {', '.join(extra)}.", "x")
            return
        has_start, has_stop = "start" in data, "stop" in data
        if has_start != has_stop:
            raise ValidationError("Give start and stop together.",
                                  "stop" if has_start else "start")
        if "step" in data and not has_start:
            raise ValidationError("step needs start and stop.", "step")
        if "step" in data and data.get("spacing") == "log":
            raise ValidationError("A step spaces the grid evenly; give count instead of step "
                                  "for a log-spaced grid.", "spacing")
        if "step" in data and "count" in data:
            raise ValidationError("Give step or count, not both.", "count")
        if has_start and not data["stop"] > data["start"]:
            raise ValidationError("Must be greater than start.", "stop")

    @post_load
    def _to_spec_fields(self, data, **kwargs):
        if "x" in data:
            return {"count": None, "start": None, "stop": None, "step": None,
                    "x": data["x"], "spacing": None}
        count = data.get("count", None if "step" in data else 200)
        return {"count": count, "start": data.get("start"), "stop": data.get("stop"),
                "step": data.get("step"), "x": None, "spacing": data.get("spacing")}


_MODEL_DEFAULT = ModelSchema()
_GRID_DEFAULT = GridSchema()


class FitRequestSchema(StrictSchema):
    """Fit one series: data, model, grid and options."""

    x = NumberArray(required=True, allow_null_items=True, data=True, metadata={
        "description": "Predictor values, JSON numbers. null marks a missing value "
                       "(allowed only with missing=drop)."})
    y = NumberArray(required=True, allow_null_items=True, data=True, metadata={
        "description": "Response values, same length as x. null marks a missing value "
                       "(allowed only with missing=drop)."})
    weights = NumberArray(
        allow_none=True, load_default=None, allow_null_items=True, data=True, metadata={
            "description": "Optional positive weights (inverse variances), same length as x; "
                           "null for an unweighted fit."})
    model = ModelField(load_default=lambda: _MODEL_DEFAULT.load({}), metadata={
        "description": "The model to fit: a polynomial model object (the default family), or "
                       "the model object of the family it names. Default: a polynomial of "
                       "degree chosen from 1..3 by sequential F."})
    grid = fields.Nested(GridSchema, allow_none=True,
                         load_default=lambda: _GRID_DEFAULT.load({}), metadata={
                             "description": "Where to evaluate the curve and bands. Default: "
                                            "200 points over the data range (log-spaced "
                                            "for a built-in curve on log x, see "
                                            "grid.spacing); null: no grid."})
    level = StrictFloat(load_default=0.95, validate=_LEVEL, metadata={
        "description": "Confidence level for coefficient limits and bands."})
    missing = choice(MISSING_POLICIES, "What a null (missing) value in x, y or weights "
                      "means: error (default) refuses it; drop removes the pair and reports "
                      "its index in dropped.", load_default="error")
    weighting = choice(WEIGHTINGS, "How to read weights: relative (default; inverse variances "
                       "up to a common factor, sigma estimated from the residuals) or known_sd "
                       "(weights are 1/SD² of a known measurement error: sigma is not "
                       "rescaled, limits use the normal distribution and a chi-square "
                       "goodness-of-fit test is reported; weights are then required).",
                       load_default="relative")
    include = fields.List(
        choice(SECTIONS, "A response section."),
        load_default=lambda: list(SECTIONS),
        error_messages={"invalid": "Must be an array of section names."},
        metadata={"description": "Sections to compute and return (default: all). n, model, "
                                 "warnings and flags are always returned, and the flags "
                                 "always rest on the full diagnostics (computed whether or "
                                 "not the diagnostics section is returned)."})

    @pre_load
    def _model_options_belong_in_model(self, data, **kwargs):
        if isinstance(data, dict):
            misplaced = misplaced_model_options(data, self.fields)
            if misplaced:
                raise ValidationError(misplaced)
        return data

    @validates_schema
    def _consistent(self, data, **kwargs):
        x, y, weights = data.get("x"), data.get("y"), data.get("weights")
        if x is None or y is None:
            return
        errors: dict = {}
        if len(y) != len(x):  # invalid_data, as the core and /v1/batch say
            errors["y"] = [CodedMessage(f"Must have the same length as x ({len(x)}); got "
                                        f"{len(y)}. Send x and y paired by position.",
                                        "invalid_data")]
        if weights is not None and len(weights) != len(x):
            errors["weights"] = [CodedMessage(f"Must have the same length as x ({len(x)}); "
                                              f"got {len(weights)}. Send one weight per "
                                              "point, or none.", "invalid_data")]
        if data.get("missing", "error") != "drop":
            for name, values in (("x", x), ("y", y), ("weights", weights)):
                if values is not None and name not in errors:
                    gaps = np.flatnonzero(np.isnan(values))
                    if gaps.size:
                        errors[name] = {int(gaps[0]): [CodedMessage(
                            "null is a missing value. Remove the point, or set "
                            "\"missing\": \"drop\" to drop incomplete pairs."
                            + also_at(gaps), "invalid_data")]}  # as the core says
        if errors:
            raise ValidationError(errors)
