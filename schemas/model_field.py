"""The model object of a fit request, read by the schema of the family it names.

A request's ``model`` is a polynomial model object unless its ``family`` says
otherwise; each family documents its own model object (``MODEL_SCHEMAS``), and
``GET /v1/families`` lists their options. Adding a family adds its schema here.
"""

from __future__ import annotations

from marshmallow import Schema, ValidationError, fields

from schemas.builtin import BUILTIN_SCHEMAS
from schemas.expression import ExpressionModelSchema
from schemas.fields import one_of_message
from schemas.polynomial import ModelSchema

MODEL_SCHEMAS: dict[str, type[Schema]] = {"polynomial": ModelSchema,
                                          "expression": ExpressionModelSchema,
                                          **BUILTIN_SCHEMAS}
"""Each family's model-object schema, by family name."""


def component_name(schema: type[Schema]) -> str:
    """The OpenAPI component name of a model schema (its class name without "Schema")."""
    return schema.__name__.removesuffix("Schema")


class ModelField(fields.Field):
    """A model object, loaded by the schema its ``family`` names (default: polynomial)."""

    def __init__(self, **kwargs):
        metadata = dict(kwargs.pop("metadata", {}))
        metadata["oneOf"] = [{"$ref": f"#/components/schemas/{component_name(s)}"}
                             for s in MODEL_SCHEMAS.values()]
        super().__init__(metadata=metadata, **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, dict):
            raise ValidationError("Must be a JSON object.")
        family = value.get("family", "polynomial")
        schema = MODEL_SCHEMAS.get(family) if isinstance(family, str) else None
        if schema is None:
            raise ValidationError({"family": [one_of_message(tuple(MODEL_SCHEMAS))]})
        return schema().load(value)
