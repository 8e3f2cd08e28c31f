"""Building frozen results from decoded JSON: freeze/thaw and the tolerant builder."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import MISSING, fields
from types import MappingProxyType
from typing import Any

from curvewise_client.errors import ProtocolError


class FrozenDict(dict):
    """A read-only ``dict``: ``json.dumps`` and pandas take it as it is; changing it raises.

    Decoded JSON objects inside results are ``FrozenDict`` and arrays are tuples, so a
    result cannot be changed after it is built and still serializes with ``json.dumps``.
    ``dict(value)`` (or :func:`thaw` for a deep copy) gives an ordinary, editable dict.
    """

    __slots__ = ()

    def _read_only(self, *args: Any, **kwargs: Any) -> Any:
        raise TypeError("results are read-only: copy with dict(value) or thaw(value) to edit")

    __setitem__ = __delitem__ = __ior__ = _read_only
    clear = pop = popitem = setdefault = update = _read_only

    def __reduce__(self) -> tuple:  # pickle and copy rebuild it whole, never item by item
        return (FrozenDict, (dict(self),))

    def __copy__(self) -> FrozenDict:
        return self

    def __deepcopy__(self, memo: dict) -> FrozenDict:
        return self


EMPTY: Mapping[str, Any] = FrozenDict()


def empty_mapping() -> Mapping[str, Any]:
    """The shared empty read-only mapping (a dataclass default factory)."""
    return EMPTY


_CONTAINERS = (dict, list, tuple, MappingProxyType)


def freeze(value: Any) -> Any:
    """Deep read-only copy of decoded JSON (dict -> :class:`FrozenDict`, list -> tuple).

    Already-frozen mappings are returned as they are; arrays of plain values
    (the common case: numbers) become tuples without visiting each element twice.
    """
    if type(value) is FrozenDict:
        return value
    if isinstance(value, Mapping):
        return FrozenDict({k: freeze(v) if isinstance(v, _CONTAINERS) else v
                           for k, v in value.items()})
    if isinstance(value, (list, tuple)):
        if any(isinstance(v, _CONTAINERS) for v in value):
            return tuple(freeze(v) for v in value)
        return tuple(value)
    return value


def thaw(value: Any) -> Any:
    """Plain JSON-ready copy of a frozen value (mapping -> dict, tuple -> list)."""
    if isinstance(value, Mapping):
        return {k: thaw(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [thaw(v) for v in value]
    return value


def rows(builder: Callable[[Any], Any]) -> Callable[[Any], tuple]:
    """Rows from a list of objects, or from an object of equal-length columns."""
    def convert(values: Any) -> tuple:
        if isinstance(values, Mapping):
            names = list(values)
            values = [dict(zip(names, row, strict=True))
                      for row in zip(*(values[k] for k in names), strict=True)]
        return tuple(builder(v) for v in values)
    return convert


def items(builder: Callable[[Any], Any]) -> Callable[[Any], tuple]:
    """A converter building a tuple with ``builder`` applied to each element."""
    return lambda values: tuple(builder(v) for v in values)


def build(cls: type, data: Mapping[str, Any] | None) -> Any:
    """Build ``cls`` from decoded JSON: known members by name, nested types converted.

    The JSON is deep-frozen once, at the top; nested results share its frozen parts.
    """
    if data is None:
        return None
    if not isinstance(data, Mapping):
        raise ProtocolError(f"{cls.__name__}: expected a JSON object, got {type(data).__name__}")
    data = freeze(data)
    converters = CONVERT.get(cls, {})
    kwargs: dict[str, Any] = {}
    for f in fields(cls):
        if f.name == "raw":
            kwargs["raw"] = data
            continue
        if f.name not in data:
            if f.default is MISSING and f.default_factory is MISSING:
                kwargs[f.name] = None
            continue
        value = data[f.name]
        convert = converters.get(f.name)
        kwargs[f.name] = convert(value) if (convert and value is not None) else value
    return cls(**kwargs)


def of(cls: type) -> Callable[[Any], Any]:
    """A converter building ``cls`` from one JSON object."""
    return lambda value: build(cls, value)


CONVERT: dict[type, dict[str, Callable[[Any], Any]]] = {}


def register(cls: type, **converters: Callable[[Any], Any]) -> None:
    """Declare how the nested members of ``cls`` are built (member name -> converter)."""
    CONVERT[cls] = converters
