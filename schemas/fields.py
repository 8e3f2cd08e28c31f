"""Strict fields for the wire contract, and the fast bulk numeric-array field.

JSON has one number type and ``true``/``false``/strings/``null`` besides;
marshmallow's stock fields coerce freely (``"1.5"`` -> 1.5, ``true`` -> 1).
These fields do not: a number must be a JSON number, a flag a JSON boolean.
Every message ends with what to do about it.

:class:`NumberArray` validates a whole list at once with numpy (about 40 ns a
value instead of ~1.3 us for ``List(Float)``) and reports the first bad
element by index, so the error path reads ``y[17]``.
"""

from __future__ import annotations

import math

import numpy as np
from marshmallow import ValidationError, fields, validate

_NUMBER_TYPES = (float, int)
# Whole numbers beyond 2^53 - 1 are not exchanged exactly by every JSON implementation
# (RFC 8259 section 6, I-JSON RFC 7493); no count or option of this service needs more.
MAX_JSON_INTEGER = 2**53 - 1
TOO_LARGE_INTEGER = (f"Too large: whole numbers must lie within -{MAX_JSON_INTEGER} .. "
                     f"{MAX_JSON_INTEGER} (2^53 - 1). Send a smaller number.")


REQUIRED_MESSAGE = "Missing required field. Add it; see /docs for its meaning."
NULL_MESSAGE = "May not be null. Send a value, or leave the field out for its default."


INDEX_LIST_CAP = 10  # offending indices named in one message; the rest are counted


class CodedMessage(str):
    """A validation message that names its problem code (e.g. ``invalid_data``).

    The service answers with that code instead of ``validation_error`` when every
    message of the answer carries the same one.
    """

    code: str

    def __new__(cls, text: str, code: str):
        message = super().__new__(cls, text)
        message.code = code
        return message


def coded(messages, code: str):
    """The same (nested) messages, each a :class:`CodedMessage` with ``code``."""
    if isinstance(messages, dict):
        return {key: coded(value, code) for key, value in messages.items()}
    if isinstance(messages, list):
        return [coded(value, code) for value in messages]
    return CodedMessage(str(messages), code)


def index_list(indices, cap: int = INDEX_LIST_CAP) -> str:
    """``"3, 7, 12 and 40 more"``: the first ``cap`` indices, then how many are left."""
    indices = [int(i) for i in indices]
    shown = ", ".join(map(str, indices[:cap]))
    rest = len(indices) - cap
    return f"{shown} and {rest} more" if rest > 0 else shown


def also_at(indices) -> str:
    """A sentence naming the further offending indices after the first (empty if none)."""
    more = list(indices)[1:]
    if not more:
        return ""
    return f" The same goes for {'index' if len(more) == 1 else 'indices'} {index_list(more)}."


def _messages(**extra: str) -> dict:
    base = {"required": REQUIRED_MESSAGE, "null": NULL_MESSAGE}
    base.update(extra)
    return base


class StrictFloat(fields.Float):
    """A finite JSON number (integers allowed); never a string, boolean or NaN."""

    def __init__(self, **kwargs):
        kwargs.setdefault("error_messages", _messages(
            invalid="Not a number. Send a JSON number such as 0.05 (not a string or boolean).",
            special="Must be finite. NaN and Infinity are not JSON numbers.",
        ))
        kwargs.setdefault("allow_nan", False)
        super().__init__(**kwargs)

    def _validated(self, value):
        if isinstance(value, bool) or not isinstance(value, _NUMBER_TYPES):
            raise self.make_error("invalid")
        number = float(value)
        if not math.isfinite(number):
            raise self.make_error("special")
        return number


class StrictInteger(fields.Integer):
    """A JSON integer; never a float with a fraction, a string or a boolean."""

    def __init__(self, **kwargs):
        kwargs.setdefault("error_messages", _messages(
            invalid="Not an integer. Send a whole JSON number such as 3.",
            too_large=TOO_LARGE_INTEGER,
        ))
        kwargs.setdefault("strict", True)
        super().__init__(**kwargs)

    def _validated(self, value):
        if isinstance(value, bool) or not isinstance(value, _NUMBER_TYPES) or (
                isinstance(value, float) and not (math.isfinite(value) and value.is_integer())):
            raise self.make_error("invalid")
        if abs(value) > MAX_JSON_INTEGER:
            raise self.make_error("too_large")
        return int(value)


class StrictBoolean(fields.Boolean):
    """A JSON ``true`` or ``false``; never 0/1 or a string."""

    def __init__(self, **kwargs):
        kwargs.setdefault("error_messages", _messages(
            invalid="Not a boolean. Send true or false (JSON literals, unquoted).",
        ))
        super().__init__(**kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, bool):
            raise self.make_error("invalid")
        return value


class StrictString(fields.String):
    """A JSON string (fix-bearing messages)."""

    def __init__(self, **kwargs):
        kwargs.setdefault("error_messages", _messages(
            invalid="Not a string. Send a JSON string.",
        ))
        super().__init__(**kwargs)


def one_of_message(choices) -> str:
    """Message for a value outside a fixed vocabulary, listing the choices."""
    return "Must be one of: " + ", ".join(f"{c!r}" for c in choices) + "."


class PassThroughArray(fields.Field):
    """A JSON array handed on unchanged: its items are checked later, one by one or in bulk.

    (A ``List(Raw())`` would call a field per item for nothing: ~7 us per item.)
    """

    default_error_messages = _messages(invalid="Must be an array.")

    def __init__(self, **kwargs):
        metadata = {"type": "array", **(kwargs.pop("metadata", None) or {})}
        super().__init__(metadata=metadata, **kwargs)

    def _deserialize(self, value, attr, data, **kwargs) -> list:
        if not isinstance(value, list):
            raise self.make_error("invalid")
        return value


class NumberArray(fields.Field):
    """A list of JSON numbers, loaded into a float64 numpy array in one pass.

    Parameters
    ----------
    allow_null_items : bool
        ``null`` elements become NaN (the schema decides later whether a
        missing value is allowed, from the ``missing`` policy). Otherwise a
        ``null`` element is an error.
    min_items : int
        Fewest elements (default 1: empty arrays are refused).
    max_items : int or None
        A hard ceiling (the service also applies its configured limit).
    nullable_items_doc : bool
        Document items as ``number | null`` (for responses, where undefined
        values are ``null``).
    data : bool
        The array is data (x, y, weights): an empty one is ``invalid_data``
        (a :class:`CodedMessage`), as the core says of empty arrays; its message is
        ``error_messages["data_empty"]`` when given.

    Errors are keyed by the first bad element: ``{17: ["..."]}`` under the field,
    which the service reports as the path ``y[17]``; the message names every other
    bad element (up to :data:`INDEX_LIST_CAP`, then a count).
    """

    default_error_messages = _messages(
        invalid="Must be an array of numbers, e.g. [0.5, 1.0, 1.5].",
        too_few="Must have at least {min} element(s); got {n}.",
        too_many="Must have at most {max} elements; got {n}. Split the data.",
        item_type="Not a number: got {kind}. Send a JSON number.",
        item_null="null is a missing value. Remove the point, or set \"missing\": \"drop\".",
        item_range="Number too large for a 64-bit float. Rescale the data.",
    )

    def __init__(self, *, allow_null_items: bool = False, min_items: int = 1,
                 max_items: int | None = None, nullable_items_doc: bool | None = None,
                 data: bool = False, **kwargs):
        self.allow_null_items = allow_null_items
        self.data = data
        self.min_items = min_items
        self.max_items = max_items
        nullable = allow_null_items if nullable_items_doc is None else nullable_items_doc
        item = {"type": ["number", "null"]} if nullable else {"type": "number"}
        metadata = {"type": "array", "items": item, "minItems": min_items}
        if max_items is not None:
            metadata["maxItems"] = max_items
        metadata.update(kwargs.pop("metadata", {}) or {})
        super().__init__(metadata=metadata, **kwargs)

    def _serialize(self, value, attr, obj, **kwargs):
        if value is None:
            return None
        return value  # numpy arrays and lists go straight to orjson (NaN -> null)

    def _deserialize(self, value, attr, data, **kwargs) -> np.ndarray:
        if not isinstance(value, list):
            raise self.make_error("invalid")
        n = len(value)
        if n < self.min_items:
            if self.data and n == 0:
                raise ValidationError(CodedMessage(self.error_messages.get(
                    "data_empty", "Empty array: send at least one value (as many as the model "
                    "has coefficients, and more to judge the fit)."), "invalid_data"))
            raise self.make_error("too_few", min=self.min_items, n=n)
        if self.max_items is not None and n > self.max_items:
            raise self.make_error("too_many", max=self.max_items, n=n)
        kinds = set(map(type, value))
        if not kinds <= {float, int}:
            allowed = {float, int, type(None)} if self.allow_null_items else {float, int}
            if not kinds <= allowed:
                self._raise_first_bad(value, allowed)
        try:
            array = np.array(value, dtype=np.float64)
        except OverflowError:  # an integer beyond the float range
            self._raise_first_bad(value, None)
        if kinds <= {float, int}:
            # orjson refuses NaN/Infinity and out-of-range floats; huge ints can still overflow
            if int in kinds and not np.isfinite(array).all():
                bad = np.flatnonzero(~np.isfinite(array))
                raise ValidationError({int(bad[0]): [self._out_of_range(also_at(bad))]})
        return array

    def _raise_first_bad(self, value, allowed):
        """Raise for the first bad element, naming every other bad one in its message."""
        bad = [index for index, item in enumerate(value) if self._bad(item, allowed)]
        if not bad:  # pragma: no cover - a bad element always exists
            raise self.make_error("invalid")
        item = value[bad[0]]
        if type(item) in _NUMBER_TYPES:
            raise ValidationError({bad[0]: [self._out_of_range(also_at(bad))]})
        if item is None:
            message = self.error_messages["item_null"]
        else:
            message = self.error_messages["item_type"].format(kind=_json_kind(item))
        raise ValidationError({bad[0]: [message + also_at(bad)]})

    def _out_of_range(self, more: str) -> str:
        """A number beyond float64: in a data array, ``invalid_data`` (a non-finite value)."""
        message = self.error_messages["item_range"] + more
        return CodedMessage(message, "invalid_data") if self.data else message

    @staticmethod
    def _bad(item, allowed) -> bool:
        kind = type(item)
        if allowed is not None and kind in allowed:
            return False
        if kind in _NUMBER_TYPES:
            try:
                return not math.isfinite(float(item))
            except OverflowError:
                return True
        return True


def _json_kind(item) -> str:
    if isinstance(item, bool):
        return "a boolean"
    if isinstance(item, str):
        return "a string"
    if isinstance(item, list):
        return "a nested array"
    if isinstance(item, dict):
        return "an object"
    return type(item).__name__


def choice(choices, description: str, **kwargs) -> StrictString:
    """A string from a fixed vocabulary, documented as an enum."""
    return StrictString(validate=validate.OneOf(choices, error=one_of_message(choices)),
                        metadata={"description": description, "enum": list(choices)}, **kwargs)
