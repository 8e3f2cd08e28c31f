"""The model object of a fit request, read by the schema of the family it names.

A request's ``model`` is a polynomial model object unless its ``family`` says
otherwise; each family documents its own model object (``MODEL_SCHEMAS``), and
``GET /v1/families`` lists their options. Adding a family adds its schema here.
"""

from __future__ import annotations

import json

from marshmallow import Schema, ValidationError, fields, validate

from schemas.builtin import BUILTIN_SCHEMAS
from schemas.common import StrictSchema
from schemas.expression import ExpressionModelSchema
from schemas.fields import StrictFloat, choice, one_of_message
from schemas.polynomial import ModelSchema

MODEL_SCHEMAS: dict[str, type[Schema]] = {"polynomial": ModelSchema,
                                          "expression": ExpressionModelSchema,
                                          **BUILTIN_SCHEMAS}
"""Each family's model-object schema, by family name."""

COMPARE_RULES = ("aicc", "aic", "bic", "f_test")
MAX_CANDIDATES = 8


NESTED_COMPARISON = "A candidate cannot hold candidates. List plain model objects."
BATCH_COMPARISON = ("A batch fits one model per series and does not compare candidates. Give "
                    "one model object here, or compare candidates series by series with /v1/fit.")

_LOADERS: dict[type[Schema], Schema] = {}


def _loader(schema: type[Schema]) -> Schema:
    """One shared instance per schema class: building a schema deep-copies and binds its
    fields (~0.1 ms, a tenth of a small /v1/fit); loading keeps no state on the instance."""
    instance = _LOADERS.get(schema)
    if instance is None:
        instance = _LOADERS[schema] = schema()
    return instance


def component_name(schema: type[Schema]) -> str:
    """The OpenAPI component name of a model schema (its class name without "Schema")."""
    return schema.__name__.removesuffix("Schema")


class ModelField(fields.Field):
    """A model object, loaded by the schema its ``family`` names (default: polynomial);
    with ``candidates`` (and ``comparisons`` allowed), a comparison of several."""

    def __init__(self, *, comparisons: bool = True, refusal: str = NESTED_COMPARISON, **kwargs):
        metadata = dict(kwargs.pop("metadata", {}))
        self.refusal = refusal   # the answer to candidates where comparisons are not allowed
        refs = list(MODEL_SCHEMAS.values()) + ([CandidatesSchema] if comparisons else [])
        metadata["oneOf"] = [{"$ref": f"#/components/schemas/{component_name(s)}"}
                             for s in refs]
        self.comparisons = comparisons
        super().__init__(metadata=metadata, **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, dict):
            raise ValidationError("Must be a JSON object.")
        if "candidates" in value:
            if not self.comparisons:
                raise ValidationError({"candidates": [self.refusal]})
            return _loader(CandidatesSchema).load(value)
        family = value.get("family", "polynomial")
        schema = MODEL_SCHEMAS.get(family) if isinstance(family, str) else None
        if schema is None:
            raise ValidationError({"family": [one_of_message(tuple(MODEL_SCHEMAS))]})
        return _loader(schema).load(value)


class CandidatesSchema(StrictSchema):
    """Several model objects fitted to the same series; one is chosen and the reason given."""

    candidates = fields.List(
        ModelField(comparisons=False), required=True,
        validate=validate.Length(2, MAX_CANDIDATES, error=(
            f"List 2 to {MAX_CANDIDATES} model objects.")),
        metadata={"description": "The model objects to compare, e.g. [{\"family\": "
                                 "\"expression\", ...}, {\"family\": \"polynomial\", "
                                 "\"max_degree\": 3}]. A candidate that cannot be fitted is "
                                 "reported, not fatal."})
    select = choice(COMPARE_RULES, "How to choose: aicc (default), aic or bic (smallest "
                    "criterion among converged candidates), or f_test (extra-sum-of-squares F "
                    "tests walking nested pairs from the simplest, then the smallest AICc).",
                    load_default="aicc")
    alpha = StrictFloat(load_default=0.05, validate=validate.Range(
        0, 1, min_inclusive=False, max_inclusive=False,
        error="Must be strictly between 0 and 1, e.g. 0.05."), metadata={
        "description": "Significance level of the F tests (select=f_test)."})


DOCUMENTED_MODELS = (*MODEL_SCHEMAS.values(), CandidatesSchema)
"""Every model object the request's ``model`` may be (OpenAPI components of its oneOf)."""

MODEL_OPTIONS = frozenset(name for schema in DOCUMENTED_MODELS for name in schema._declared_fields)
"""Every field a model object can have (degree, max_degree, family, expression, ...)."""


def misplaced_model_options(body: dict, own_fields) -> dict[str, list[str]]:
    """``{name: [message]}`` for each model option sent beside ``model`` instead of inside it.

    ``own_fields`` are the fields of the object itself (they are never misplaced).
    """
    errors = {}
    for name in body:
        if name in MODEL_OPTIONS and name not in own_fields:
            shown = json.dumps(body[name], ensure_ascii=False)
            shown = shown if len(shown) <= 40 else "..."
            errors[name] = [f"{name} is an option of the model, not of the request: move it "
                            f"into `model`, e.g. {{\"model\": {{\"{name}\": {shown}}}}}."]
    return errors
