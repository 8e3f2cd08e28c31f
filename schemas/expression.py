"""The ``expression`` family's model object: the caller's equation, its parameters with start
values, and optional bounds."""

from __future__ import annotations

from marshmallow import ValidationError, fields, validate, validates_schema

from schemas.common import StrictSchema
from schemas.fields import StrictFloat, StrictString, choice

MAX_EXPRESSION_CHARS = 2000  # the core's parser limit (a test keeps them equal)
MAX_PARAMETERS = 30


def _named_numbers(description: str, **kwargs) -> fields.Dict:
    return fields.Dict(
        keys=StrictString(validate=validate.Length(1, 64, error="Parameter names have 1 to 64 "
                                                                "characters.")),
        values=StrictFloat(), metadata={"description": description}, **kwargs)


class ExpressionModelSchema(StrictSchema):
    """The caller's own equation, fitted by nonlinear least squares from given start values."""

    family = choice(("expression",), "Model family: expression.", required=True)
    expression = StrictString(
        required=True, validate=validate.Length(1, MAX_EXPRESSION_CHARS, error=(
            f"Send the equation as 1 to {MAX_EXPRESSION_CHARS} characters.")),
        metadata={"description": "The model equation: a plain arithmetic expression in x and "
                                 "the named parameters. Numbers, + - * /, powers (^ or **), "
                                 "parentheses, and exp, log (natural), log10, sqrt, sin, cos, "
                                 "tan, arctan, abs, pi. Example: b1*(1-exp(-b2*x))."})
    parameters = _named_numbers(
        "Every parameter of the equation with its start value, in the order the answer "
        "lists them, e.g. {\"b1\": 250, \"b2\": 0.0005}. The fit starts there: values of the "
        "right size and sign matter for curved models.", required=True,
        validate=validate.Length(1, MAX_PARAMETERS, error=(
            f"Give 1 to {MAX_PARAMETERS} parameters with their start values.")))
    lower = _named_numbers("Optional lower bounds by parameter name, e.g. {\"b2\": 0}.",
                           load_default=None, allow_none=True)
    upper = _named_numbers("Optional upper bounds by parameter name.", load_default=None,
                           allow_none=True)

    @validates_schema
    def _bounds_name_parameters(self, data, **kwargs):
        names = set(data.get("parameters") or ())
        for side in ("lower", "upper"):
            for name in data.get(side) or ():
                if name not in names:
                    raise ValidationError(
                        f"{name!r} is not one of the parameters ({', '.join(sorted(names))}). "
                        "Bound only declared parameters.", side)
