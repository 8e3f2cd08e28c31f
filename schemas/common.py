"""Shared vocabulary and building blocks of the wire contract.

The vocabularies repeat the core's (``service.core.spec``) on purpose: the
contract must not import the numerics. ``tests/api/test_vocabulary.py`` keeps
the two in step.
"""

from __future__ import annotations

from marshmallow import RAISE, Schema, fields

from schemas.fields import (
    NULL_MESSAGE,
    REQUIRED_MESSAGE,
    StrictFloat,
    StrictInteger,
    StrictString,
)

FAMILIES = ("polynomial", "expression", "logistic4", "logistic5", "exponential",
            "michaelis_menten", "gompertz", "logistic_growth", "power", "gaussian_peak",
            "biexponential", "weibull")
WEIGHTINGS = ("relative", "known_sd")
SELECT_METHODS = ("sequential_f", "aic", "aicc", "bic", "press", "adj_r2")
TRANSFORMS = ("none", "log", "log10", "sqrt", "reciprocal")
MISSING_POLICIES = ("error", "drop")
GRID_SPACINGS = ("linear", "log")
SECTIONS = ("coefficients", "anova", "statistics", "selection", "diagnostics", "grid",
            "fitted_model")
HARD_MAX_DEGREE = 12
SEVERITIES = ("info", "caution", "serious")

UNKNOWN_FIELD = "Unknown field. Remove it; /docs lists the fields this object accepts."


# marshmallow's stock messages, and ours: every message says what to do (no braces: marshmallow
# formats them)
_STOCK_MESSAGES = {
    "required": (fields.Field.default_error_messages["required"], REQUIRED_MESSAGE),
    "null": (fields.Field.default_error_messages["null"], NULL_MESSAGE),
}
_STOCK_INVALID = {
    fields.List: (fields.List.default_error_messages["invalid"],
                  "Must be a JSON array. Send a list, e.g. [1, 2, 3]."),
    fields.Dict: (fields.Mapping.default_error_messages["invalid"],
                  "Must be a JSON object (names to values). Send an object, not a list."),
}


class StrictSchema(Schema):
    """Base for request objects: unknown fields are an error naming the field, and no field
    answers with marshmallow's stock text (a missing nested document or list says what to
    do, like every other field)."""

    class Meta:
        unknown = RAISE

    error_messages = {
        "unknown": UNKNOWN_FIELD,
        "type": "Must be a JSON object.",
    }

    def on_bind_field(self, field_name: str, field_obj: fields.Field) -> None:
        messages = field_obj.error_messages
        for key, (stock, ours) in _STOCK_MESSAGES.items():
            if messages.get(key) == stock:
                messages[key] = ours
        for kind, (stock, ours) in _STOCK_INVALID.items():
            if isinstance(field_obj, kind) and messages.get("invalid") == stock:
                messages["invalid"] = ours


def number(description: str, **kwargs) -> StrictFloat:
    """A response number that is ``null`` when undefined (never NaN or Infinity)."""
    return StrictFloat(allow_none=True, metadata={"description": description}, **kwargs)


def integer(description: str, **kwargs) -> StrictInteger:
    """A documented response integer."""
    return StrictInteger(metadata={"description": description}, **kwargs)


def text(description: str, **kwargs) -> StrictString:
    """A documented response string."""
    return StrictString(metadata={"description": description}, **kwargs)


class NoticeSchema(Schema):
    """A numerical or data warning (stable snake_case code + message)."""

    code = text("Stable machine-readable reason, snake_case.", required=True)
    message = text("What happened, in plain words.", required=True)


class TrustFlagSchema(Schema):
    """A plain-language reason to be careful with this fit, with its evidence."""

    code = text("Stable machine-readable reason, snake_case.", required=True)
    severity = text("One of info, caution, serious.", required=True)
    message = text("The concern and what to do, in plain words.", required=True)
    evidence = fields.Dict(keys=fields.String(), metadata={
        "description": "The numbers behind the flag (name -> value)."})


class ProblemSchema(Schema):
    """RFC 9457 problem details (media type application/problem+json)."""

    type = text("Relative URI reference of a page that explains this problem: "
                "/problems/<code>.", required=True)
    code = text("Stable machine-readable name of the problem (see the error catalogue).",
                required=True)
    title = text("Short, human-readable summary of the problem type.", required=True)
    status = integer("The HTTP status code.", required=True)
    detail = text("What went wrong with this request and what to do about it.")
    instance = text("The request path.", allow_none=True)
    errors = fields.Dict(
        keys=fields.String(), values=fields.List(fields.String()),
        required=True,
        metadata={"description": "Field path (e.g. y[17], model.degree) -> messages, "
                                 "each saying what to fix. _body is the body as a whole, "
                                 "_path the URL path, _method the HTTP method; empty when "
                                 "no input is at fault."})
