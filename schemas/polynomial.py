"""The polynomial family's model object: a fixed degree, or a degree chosen from candidates."""

from __future__ import annotations

from marshmallow import ValidationError, post_load, validate, validates_schema

from schemas.common import SELECT_METHODS, TRANSFORMS, StrictSchema
from schemas.fields import StrictBoolean, StrictFloat, StrictInteger, choice

_PROBABILITY = validate.Range(0, 1, min_inclusive=False, max_inclusive=False,
                              error="Must be strictly between 0 and 1, e.g. 0.05.")


class ModelSchema(StrictSchema):
    """Which model to fit: a fixed degree, or a degree chosen from candidates."""

    family = choice(("polynomial",), "Model family: polynomial (the default). GET /v1/families "
                     "lists the others and their model objects.", load_default="polynomial")
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
    select = choice(SELECT_METHODS, "How to choose the degree: sequential_f (sequential F "
                     "tests at alpha), aic, aicc, bic, press (leave-one-out prediction error), "
                     "adj_r2. Only with max_degree.", load_default=None, allow_none=True)
    alpha = StrictFloat(load_default=0.05, validate=_PROBABILITY, metadata={
        "description": "Significance level of each sequential F test (select=sequential_f)."})
    intercept = StrictBoolean(load_default=True, metadata={
        "description": "Include the constant term. Without it, sums of squares and "
                       "r_squared are uncentred."})
    transform_x = choice(TRANSFORMS, "Transform applied to x before fitting.",
                          load_default="none")
    transform_y = choice(TRANSFORMS, "Transform applied to y before fitting; fitted values "
                          "and bands are reported back on the original y scale.",
                          load_default="none")

    @validates_schema(pass_original=True)
    def _degree_or_selection(self, data, original, **kwargs):
        if data.get("degree") is not None and data.get("max_degree") is not None:
            raise ValidationError("Give degree (fixed) or max_degree (selection), not both.",
                                  "degree")
        if data.get("degree") is not None and data.get("select") is not None:
            raise ValidationError("select only applies with max_degree. Remove select, or "
                                  "replace degree by max_degree.", "select")
        if data.get("degree") is not None and "min_degree" in original:  # else ignored
            raise ValidationError("min_degree only applies with max_degree. Remove min_degree, "
                                  "or replace degree by max_degree.", "min_degree")
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
