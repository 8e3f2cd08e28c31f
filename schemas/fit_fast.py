"""A fast loader for the common /v1/fit body; anything unusual is left to the schema.

:class:`schemas.fit.FitRequestSchema` (marshmallow) costs about a tenth of a small fit
request: a field object per value, validators, hooks. Most bodies have one plain shape
(x, y, optional weights, a polynomial model object or another family's, a grid, level,
include, missing, weighting), so :func:`load_fit_body` reads that shape directly and
returns exactly what ``FitRequestSchema().load(data)`` returns (same dicts, same key
order, same float64 arrays).

It never answers an error itself: at the first thing it does not recognise or that is not
valid (an unknown or misplaced field, a wrong type, a value out of range, a null where the
policy refuses it, inconsistent lengths, a candidates list...) it returns ``None`` and the
caller loads the body with the schema, whose error messages are the contract. A model
object of a family other than polynomial is loaded by that family's own schema, as the
schema's ``model`` field does. ``tests/api/test_fast_loader.py`` checks the equivalence on
generated bodies, valid and invalid.
"""

from __future__ import annotations

import math

import numpy as np
from marshmallow import ValidationError

from schemas.common import (
    GRID_SPACINGS,
    MISSING_POLICIES,
    SECTIONS,
    SELECT_METHODS,
    TRANSFORMS,
    WEIGHTINGS,
)
from schemas.fields import MAX_JSON_INTEGER
from schemas.model_field import MODEL_SCHEMAS, _loader

_TOP = frozenset(("x", "y", "weights", "model", "grid", "level", "missing", "weighting",
                  "include"))
_MODEL = frozenset(("family", "degree", "max_degree", "min_degree", "select", "alpha",
                    "intercept", "transform_x", "transform_y"))
_GRID = frozenset(("count", "start", "stop", "step", "x", "spacing"))
_SECTIONS = frozenset(SECTIONS)
_SELECT = frozenset(SELECT_METHODS)
_TRANSFORMS = frozenset(TRANSFORMS)
_SPACINGS = frozenset(GRID_SPACINGS)
_MISSING = frozenset(MISSING_POLICIES)
_WEIGHTINGS = frozenset(WEIGHTINGS)
_NUMBERS = frozenset((float, int))
_NUMBERS_OR_NULL = frozenset((float, int, type(None)))


class Declined(Exception):
    """The body is not the plain valid shape: the schema must load it (and say why)."""


def load_fit_body(data) -> dict | None:
    """What ``FitRequestSchema().load(data)`` returns for a plain valid body, else None."""
    if type(data) is not dict or not data.keys() <= _TOP:
        return None
    try:
        return _load(data)
    except Declined:
        return None


def _load(data: dict) -> dict:
    missing = _choice(data.get("missing", "error"), _MISSING)
    nulls = missing == "drop"
    x = _numbers(data.get("x"), nulls)
    y = _numbers(data.get("y"), nulls)
    weights = data.get("weights")
    if weights is not None:
        weights = _numbers(weights, nulls)
    n = len(x)
    if len(y) != n or (weights is not None and len(weights) != n):
        raise Declined
    level = _probability(data.get("level", 0.95))
    weighting = _choice(data.get("weighting", "relative"), _WEIGHTINGS)
    model = _model(data["model"]) if "model" in data else _polynomial({})
    grid = _grid(data["grid"]) if "grid" in data else _grid({})
    include = data.get("include")
    if include is None:
        if "include" in data:
            raise Declined
        include = list(SECTIONS)
    else:
        if type(include) is not list:
            raise Declined
        for name in include:
            if type(name) is not str or name not in _SECTIONS:
                raise Declined
        include = list(include)
    return {"x": x, "y": y, "weights": weights, "model": model, "grid": grid, "level": level,
            "missing": missing, "weighting": weighting, "include": include}


def _numbers(values, nulls: bool) -> np.ndarray:
    """A non-empty JSON array of numbers (null -> NaN when ``nulls``) as float64."""
    if type(values) is not list or not values:
        raise Declined
    kinds = set(map(type, values))
    if not kinds <= (_NUMBERS_OR_NULL if nulls else _NUMBERS):
        raise Declined
    try:
        array = np.array(values, dtype=np.float64)
    except (OverflowError, TypeError, ValueError):
        raise Declined from None
    if int in kinds and not np.isfinite(array[~np.isnan(array)] if nulls else array).all():
        raise Declined
    return array


def _choice(value, allowed: frozenset) -> str:
    if type(value) is not str or value not in allowed:
        raise Declined
    return value


def _float(value) -> float:
    """A finite JSON number as float (a StrictFloat); whole numbers within 2^53 only."""
    kind = type(value)
    if kind is float:
        if not math.isfinite(value):
            raise Declined
        return value
    if kind is int and abs(value) <= MAX_JSON_INTEGER:
        return float(value)
    raise Declined


def _probability(value) -> float:
    number = _float(value)
    if not 0.0 < number < 1.0:
        raise Declined
    return number


def _integer(value, minimum: int) -> int:
    """A JSON integer (or an integral float, as StrictInteger) at least ``minimum``."""
    kind = type(value)
    if kind is float and math.isfinite(value) and value.is_integer():
        value = int(value)
    elif kind is not int:
        raise Declined
    if abs(value) > MAX_JSON_INTEGER or value < minimum:
        raise Declined
    return value


def _model(value) -> dict:
    if type(value) is not dict or "candidates" in value:
        raise Declined
    family = value.get("family", "polynomial")
    if family == "polynomial":
        return _polynomial(value)
    schema = MODEL_SCHEMAS.get(family) if type(family) is str else None
    if schema is None:
        raise Declined
    try:  # what the schema's model field does for a family's model object
        return _loader(schema).load(value)
    except ValidationError:
        raise Declined from None


def _polynomial(value: dict) -> dict:
    """The polynomial model object, as ModelSchema loads it (defaults filled in)."""
    if not value.keys() <= _MODEL:
        raise Declined
    degree = value.get("degree")
    if degree is not None:
        degree = _integer(degree, 0)
    top = value.get("max_degree")
    if top is not None:
        top = _integer(top, 1)
    low = _integer(value.get("min_degree", 1), 0)
    select = value.get("select")
    if select is not None:
        select = _choice(select, _SELECT)
    alpha = _probability(value.get("alpha", 0.05))
    intercept = value.get("intercept", True)
    if type(intercept) is not bool:
        raise Declined
    transform_x = _choice(value.get("transform_x", "none"), _TRANSFORMS)
    transform_y = _choice(value.get("transform_y", "none"), _TRANSFORMS)
    if degree is not None and (top is not None or select is not None or "min_degree" in value):
        raise Declined
    if top is not None and low > top:
        raise Declined
    if degree is None:
        if top is None:
            top = max(3, low)
        if select is None:
            select = "sequential_f"
    else:
        select = "sequential_f"
    return {"family": "polynomial", "degree": degree, "max_degree": top, "min_degree": low,
            "select": select, "alpha": alpha, "intercept": intercept,
            "transform_x": transform_x, "transform_y": transform_y}


def _grid(value) -> dict | None:
    """The grid object, as GridSchema loads it (None: no grid)."""
    if value is None:
        return None
    if type(value) is not dict or not value.keys() <= _GRID:
        raise Declined
    if "x" in value:
        if len(value) != 1:
            raise Declined
        return {"count": None, "start": None, "stop": None, "step": None,
                "x": _numbers(value["x"], False), "spacing": None}
    spacing = _choice(value["spacing"], _SPACINGS) if "spacing" in value else None
    if spacing == "log" and "step" in value:
        raise Declined
    count = value.get("count")
    if count is not None:
        count = _integer(count, 2)
    elif "count" in value:
        raise Declined
    has_start, has_stop = "start" in value, "stop" in value
    if has_start != has_stop:
        raise Declined
    start = stop = step = None
    if has_start:
        start, stop = _float(value["start"]), _float(value["stop"])
        if not stop > start:
            raise Declined
    if "step" in value:
        step = _float(value["step"])
        if not has_start or count is not None or not step > 0:
            raise Declined
    elif count is None:
        count = 200
    return {"count": count, "start": start, "stop": stop, "step": step, "x": None,
            "spacing": spacing}
