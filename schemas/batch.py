"""POST /v1/batch: the request envelope, the options shared by every series.

The envelope (shared model and options) is a marshmallow schema, also read as
the NDJSON options line and the Arrow/Parquet ``options`` query parameter. The
series themselves are checked one by one (:mod:`schemas.batch_series`); the
per-series summary is written by :mod:`schemas.batch_summary`.
"""

from __future__ import annotations

from marshmallow import ValidationError, fields, validate, validates_schema

from schemas.common import MISSING_POLICIES, SECTIONS, WEIGHTINGS, StrictSchema
from schemas.fields import PassThroughArray, StrictFloat, StrictString, one_of_message
from schemas.fit import GridSchema, ModelSchema
from schemas.model_field import BATCH_COMPARISON, ModelField

DETAILS = ("summary", "full")
_MODEL = ModelSchema()


class BatchRequestSchema(StrictSchema):
    """Many independent series and the options they share."""

    series = PassThroughArray(required=True, metadata={
        "description": "The series (see Series). Each is checked on its own: a bad series "
                       "gets an error result, the others are fitted.",
        "items": {"$ref": "#/components/schemas/Series"}})
    model = ModelField(comparisons=False, refusal=BATCH_COMPARISON,
                       load_default=lambda: _MODEL.load({}), metadata={
        "description": "The shared model (as in /v1/fit: a polynomial, a built-in nonlinear "
                       "family with automatic start values for every series, or an expression "
                       "with its start values). Default: degree chosen from 1..3 by "
                       "sequential F."})
    level = StrictFloat(load_default=0.95, validate=validate.Range(
        0, 1, min_inclusive=False, max_inclusive=False,
        error="Must be strictly between 0 and 1, e.g. 0.95."),
        metadata={"description": "Confidence level (coefficient limits and bands in full "
                                 "detail)."})
    missing = StrictString(load_default="error", validate=validate.OneOf(
        MISSING_POLICIES, error=one_of_message(MISSING_POLICIES)), metadata={
        "description": "What null means in x, y or weights: error (default) or drop."})
    weighting = StrictString(load_default="relative", validate=validate.OneOf(
        WEIGHTINGS, error=one_of_message(WEIGHTINGS)), metadata={
        "description": "How to read each series' weights, as in /v1/fit: relative (default; "
                       "sigma estimated from the residuals) or known_sd (weights are 1/SD² "
                       "of a known measurement error: standard errors from the unscaled "
                       "covariance, normal-based tests, AIC/AICc/BIC at the known "
                       "variances, and the chi-square goodness-of-fit test chi_square_fit "
                       "in each summary's tests). With known_sd every series needs weights: "
                       "one without them gets an error result naming weights (an Arrow or "
                       "Parquet table without a weight column is refused, 422)."})
    detail = StrictString(load_default="summary", validate=validate.OneOf(
        DETAILS, error=one_of_message(DETAILS)), metadata={
        "description": "summary (default): compact result per series from the batch "
                       "engine. full: the whole /v1/fit report per series (slower)."})
    include = fields.List(StrictString(validate=validate.OneOf(
        SECTIONS, error=one_of_message(SECTIONS))), load_default=None, metadata={
        "description": "Sections of each full report (detail=full only; default all but "
                       "grid)."})
    grid = fields.Nested(GridSchema, allow_none=True, load_default=None, metadata={
        "description": "Grid of each full report (detail=full only; default none)."})

    @validates_schema
    def _full_only(self, data, **kwargs):
        """include and grid shape the full report; a summary has neither, so sending them
        without detail "full" would be silently ignored."""
        if data.get("detail", "summary") == "full":
            return
        for name in ("include", "grid"):
            if data.get(name) is not None:
                raise ValidationError(f"{name} applies only to the full report of each series. "
                                      f"Add \"detail\": \"full\", or remove {name}.", name)


class OptionsLineSchema(BatchRequestSchema):
    """NDJSON only: an optional first line ``{"options": {...}}`` with the shared options."""

    series = fields.List(fields.Raw(), load_default=list, metadata={
        "description": "Not used in NDJSON: one series per line instead."})


class BatchOptionsSchema(BatchRequestSchema):
    """Arrow and Parquet bodies: the shared options (the JSON body without series), sent as
    the ``options`` query parameter, a JSON object."""

    class Meta(BatchRequestSchema.Meta):
        exclude = ("series",)
