"""POST /v1/predict and POST /v1/invert (wire contract).

Both take a fitted-model document (:class:`schemas.document.FittedModelField`)
and answer one row per requested value.
"""

from __future__ import annotations

import math

from marshmallow import Schema, ValidationError, fields, validate, validates_schema

from schemas.common import NoticeSchema, StrictSchema, integer, number, text
from schemas.curve_document import WorkingRangeSchema
from schemas.document import FittedModelField
from schemas.fields import (
    MAX_JSON_INTEGER,
    TOO_LARGE_INTEGER,
    NumberArray,
    StrictFloat,
    StrictInteger,
)

_LEVEL = validate.Range(0, 1, min_inclusive=False, max_inclusive=False,
                        error="Must be strictly between 0 and 1, e.g. 0.95.")
_RISK = validate.Range(0, 0.5, min_inclusive=False, max_inclusive=False,
                       error="Must be strictly between 0 and 0.5, e.g. 0.05.")


_WEIGHTS_FIX = ("Send one weight per {what}, each finite and > 0: the weight a new reading "
                "carries on the fit's weight scale (e.g. 1/y^2 for a fit weighted 1/y^2; "
                "1/sd^2 of the reading for a fit with known standard deviations), or leave "
                "weights out for weight 1.")


def _weights_field(what: str) -> NumberArray:
    return NumberArray(load_default=None, allow_none=True, metadata={"description": (
        f"Optional, one per {what}: the weight a new reading there carries on the fit's weight "
        "scale (the variance of one reading is sigma^2 / weight). A fit weighted 1/y^2 "
        "stores sigma^2 at weight 1, i.e. at y = 1: send 1/y^2 of each reading for its own "
        "variance. With known standard deviations (weighting known_sd, sigma = 1) send "
        "1/sd^2 of the new reading in the fit's units. Default: weight 1 for every "
        "reading, which is right only for an unweighted fit (or a reading of weight 1).")},
        error_messages={"item_null": "null is not a weight. Send a number > 0, or leave "
                                     "weights out for weight 1."})


def _check_weights(data: dict, what: str, count_field: str) -> None:
    """weights: one finite positive number per value of ``count_field`` (422 naming
    ``weights[i]`` otherwise)."""
    weights = data.get("weights")
    if weights is None or count_field not in data:
        return
    fix = _WEIGHTS_FIX.format(what=what)
    if len(weights) != len(data[count_field]):
        raise ValidationError(f"weights has {len(weights)} values for {len(data[count_field])} "
                              f"{count_field} values. {fix}", "weights")
    bad = [i for i, w in enumerate(weights.tolist()) if not (math.isfinite(w) and w > 0)]
    if bad:
        raise ValidationError({"weights": {bad[0]: [
            f"weights[{bad[0]}] = {float(weights[bad[0]])!r} is not > 0. {fix}"]}})


class PredictRequestSchema(StrictSchema):
    """Predict at new x with a stored fitted model."""

    fitted_model = FittedModelField(required=True, metadata={
        "description": "The fitted_model document from a /v1/fit response, unchanged."})
    x = NumberArray(required=True, data=True, metadata={
        "description": "Where to predict, on the original x scale."}, error_messages={
        "item_null": "null is not an x to predict at. Remove it (this endpoint has no "
                     "missing option).",
        "data_empty": "Empty array: send at least one x to predict at."})
    level = StrictFloat(load_default=None, allow_none=True, validate=_LEVEL, metadata={
        "description": "Confidence level of the bands; default: the document's level."})
    replicates = StrictInteger(load_default=1, validate=validate.Range(
        min=1, error="Must be 1 or more."), metadata={"maximum": MAX_JSON_INTEGER,
        "description": "m: the observation band covers the mean of m future readings."})
    weights = _weights_field("x")

    @validates_schema
    def _weights(self, data, **kwargs):
        _check_weights(data, "x", "x")


class PredictionRowSchema(Schema):
    """Prediction at one x."""

    x = number("Where.")
    fit = number("Fitted value (original y scale).")
    se_mean = number("Standard error of the fitted mean (fitting scale).")
    mean_lower = number("Lower limit for the mean response.")
    mean_upper = number("Upper limit for the mean response.")
    obs_lower = number("Lower limit for the mean of `replicates` new readings, each of "
                       "variance sigma^2 / weight (the request's weights; without them weight "
                       "1, the variance sigma^2 of a reading of weight 1 on a weighted fit's "
                       "scale: with weights 1/y^2, say, a reading's variance at y = 1 only).")
    obs_upper = number("Upper limit for the mean of `replicates` new readings (same "
                       "variance).")
    band_lower = number("Lower limit of the simultaneous (Working-Hotelling) band.")
    band_upper = number("Upper limit of the simultaneous (Working-Hotelling) band.")
    extrapolated = fields.Boolean(metadata={
        "description": "x lies outside the fitted data range [x_min, x_max]."})
    unbounded = fields.Boolean(metadata={
        "description": "A limit has no finite value on the original y scale and is null: the "
                       "band reaches the pole of the reciprocal transform (the interval "
                       "holding the fit is open on that side), or leaves the double range."})


class Rows(fields.List):
    """A list of row objects built fast from equal-length columns (NaN -> null).

    Dumps ``{"column": array, ...}`` as ``[{"column": value, ...}, ...]``; the
    row schema documents the fields and fixes their order.
    """

    def __init__(self, row_schema: type[Schema], **kwargs):
        super().__init__(fields.Nested(row_schema), **kwargs)
        self.names = tuple(row_schema().fields)

    def _serialize(self, value, attr, obj, **kwargs):
        if value is None:
            return None
        columns = [_column(value[name]) for name in self.names]
        return [dict(zip(self.names, row, strict=True)) for row in zip(*columns, strict=True)]


def _column(values) -> list:
    items = values.tolist() if hasattr(values, "tolist") else list(values)
    return [None if isinstance(v, float) and not math.isfinite(v) else v for v in items]


class PredictResponseSchema(Schema):
    """Predictions at the requested x, in request order."""

    predictions = Rows(PredictionRowSchema, required=True)
    level = number("Confidence level used.")
    replicates = integer("m used for the observation band.")
    extrapolated_count = integer("How many x lie outside the fitted data range.")
    undefined_count = integer("How many x the fitted curve has no finite value at (an equation "
                              "undefined or overflowing there): their rows are null.")
    intervals_withheld = fields.Nested(NoticeSchema, metadata={
        "description": "Present only when the stored fit has no residual variance (sigma = 0: "
                       "the curve passes through every point): code no_residual_variance; "
                       "fit is given, but se_mean and every limit are null, since a "
                       "zero-width band would claim a certainty the data cannot give."})


class ReplicatesField(fields.Field):
    """An integer >= 1 for every reading, or one such integer per reading."""

    def __init__(self, **kwargs):
        super().__init__(metadata={
            "description": "How many readings were averaged into each y (m): one integer for "
                           "all, or a list with one per y.",
            "oneOf": [{"type": "integer", "minimum": 1, "maximum": MAX_JSON_INTEGER},
                      {"type": "array", "items": {"type": "integer", "minimum": 1,
                                                  "maximum": MAX_JSON_INTEGER}}]},
            **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, list):
            return [self._one(v, index) for index, v in enumerate(value)]
        return self._one(value, None)

    @staticmethod
    def _one(value, index):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or (
                isinstance(value, float) and not value.is_integer()) or value < 1:
            message = "Must be a whole number >= 1 (readings averaged into this y)."
            raise ValidationError({index: [message]} if index is not None else message)
        if value > MAX_JSON_INTEGER:
            raise ValidationError({index: [TOO_LARGE_INTEGER]} if index is not None
                                  else TOO_LARGE_INTEGER)
        return int(value)


class InvertRequestSchema(StrictSchema):
    """Read x back from observed y with a stored calibration curve."""

    fitted_model = FittedModelField(required=True, metadata={
        "description": "The fitted_model document from a /v1/fit response, unchanged."})
    y = NumberArray(required=True, data=True, metadata={
        "description": "Observed readings (original y scale); each the mean of its replicates, "
                       "each of variance sigma^2 / weight (the request's weights; weight 1 "
                       "without them; see docs/fitted-model.md, Limits and caveats)."},
        error_messages={
        "item_null": "null is not a reading. Remove it (this endpoint has no missing option).",
        "data_empty": "Empty array: send at least one reading to read x back from."})
    replicates = ReplicatesField(load_default=1)
    level = StrictFloat(load_default=None, allow_none=True, validate=_LEVEL, metadata={
        "description": "Level of the calibration intervals; default: the document's level."})
    detection_alpha = StrictFloat(load_default=0.05, validate=_RISK, metadata={
        "description": "False-positive risk for the decision/detection limits."})
    detection_beta = StrictFloat(load_default=0.05, validate=_RISK, metadata={
        "description": "False-negative risk for the detection limit."})
    cv_limit = StrictFloat(load_default=0.2, validate=validate.Range(
        0, 1, min_inclusive=False, max_inclusive=False,
        error="Must be strictly between 0 and 1, e.g. 0.2 for 20%."), metadata={
        "description": "logistic4/logistic5: the CV limit of the working range (0.2 = 20%, "
                       "common practice in bioanalytical method validation)."})
    weights = _weights_field("y")

    @validates_schema
    def _weights(self, data, **kwargs):
        _check_weights(data, "reading", "y")


class EstimateSchema(Schema):
    """One reading read back."""

    y = number("The reading.")
    replicates = integer("m: readings averaged into y.")
    x = number("Estimated x; null unless exactly one root lies in the calibrated range.")
    lower = number("Lower limit of the calibration interval (classical: inverted prediction "
                   "band for the mean of m readings, each of variance sigma^2 / weight; "
                   "weight 1 when the request sends no weights).")
    upper = number("Upper limit of the calibration interval.")
    status = text("ok, or why there is no single trustworthy in-range answer: not_monotone, "
                  "no_real_root, roots_unresolved, outside_range, multiple_roots_in_range, "
                  "interval_exceeds_range, interval_disjoint, interval_unbounded, "
                  "interval_at_domain_edge (lower cut at x = 0, the curve's domain edge), "
                  "interval_undefined, no_residual_variance (an exact fit, sigma = 0: x "
                  "without limits) (meanings in docs/fitted-model.md).")
    other_roots = fields.List(fields.Float(), metadata={
        "description": "Other real x that give this y (not chosen), ascending."})
    sensitivity = number("Slope dy/dx of the curve at x (null when x is null).")


class CalibrationSchema(Schema):
    """Figures of merit of a calibration: straight-line and quadratic polynomials, and
    nonlinear curves monotone from the blank (formulas in docs)."""

    available = fields.Boolean(metadata={"description": "False when not defined for this model."})
    reason = text("Why the figures are not available (empty when available).")
    sensitivity_at_blank = number("Slope dy/dx at x = 0.")
    sigma = number("Residual standard deviation (y units).")
    detection_limit_ich = number("3.3 sigma / slope, read through the curve (x units).")
    quantification_limit_ich = number("10 sigma / slope, read through the curve (x units).")
    alpha = number("False-positive risk used.")
    beta = number("False-negative risk used.")
    decision_level_y = number("y_C: upper one-sided prediction limit of a blank reading.")
    decision_limit = number("x_C: x at which the curve reaches y_C.")
    detection_limit = number("x_D: smallest x whose lower prediction limit reaches y_C.")
    blank_extrapolated = fields.Boolean(metadata={
        "description": "x = 0 lies outside the calibrated range: the limits extrapolate."})


class InvertResponseSchema(Schema):
    """x estimates in request order, with the model-wide facts used to judge them."""

    estimates = Rows(EstimateSchema, required=True)
    level = number("Level of the calibration intervals.")
    monotone = fields.Boolean(metadata={
        "description": "The curve is monotone over the calibrated range (a calibration "
                       "curve must be)."})
    turning_points = fields.List(fields.Float(), metadata={
        "description": "x inside the calibrated range where the slope changes sign."})
    x_min = number("Calibrated range: smallest x of the data.")
    x_max = number("Calibrated range: largest x of the data.")
    calibration = fields.Nested(CalibrationSchema)
    working_range = fields.Nested(WorkingRangeSchema, allow_none=True, metadata={
        "description": "logistic4/logistic5: the x range where the CV of a back-calculated x "
                       "(half its central 68.27% range over x) stays at or under cv_limit "
                       "(precision profile; "
                       "docs/fitted-model.md); null for other families."})
