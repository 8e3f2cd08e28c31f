"""Fast JSON in and out (orjson). NaN and Infinity are never emitted: they become null."""

from __future__ import annotations

import orjson
from flask.json.provider import JSONProvider

DUMP_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


def dumps_bytes(obj) -> bytes:
    """Serialize ``obj`` to JSON bytes; numpy arrays and scalars are accepted, NaN -> null."""
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
        return self._app.response_class(dumps_bytes(obj), mimetype="application/json")
