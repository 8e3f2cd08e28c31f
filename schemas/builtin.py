"""The built-in nonlinear families' model objects: optional start values, bounds, fixed
values and (dose-response curves) the x scale.

The parameter names and scales repeat the core's (``service.core.nonlinear.builtin``)
on purpose: the contract may not import the numerics, and
``tests/api/test_vocabulary.py`` keeps the two in step.
"""

from __future__ import annotations

from marshmallow import Schema, ValidationError, validates_schema

from schemas.common import StrictSchema
from schemas.expression import _named_numbers
from schemas.fields import choice

BUILTIN_PARAMETERS: dict[str, tuple[str, ...]] = {
    "logistic4": ("y_left", "y_right", "slope", "ec50"),
    "logistic5": ("y_left", "y_right", "slope", "ec50", "asymmetry"),
    "exponential": ("y0", "plateau", "k"),
    "michaelis_menten": ("vmax", "km"),
    "gompertz": ("asymptote", "rate", "inflection"),
    "logistic_growth": ("asymptote", "rate", "inflection"),
    "power": ("coefficient", "exponent"),
    "gaussian_peak": ("baseline", "height", "centre", "width"),
    "biexponential": ("a_fast", "k_fast", "a_slow", "k_slow"),
    "weibull": ("y0", "plateau", "tau", "shape"),
}
"""Each built-in family's parameters, in the order the answer lists them."""

BUILTIN_SCALES: dict[str, tuple[str, ...]] = {"logistic4": ("log", "linear"),
                                              "logistic5": ("log", "linear")}
"""The families with a choice of x scale (the first is the default)."""

_SIDES = ("parameters", "lower", "upper", "fixed")


def _shared_fields() -> dict:
    """The options every built-in family takes (fresh field objects for each schema)."""
    return {
        "parameters": _named_numbers(
            "Optional start values by parameter name. None are needed: the service finds its "
            "own (data shape, then a grid search with the linear parameters solved exactly, "
            "several starts kept). Values given here replace the automatic ones; with every "
            "free parameter given, the fit starts there only.", load_default=None,
            allow_none=True),
        "lower": _named_numbers("Optional lower bounds by parameter name, e.g. {\"k\": 0}.",
                                load_default=None, allow_none=True),
        "upper": _named_numbers("Optional upper bounds by parameter name.", load_default=None,
                                allow_none=True),
        "fixed": _named_numbers("Parameters held at a value instead of fitted, e.g. "
                                "{\"y0\": 0} for an exponential rise from 0.",
                                load_default=None, allow_none=True),
    }


@validates_schema
def _names_are_parameters(self, data, **kwargs):
    names = BUILTIN_PARAMETERS[data["family"]]
    for side in _SIDES:
        for name in data.get(side) or ():
            if name not in names:
                raise ValidationError(f"{name!r} is not a parameter of {data['family']} "
                                      f"({', '.join(names)}). Use those names.", side)


def _schema(family: str) -> type[Schema]:
    """The model-object schema of one built-in family: its name, its scale if it has a
    choice, then the shared options."""
    names = BUILTIN_PARAMETERS[family]
    attrs = {"__doc__": f"The {family} family: parameters {', '.join(names)}; automatic "
                        "start values (GET /v1/families gives its equation).",
             "family": choice((family,), f"Model family: {family}.", required=True)}
    scales = BUILTIN_SCALES.get(family)
    if scales:
        attrs["scale"] = choice(scales, "The x scale of the curve: log (x > 0, or 0 for "
                                "zero-dose controls; ec50 in x units) or linear.",
                                load_default=scales[0])
    attrs.update(_shared_fields())
    attrs["_names_are_parameters"] = _names_are_parameters
    title = "".join(part.capitalize() for part in family.split("_"))
    return type(f"{title}ModelSchema", (StrictSchema,), attrs)


BUILTIN_SCHEMAS: dict[str, type[Schema]] = {name: _schema(name) for name in BUILTIN_PARAMETERS}
"""Each built-in family's model-object schema, by family name."""
