"""POST /v1/batch: one series, checked on its own.

The series are checked one by one with :func:`load_series` — the same bulk
numeric-array field as /v1/fit, but a bad series becomes an error *result* for
that series alone, never a failure of the whole batch. :func:`load_plain_series`
checks the common bulk case (every series plain ``{id?, x, y}``) all at once.
"""

from __future__ import annotations

from itertools import chain

import numpy as np
from marshmallow import ValidationError, fields

from schemas.common import UNKNOWN_FIELD, StrictSchema
from schemas.fields import NumberArray
from schemas.model_field import BATCH_COMPARISON, ModelField, misplaced_model_options

SERIES_FIELDS = ("id", "x", "y", "weights", "model")
_X = NumberArray(allow_null_items=True, data=True)
_Y = NumberArray(allow_null_items=True, data=True)
_W = NumberArray(allow_null_items=True, allow_none=True, data=True)
_MODEL_FIELD = ModelField(comparisons=False, refusal=BATCH_COMPARISON)


class SeriesSchema(StrictSchema):
    """One series of a batch (documentation; loaded by :func:`load_series`)."""

    id = fields.Raw(metadata={"description": "Your identifier (string or integer), echoed in "
                                            "the result. Default: the series' position.",
                              "type": ["string", "integer"]})
    x = NumberArray(required=True, allow_null_items=True,
                    metadata={"description": "Predictor values."})
    y = NumberArray(required=True, allow_null_items=True,
                    metadata={"description": "Response values, same length as x."})
    weights = NumberArray(allow_none=True, allow_null_items=True, metadata={
        "description": "Optional inverse variances (1/sd^2), same length as x."})
    model = ModelField(comparisons=False, refusal=BATCH_COMPARISON, metadata={
        "description": "This series' own model (any family /v1/fit accepts); overrides the "
                       "shared model."})


def valid_id(ident) -> bool:
    """A series id is a string or an integer (a JSON boolean is not)."""
    return not isinstance(ident, bool) and isinstance(ident, (str, int))


def load_series(obj, position: int):
    """Check one series object; return ``(id, x, y, weights, model_dict_or_None)``.

    Raises
    ------
    ValidationError
        With messages keyed by field path inside the series (``y[17]``, ``model.degree``).
    """
    if not isinstance(obj, dict):
        raise ValidationError({"_body": ["Each series must be a JSON object with x and y."]})
    unknown = [k for k in obj if k not in SERIES_FIELDS]
    if unknown:
        misplaced = misplaced_model_options(obj, SERIES_FIELDS)
        raise ValidationError({k: misplaced.get(k, [UNKNOWN_FIELD]) for k in unknown})
    ident = obj.get("id", position)
    if not valid_id(ident):
        if isinstance(ident, float) and ident.is_integer() and abs(ident) >= 2.0 ** 63:
            raise ValidationError({"id": ["An integer beyond 64 bits (read as a float): send "
                                          "this id as a string."]})
        raise ValidationError({"id": ["Must be a string or an integer."]})
    errors: dict = {}
    arrays = {}
    for name, field in (("x", _X), ("y", _Y), ("weights", _W)):
        if name not in obj:
            if name != "weights":
                errors[name] = ["Missing required field. Add it; see /docs for its meaning."]
            continue
        value = obj[name]
        try:
            if value is None:
                if name != "weights":
                    raise ValidationError(["May not be null. Send an array of numbers."])
                continue
            arrays[name] = field._deserialize(value, name, obj)  # the bulk check, no wrapper
        except ValidationError as exc:
            errors.update(_prefixed(name, exc.messages))
    model = None
    if obj.get("model") is not None:
        try:
            model = _MODEL_FIELD.deserialize(obj["model"])
        except ValidationError as exc:
            errors.update(_prefixed("model", exc.messages))
    if errors:
        raise ValidationError(errors)
    return ident, arrays["x"], arrays["y"], arrays.get("weights"), model


_PLAIN_FIELDS = frozenset(("id", "x", "y"))


def load_plain_series(series: list, max_points: int):
    """The common case in bulk: every series is ``{id?, x, y}`` with plain numbers.

    Returns ``(ids, x, y, lengths)`` with ``x`` and ``y`` flat float64 arrays, or
    None as soon as any series needs the per-series checks of :func:`load_series`
    (weights, a model, nulls, a wrong type or length, too many points): that path
    then gives each bad series its own error. The checks here are the same rules,
    applied to all series at once (the type of every element, in one pass).
    """
    ids, xs, ys = [], [], []
    for position, obj in enumerate(series):
        if type(obj) is not dict or not obj.keys() <= _PLAIN_FIELDS:
            return None
        x, y, ident = obj.get("x"), obj.get("y"), obj.get("id", position)
        if (type(x) is not list or type(y) is not list or len(x) != len(y)
                or not max(_X.min_items, 1) <= len(x) <= max_points
                or not valid_id(ident)):
            return None
        ids.append(ident)
        xs.append(x)
        ys.append(y)
    total = sum(map(len, xs))
    if not (set(map(type, chain.from_iterable(xs))) | set(map(type, chain.from_iterable(ys)))
            ) <= {float, int}:
        return None
    try:
        x = np.fromiter(chain.from_iterable(xs), dtype=np.float64, count=total)
        y = np.fromiter(chain.from_iterable(ys), dtype=np.float64, count=total)
    except OverflowError:        # an integer beyond the float range
        return None
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        return None
    return ids, x, y, np.fromiter(map(len, xs), dtype=np.int64, count=len(xs))


def _prefixed(name: str, messages) -> dict:
    if isinstance(messages, list):
        return {name: messages}
    out = {}
    for key, value in messages.items():
        path = f"{name}[{key}]" if isinstance(key, int) else f"{name}.{key}"
        if isinstance(value, dict):
            out.update(_prefixed(path, value))
        else:
            out[path] = list(value)
    return out
