"""The fitted-model document, schema_version 2 (nonlinear families): wire contract.

:class:`CurveDocumentSchema` documents the layout and checks its types; the core
(``service.core.models.curve_document.from_curve_document``) then checks shapes,
internal consistency, that the equation compiles with exactly the named parameters
(parse only, never evaluated) and the checksum. Specified in docs/fitted-model.md.
"""

from __future__ import annotations

from marshmallow import Schema, fields, validate

from schemas.common import FAMILIES, WEIGHTINGS, StrictSchema, integer, number
from schemas.fields import StrictBoolean, StrictFloat, StrictInteger, StrictString, one_of_message

_KEEP = " Written by /v1/fit; send it back unchanged."
CURVE_FAMILIES = tuple(name for name in FAMILIES if name != "polynomial")


def _required_float(description: str, **kwargs) -> StrictFloat:
    return StrictFloat(required=True, metadata={"description": description + _KEEP}, **kwargs)


class CurveDocumentSchema(StrictSchema):
    """Portable fitted-model document, schema_version 2: a nonlinear family's fitted curve
    (see docs/fitted-model.md)."""

    schema_version = StrictInteger(
        required=True, validate=validate.OneOf([2], error="A nonlinear family's document has "
                                                          "schema_version 2."),
        metadata={"description": "Version of this document layout (2)."})
    family = StrictString(required=True, validate=validate.OneOf(
        CURVE_FAMILIES, error=one_of_message(CURVE_FAMILIES)),
        metadata={"description": "Model family (expression or a built-in curve)." + _KEEP})
    expression = StrictString(required=True, metadata={
        "description": "The fitted equation in canonical form (the expression family's "
                       "grammar; held parameters appear as numbers). "
                       "Parsed again on reading, never evaluated." + _KEEP})
    parameter_names = fields.List(StrictString(), required=True, metadata={
        "description": "The fitted parameters, in the order of estimates." + _KEEP})
    estimates = fields.List(StrictFloat(), required=True, metadata={
        "description": "Parameter estimates." + _KEEP})
    covariance = fields.List(fields.List(StrictFloat(allow_none=True)), required=True,
                             metadata={"description": "Covariance of the estimates, row by "
                                                      "row (null where undefined)." + _KEEP})
    sigma = _required_float("Residual standard deviation; null without residual df.",
                            allow_none=True)
    noise_variance = _required_float("Variance of one new reading at unit weight (sigma^2; "
                                     "1 with known SDs); null when undefined.", allow_none=True)
    df_residual = StrictInteger(required=True, metadata={
        "description": "Residual degrees of freedom (n minus the parameters)." + _KEEP})
    n = StrictInteger(required=True, metadata={"description": "Points used in the fit." + _KEEP})
    x_min = _required_float("Smallest x of the data: the calibrated range starts.")
    x_max = _required_float("Largest x of the data: the calibrated range ends.")
    weighted = StrictBoolean(required=True,
                             metadata={"description": "Fitted with weights." + _KEEP})
    weighting = StrictString(required=True, validate=validate.OneOf(
        WEIGHTINGS, error=one_of_message(WEIGHTINGS)),
        metadata={"description": "How weights were read (relative or known_sd)." + _KEEP})
    distribution = StrictString(required=True, validate=validate.OneOf(
        ("t", "normal"), error=one_of_message(("t", "normal"))),
        metadata={"description": "Reference distribution of the limits: t on df_residual, "
                                 "or normal with known SDs." + _KEEP})
    level = _required_float("Default confidence level for predictions and intervals.")
    checksum = StrictString(required=True, metadata={
        "description": "'sha256:' + hex SHA-256 of the canonical form of every other field "
                       "(docs/fitted-model.md). A changed document is refused with 422."})


class WorkingRangeSchema(Schema):
    """Where a logistic calibration reads concentrations back precisely enough (/v1/invert)."""

    cv_limit = number("The largest acceptable CV of a back-calculated x (0.2 = 20%).")
    replicates = integer("m: readings averaged into each y for this profile (the request's "
                         "replicates when it is one integer, else 1).")
    lower = number("Smallest x of the working range (null when no x reaches the limit).")
    upper = number("Largest x of the working range (null when no x reaches the limit).")
