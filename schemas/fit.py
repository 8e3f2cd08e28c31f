"""POST /v1/fit: the request (strictly validated) and the response (documented)."""

from __future__ import annotations

import numpy as np
from marshmallow import ValidationError, fields, post_load, validate, validates_schema

from schemas.common import (
    FAMILIES,
    MISSING_POLICIES,
    SECTIONS,
    SELECT_METHODS,
    TRANSFORMS,
    StrictSchema,
)
from schemas.fields import (
    NumberArray,
    StrictBoolean,
    StrictFloat,
    StrictInteger,
    StrictString,
    one_of_message,
)
from schemas.fit_response import FitResponseSchema  # noqa: F401  (re-exported)


def _choice(choices, description: str, **kwargs) -> StrictString:
    return StrictString(validate=validate.OneOf(choices, error=one_of_message(choices)),
                        metadata={"description": description, "enum": list(choices)}, **kwargs)


_PROBABILITY = validate.Range(0, 1, min_inclusive=False, max_inclusive=False,
                              error="Must be strictly between 0 and 1, e.g. 0.05.")
_LEVEL = validate.Range(0, 1, min_inclusive=False, max_inclusive=False,
                        error="Must be strictly between 0 and 1, e.g. 0.95.")


class ModelSchema(StrictSchema):
    """Which model to fit: a fixed degree, or a degree chosen from candidates."""

    family = _choice(FAMILIES, "Model family. Only polynomial today.", load_default="polynomial")
    degree = StrictInteger(
        allow_none=True, load_default=None,
        validate=validate.Range(min=0, error="Must be 0 or more."),
        metadata={"description": "Fixed degree. Give either degree, or max_degree (with "
                                 "select). Limited by the server's max_degree "
                                 "(GET /v1/families)."})
    max_degree = StrictInteger(
        allow_none=True, load_default=None,
        validate=validate.Range(min=1, error="Must be 1 or more."),
        metadata={"description": "Select the degree from min_degree..max_degree by select. "
                                 "Default when neither degree nor max_degree is given: 3. "
                                 "Selection always keeps every lower power."})
    min_degree = StrictInteger(
        load_default=1, validate=validate.Range(min=0, error="Must be 0 or more."),
        metadata={"description": "Smallest candidate degree when selecting (default 1)."})
    select = _choice(SELECT_METHODS, "How to choose the degree: sequential_f (sequential F "
                     "tests at alpha), aic, aicc, bic, press (leave-one-out prediction error), "
                     "adj_r2. Only with max_degree.", load_default=None, allow_none=True)
    alpha = StrictFloat(load_default=0.05, validate=_PROBABILITY, metadata={
        "description": "Significance level of each sequential F test (select=sequential_f)."})
    intercept = StrictBoolean(load_default=True, metadata={
        "description": "Include the constant term. Without it, sums of squares and "
                       "r_squared are uncentred."})
    transform_x = _choice(TRANSFORMS, "Transform applied to x before fitting.",
                          load_default="none")
    transform_y = _choice(TRANSFORMS, "Transform applied to y before fitting; fitted values "
                          "and bands are reported back on the original y scale.",
                          load_default="none")

    @validates_schema
    def _degree_or_selection(self, data, **kwargs):
        if data.get("degree") is not None and data.get("max_degree") is not None:
            raise ValidationError("Give degree (fixed) or max_degree (selection), not both.",
                                  "degree")
        if data.get("degree") is not None and data.get("select") is not None:
            raise ValidationError("select only applies with max_degree. Remove select, or "
                                  "replace degree by max_degree.", "select")
        top = data.get("max_degree")
        if top is not None and data.get("min_degree", 1) > top:
            raise ValidationError("Must not exceed max_degree.", "min_degree")

    @post_load
    def _defaults(self, data, **kwargs):
        if data.get("degree") is None:
            if data.get("max_degree") is None:
                data["max_degree"] = max(3, data.get("min_degree", 1))
            if data.get("select") is None:
                data["select"] = "sequential_f"
        else:
            data["select"] = "sequential_f"
        return data


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
        if "step" in data and "count" in data:
            raise ValidationError("Give step or count, not both.", "count")
        if has_start and not data["stop"] > data["start"]:
            raise ValidationError("Must be greater than start.", "stop")

    @post_load
    def _to_spec_fields(self, data, **kwargs):
        if "x" in data:
            return {"count": None, "start": None, "stop": None, "step": None,
                    "x": data["x"]}
        count = data.get("count", None if "step" in data else 200)
        return {"count": count, "start": data.get("start"), "stop": data.get("stop"),
                "step": data.get("step"), "x": None}


_MODEL_DEFAULT = ModelSchema()
_GRID_DEFAULT = GridSchema()


class FitRequestSchema(StrictSchema):
    """Fit one series: data, model, grid and options."""

    x = NumberArray(required=True, allow_null_items=True, metadata={
        "description": "Predictor values, JSON numbers. null marks a missing value "
                       "(allowed only with missing=drop)."})
    y = NumberArray(required=True, allow_null_items=True, metadata={
        "description": "Response values, same length as x. null marks a missing value "
                       "(allowed only with missing=drop)."})
    weights = NumberArray(allow_none=True, load_default=None, allow_null_items=True, metadata={
        "description": "Optional positive weights (inverse variances), same length as x; "
                       "null for an unweighted fit."})
    model = fields.Nested(ModelSchema, load_default=lambda: _MODEL_DEFAULT.load({}), metadata={
        "description": "The model to fit. Default: degree chosen from 1..3 by sequential F."})
    grid = fields.Nested(GridSchema, allow_none=True,
                         load_default=lambda: _GRID_DEFAULT.load({}), metadata={
                             "description": "Where to evaluate the curve and bands. Default: "
                                            "200 points over the data range; null: no grid."})
    level = StrictFloat(load_default=0.95, validate=_LEVEL, metadata={
        "description": "Confidence level for coefficient limits and bands."})
    missing = _choice(MISSING_POLICIES, "What a null (missing) value in x, y or weights "
                      "means: error (default) refuses it; drop removes the pair and reports "
                      "its index in dropped.", load_default="error")
    include = fields.List(
        _choice(SECTIONS, "A response section."),
        load_default=lambda: list(SECTIONS),
        error_messages={"invalid": "Must be an array of section names."},
        metadata={"description": "Sections to compute and return (default: all). n, model, "
                                 "warnings and flags are always returned, and the flags "
                                 "always rest on the full diagnostics (computed whether or "
                                 "not the diagnostics section is returned)."})

    @validates_schema
    def _consistent(self, data, **kwargs):
        x, y, weights = data.get("x"), data.get("y"), data.get("weights")
        if x is None or y is None:
            return
        errors: dict = {}
        if len(y) != len(x):
            errors["y"] = [f"Must have the same length as x ({len(x)}); got {len(y)}."]
        if weights is not None and len(weights) != len(x):
            errors["weights"] = [f"Must have the same length as x ({len(x)}); "
                                 f"got {len(weights)}."]
        if data.get("missing", "error") != "drop":
            for name, values in (("x", x), ("y", y), ("weights", weights)):
                if values is not None and name not in errors:
                    gaps = np.flatnonzero(np.isnan(values))
                    if gaps.size:
                        errors[name] = {int(gaps[0]): [
                            "null is a missing value. Remove the point, or set "
                            "\"missing\": \"drop\" to drop incomplete pairs."]}
        if errors:
            raise ValidationError(errors)
