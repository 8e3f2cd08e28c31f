"""The polynomial fitted-model document and the field that reads any document (wire contract).

:class:`FittedModelSchema` documents schema_version 1 of the document and
checks its types; the core (``from_document``) then checks shapes, internal
consistency and the checksum. :class:`FittedModelField` loads a document by
the schema of its ``schema_version``. The format is specified in
docs/fitted-model.md.
"""

from __future__ import annotations

from marshmallow import Schema, ValidationError, fields, validate

from schemas.common import TRANSFORMS, StrictSchema
from schemas.curve_document import CurveDocumentSchema
from schemas.fields import (
    CodedMessage,
    StrictBoolean,
    StrictFloat,
    StrictInteger,
    StrictString,
    coded,
    one_of_message,
)

_KEEP = " Written by /v1/fit; send it back unchanged."


def _doc_float(description: str, **kwargs) -> StrictFloat:
    return StrictFloat(required=True, metadata={"description": description + _KEEP}, **kwargs)


def _doc_list(description: str, *, nullable: bool = False) -> fields.List:
    return fields.List(StrictFloat(allow_none=nullable), required=True,
                       metadata={"description": description + _KEEP})


def _doc_matrix(description: str, *, nullable: bool = False) -> fields.List:
    return fields.List(fields.List(StrictFloat(allow_none=nullable)), required=True,
                       metadata={"description": description + _KEEP})


class FittedModelSchema(StrictSchema):
    """Portable fitted-model document, schema_version 1 (see docs/fitted-model.md)."""

    schema_version = StrictInteger(
        required=True,
        validate=validate.OneOf([1, 2], error="Unsupported schema_version; this service reads 1 "
                                              "and 2. Refit with this service to get a current "
                                              "document."),
        metadata={"description": "Version of this document layout (1)."})
    family = StrictString(required=True, validate=validate.OneOf(["polynomial"]),
                          metadata={"description": "Model family." + _KEEP})
    degree = StrictInteger(required=True, metadata={"description": "Polynomial degree." + _KEEP})
    intercept = StrictBoolean(required=True,
                              metadata={"description": "Constant term included." + _KEEP})
    terms = fields.List(StrictString(), required=True, metadata={
        "description": "Coefficient names in order (intercept, x, x^2, ...)." + _KEEP})
    transform_x = StrictString(required=True, validate=validate.OneOf(
        TRANSFORMS, error=one_of_message(TRANSFORMS)), metadata={
        "description": "Transform applied to x before fitting (u = transform(x))." + _KEEP})
    transform_y = StrictString(required=True, validate=validate.OneOf(
        TRANSFORMS, error=one_of_message(TRANSFORMS)), metadata={
        "description": "Transform applied to y before fitting." + _KEEP})
    x_shift = _doc_float("Shift s of the computational variable t = (u - s) / c.")
    x_scale = _doc_float("Scale c > 0 of t = (u - s) / c.")
    basis_coefficients = _doc_list("Coefficients on powers of t (t^0..t^d; t^1..t^d "
                                   "without intercept).")
    r_factor = _doc_matrix("Upper-triangular R of the (weighted) design QR in the t basis, "
                           "row by row; se of the mean at t is sigma * ||R^-T v(t)||.")
    raw_coefficients = _doc_list("Coefficients on powers of u (the transformed x); null "
                                 "where outside the double range.", nullable=True)
    raw_covariance = _doc_matrix("Covariance of raw_coefficients (null where undefined).",
                                 nullable=True)
    sigma = _doc_float("Residual standard deviation; null without residual df.",
                       allow_none=True)
    df_residual = StrictInteger(required=True,
                                metadata={"description": "Residual degrees of freedom." + _KEEP})
    n = StrictInteger(required=True, metadata={"description": "Points used in the fit." + _KEEP})
    x_min = _doc_float("Smallest x of the data (original x scale): the calibrated range starts.")
    x_max = _doc_float("Largest x of the data (original x scale): the calibrated range ends.")
    weighted = StrictBoolean(required=True,
                             metadata={"description": "Fitted with weights." + _KEEP})
    level = _doc_float("Default confidence level for predictions and intervals.")
    weighting = StrictString(validate=validate.OneOf(["known_sd"]), metadata={
        "description": "Present only for fits with known measurement SDs (weighting "
                       "known_sd): sigma is then 1 and limits use the normal distribution. "
                       "Absent means relative weights." + _KEEP})
    checksum = StrictString(required=True, metadata={
        "description": "'sha256:' + hex SHA-256 of the canonical form of every other field "
                       "(docs/fitted-model.md). A changed document is refused with 422."})


DOCUMENT_SCHEMAS: dict[int, type[Schema]] = {1: FittedModelSchema, 2: CurveDocumentSchema}
"""Each fitted-model document layout by schema_version (1: polynomial; 2: nonlinear)."""


class FittedModelField(fields.Field):
    """A fitted-model document, loaded by the schema of its ``schema_version`` (version 1
    unless it says 2); dumped unchanged. Documented as a oneOf of the layouts."""

    def __init__(self, **kwargs):
        metadata = dict(kwargs.pop("metadata", {}))
        metadata["oneOf"] = [{"$ref": f"#/components/schemas/{s.__name__.removesuffix('Schema')}"}
                             for s in DOCUMENT_SCHEMAS.values()]
        super().__init__(metadata=metadata, **kwargs)

    def _serialize(self, value, attr, obj, **kwargs):
        return value

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, dict):
            raise ValidationError("Must be a JSON object. Send the fitted_model object exactly "
                                  "as /v1/fit returned it.")
        if isinstance(value.get("fitted_model"), dict):  # the whole /v1/fit answer
            raise ValidationError(CodedMessage(
                "This is a whole /v1/fit answer, not its fitted-model document. Send its "
                "`fitted_model` field: {\"fitted_model\": answer[\"fitted_model\"], ...}.",
                "invalid_document"))
        version = value.get("schema_version")
        if (isinstance(version, int) and not isinstance(version, bool)
                and version not in DOCUMENT_SCHEMAS):
            raise ValidationError({"schema_version": [CodedMessage(
                f"Unsupported schema_version {version}; this service reads "
                f"{' and '.join(map(str, DOCUMENT_SCHEMAS))}. Refit with this service to get "
                "a current document.", "invalid_document")]})
        schema = DOCUMENT_SCHEMAS.get(2 if version == 2 and not isinstance(version, bool) else 1)
        try:
            return schema().load(value)
        except ValidationError as exc:  # a malformed document: invalid_document
            raise ValidationError(coded(exc.messages, "invalid_document")) from None
