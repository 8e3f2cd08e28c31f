"""GET /v1/families: the model families, their options, and this server's limits."""

from __future__ import annotations

from marshmallow import Schema, fields, missing

from schemas.common import integer, number, text
from schemas.model_field import MODEL_SCHEMAS  # noqa: F401  (re-exported)


class OptionSchema(Schema):
    """One option of a family's model object."""

    name = text("Option name, as in the model object of /v1/fit.", required=True)
    type = text("JSON type: integer, number, boolean or string.", required=True)
    default = fields.Raw(allow_none=True, metadata={"description": "Default value (null: none)."})
    choices = fields.List(fields.String(), metadata={"description": "Allowed values, if fixed."})
    description = text("What the option does.", required=True)


class ParameterSchema(Schema):
    """One parameter of a built-in family."""

    name = text("Parameter name, as in the answer's coefficients and in model.parameters, "
                "model.lower, model.upper and model.fixed.", required=True)
    meaning = text("What the parameter is, with its unit.", required=True)
    constraint = text("Its admissible values, in words.", required=True)


class ReadingSchema(Schema):
    """What /v1/invert answers for this family's fitted models, and when."""

    invertible = fields.Boolean(required=True, metadata={
        "description": "/v1/invert reads x back from y with this family's documents."})
    invert_condition = text("When a fit of the family can be read backwards.", required=True)
    working_range = fields.Boolean(required=True, metadata={
        "description": "/v1/invert reports working_range (precision profile at cv_limit) "
                       "for this family's fits."})
    working_range_condition = text("When the working range is reported (empty: never).",
                                   required=True)
    detection_limit = fields.Boolean(required=True, metadata={
        "description": "/v1/invert's calibration section (decision and detection limits, "
                       "ICH-style limits) can be available for this family."})
    detection_limit_condition = text("When the limits are available (otherwise calibration."
                                     "available is false with the reason).", required=True)


class FamilySchema(Schema):
    """A model family."""

    name = text("Family name (the model.family value).", required=True)
    description = text("What the family fits.", required=True)
    equation = text("The family's equation in x and its parameters (built-in families); the "
                    "answer's model.expression is the fitted form.", allow_none=True)
    parameters = fields.List(fields.Nested(ParameterSchema), metadata={
        "description": "Each parameter's meaning and constraint (built-in families)."})
    options = fields.List(fields.Nested(OptionSchema), required=True,
                          metadata={"description": "Options of the model object."})
    select_methods = fields.List(fields.String(), required=True,
                                 metadata={"description": "Values of model.select."})
    transforms = fields.List(fields.String(), required=True,
                             metadata={"description": "Values of transform_x / transform_y."})
    reading = fields.Nested(ReadingSchema, required=True, metadata={
        "description": "Reading x back from y: inverse, working range, detection limits."})


class LimitsSchema(Schema):
    """The limits in force on this server (set by CURVEWISE_* variables)."""

    max_body_bytes = integer("Largest request body, bytes (413 above).", required=True)
    max_points = integer("Most points in one series (413 above).", required=True)
    max_degree = integer("Highest degree (422 above).", required=True)
    max_grid_points = integer("Most grid points (422 above).", required=True)
    max_series = integer("Most series in one /v1/batch request.", required=True)
    max_full_series = integer("Most series in one JSON /v1/batch request with detail full "
                              "(NDJSON streams full reports without this limit).",
                              required=True)
    max_total_points = integer("Most points in one /v1/batch request.", required=True)
    request_timeout = number("Seconds of compute per request (503 above).", required=True)


class FamiliesResponseSchema(Schema):
    """The families, request options and limits, machine-readable."""

    families = fields.List(fields.Nested(FamilySchema), required=True,
                           metadata={"description": "Model families."})
    missing_policies = fields.List(fields.String(), required=True,
                                   metadata={"description": "Values of missing."})
    sections = fields.List(fields.String(), required=True,
                           metadata={"description": "Values of include."})
    defaults = fields.Dict(keys=fields.String(), required=True, metadata={
        "description": "Defaults of the top-level /v1/fit options (level, missing, grid, include); "
        "grid_spacing: a count-only grid is evenly spaced, except for a built-in curve on "
        "log x (model.scale \"log\"), whose grid is log-spaced (grid.spacing)."})
    limits = fields.Nested(LimitsSchema, required=True)


_JSON_TYPES = (("StrictBoolean", "boolean"), ("StrictInteger", "integer"),
               ("StrictFloat", "number"), ("StrictString", "string"))


def describe_options(schema: Schema) -> list[dict]:
    """The options of a request schema (name, JSON type, default, choices, description)."""
    out = []
    for name, field in schema.fields.items():
        kind = next((json for cls, json in _JSON_TYPES
                     if cls in {c.__name__ for c in type(field).__mro__}), "object")
        default = field.load_default
        default = None if callable(default) or default is missing else default
        entry = {"name": name, "type": kind, "default": default,
                 "description": field.metadata.get("description", "")}
        if "enum" in field.metadata:
            entry["choices"] = list(field.metadata["enum"])
        out.append(entry)
    return out
