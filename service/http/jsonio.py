"""Fast JSON in and out (orjson). NaN and Infinity are never emitted: they become null."""

from __future__ import annotations

import orjson
from flask.json.provider import JSONProvider

DUMP_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS
_STR_KEYS_OPTIONS = orjson.OPT_SERIALIZE_NUMPY  # the same bytes while every key is a str


def dumps_bytes(obj) -> bytes:
    """Serialize ``obj`` to JSON bytes; numpy arrays and scalars are accepted, NaN -> null.

    Tried first without ``OPT_NON_STR_KEYS`` (which slows every dict a little: 4% of a /v1/fit
    answer); a key that is not a str makes orjson refuse, and the call is made again with it.
    """
    try:
        return orjson.dumps(obj, default=_default, option=_STR_KEYS_OPTIONS)
    except orjson.JSONEncodeError:
        pass  # outside the handler: an error of the second call is not chained to the first
    return orjson.dumps(obj, default=_default, option=DUMP_OPTIONS)


def _default(obj):
    if isinstance(obj, (set, frozenset, tuple)):
        return list(obj)
    if hasattr(obj, "item"):  # numpy scalar types orjson does not cover
        return obj.item()
    raise TypeError(f"not JSON serializable: {type(obj).__name__}")


class OrjsonProvider(JSONProvider):
    """Flask JSON provider backed by orjson."""

    def dumps(self, obj, **kwargs) -> str:
        return dumps_bytes(obj).decode()

    def loads(self, s, **kwargs):
        return orjson.loads(s)

    def response(self, *args, **kwargs):
        obj = self._prepare_response_obj(args, kwargs)
        # content_type, not mimetype: the same header without werkzeug's charset rule lookup
        return self._app.response_class(dumps_bytes(obj), content_type="application/json")
