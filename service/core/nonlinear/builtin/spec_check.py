"""Checking a built-in family's model options, and its equation compiled with fixed values.

A fixed parameter is written into the equation text as its number before the
text is compiled, so the fitted equation (and the canonical text in the
report) is exactly the curve that was fitted, with exact derivatives of the
free parameters only.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

from service.core.errors import SpecError
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.definition import Builtin
from service.core.nonlinear.expression import compile_model
from service.core.nonlinear.expression.scan import MAX_LITERAL
from service.core.nonlinear.expression_family import check_weighting
from service.core.spec import FitOptions, ModelSpec

_FIELDS = (("parameters", "model.parameters"), ("lower", "model.lower"),
           ("upper", "model.upper"), ("fixed", "model.fixed"))


def check_spec(family: Builtin, model: ModelSpec, options: FitOptions) -> None:
    """Validate a built-in family's model options (``SpecError`` naming the field)."""
    check_weighting(options)
    names = family.names
    given = {}
    for attr, field in _FIELDS:
        given[attr] = dict(getattr(model, attr) or ())
        for name, value in given[attr].items():
            if name not in names:
                raise SpecError(f"{field} names {name!r}, which is not a parameter of "
                                f"{family.name}.", field=f"{field}.{name}",
                                fix=f"Use parameter names from {', '.join(names)}.")
            if attr in ("parameters", "fixed") and not abs(value) <= MAX_LITERAL:
                raise SpecError(f"{field}.{name} = {value!r} is not a usable number.",
                                field=f"{field}.{name}",
                                fix=f"Send a finite number of magnitude at most {MAX_LITERAL:g}.")
    fixed = given["fixed"]
    if len(fixed) == len(names):
        raise SpecError(f"Every parameter of {family.name} is fixed: nothing is left to fit.",
                        field="model.fixed", fix="Leave at least one parameter free.")
    for attr in ("parameters", "lower", "upper"):
        clash = next((n for n in given[attr] if n in fixed), None)
        if clash is not None:
            raise SpecError(f"{clash!r} is fixed, so it takes no start value or bound.",
                            field=f"model.{attr}.{clash}",
                            fix=f"Remove {clash} from model.{attr}, or from model.fixed.")
    for name, low in given["lower"].items():
        high = given["upper"].get(name, math.inf)
        if not low < high:
            raise SpecError(f"The lower bound of {name} ({low:g}) is not below its upper bound "
                            f"({high:g}).", field=f"model.lower.{name}",
                            fix=f"Give {name} a lower bound below its upper bound, or hold it "
                                "with model.fixed.")
    for name, value in given["parameters"].items():
        if not given["lower"].get(name, -math.inf) <= value <= given["upper"].get(name, math.inf):
            raise SpecError(f"The start value of {name} ({value:g}) is outside its bounds.",
                            field=f"model.parameters.{name}",
                            fix=f"Move the start value of {name} inside its bounds.")
    scale_of(family, model)


def scale_of(family: Builtin, model: ModelSpec) -> str:
    """The x scale asked for (the family's default when none is given)."""
    if model.scale is None:
        return family.scales[0]
    if len(family.scales) == 1 or model.scale not in family.scales:
        fix = (f"Use one of {', '.join(family.scales)}." if len(family.scales) > 1
               else f"Leave model.scale out: {family.name} has one x scale.")
        raise SpecError(f"{family.name} has no scale {model.scale!r}.", field="model.scale",
                        fix=fix)
    return model.scale


@lru_cache(maxsize=256)
def equation(family_name: str, scale: str, fixed: tuple[tuple[str, float], ...]):
    """The family's equation on ``scale`` with the ``fixed`` values written in, compiled
    in the free parameters (cached: a pipeline fits the same curve many times)."""
    family = BUILTINS[family_name]
    text = family.equations[scale]
    held = dict(fixed)
    for name, value in held.items():
        text = re.sub(rf"\b{name}\b", f"({float(value)!r})", text)  # finite: check_spec
    return compile_model(text, tuple(n for n in family.names if n not in held))
