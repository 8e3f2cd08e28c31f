"""Plain forms of every result: ``to_dict()`` / ``to_json()`` / ``from_dict()``, short reprs.

``to_dict()`` gives plain JSON data (dicts, lists, numbers, strings, ``None``) that
``json.dumps`` takes as it is. A top-level result (one that keeps ``raw``) gives the
service's answer exactly as it was sent, members added later included, so
``FitResult.from_dict(fit.to_dict()) == fit``; a nested one (a row, a section) gives its
fields by their wire names. Reprs stay short: long arrays, large mappings and image bytes
are shown by their size, fields that are ``None`` or empty are left out.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import fields
from typing import Any

from curvewise_client.errors import InputError
from curvewise_client.results.base import build, thaw

_MAX_ITEMS = 6
_MAX_TEXT = 60
_SCALARS = (int, float, str, bool, type(None))


class Result:
    """Behaviour shared by every result class (a mixin for frozen slotted dataclasses)."""

    __slots__ = ()

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON data: the answer as sent (top-level results) or the fields by wire name."""
        raw = getattr(self, "raw", None)
        if raw:
            return thaw(raw)
        return {f.name: plain(getattr(self, f.name)) for f in fields(self) if f.name != "raw"}

    def to_json(self, **dumps_options: Any) -> str:
        """``to_dict()`` as strict JSON text (``json.dumps`` options pass through)."""
        return json.dumps(self.to_dict(), allow_nan=False, **dumps_options)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> Any:
        """Rebuild from ``to_dict()`` output (or from the service's decoded answer)."""
        if not isinstance(data, Mapping):
            raise InputError(f"{cls.__name__}.from_dict needs a mapping, "
                             f"not a {type(data).__name__}")
        return build(cls, data)

    @classmethod
    def from_json(cls, text: str | bytes) -> Any:
        """Rebuild from ``to_json()`` output."""
        try:
            data = json.loads(text)
        except ValueError as exc:
            raise InputError(f"{cls.__name__}.from_json: not JSON: {exc}") from None
        return cls.from_dict(data)

    def __repr__(self) -> str:
        return brief(self)


def plain(value: Any) -> Any:
    """Plain JSON data from a field value (results, read-only mappings, tuples)."""
    if isinstance(value, Result):
        return value.to_dict()
    if isinstance(value, Mapping):
        return {k: plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    return value


def brief(result: Any, depth: int = 0) -> str:
    """A one-line repr: nested results two levels deep, big containers by their size."""
    parts = []
    for f in fields(result):
        value = getattr(result, f.name)
        if f.name == "raw" or value is None or (isinstance(value, (tuple, Mapping, bytes))
                                                and not value):
            continue
        parts.append(f"{f.name}={_brief_value(value, depth + 1)}")
    if depth >= 1 and len(parts) > 5:
        parts = [*parts[:5], "..."]
    return f"{type(result).__name__}({', '.join(parts)})"


def _brief_value(value: Any, depth: int) -> str:
    if isinstance(value, Result):
        return brief(value, depth) if depth < 2 else f"{type(value).__name__}(...)"
    if isinstance(value, bytes):
        return f"<{len(value):,} bytes>"
    if isinstance(value, str):
        return repr(value if len(value) <= _MAX_TEXT else value[:_MAX_TEXT - 3] + "...")
    if isinstance(value, (tuple, list)):
        if len(value) <= _MAX_ITEMS and all(isinstance(v, _SCALARS) for v in value):
            return "(" + ", ".join(_brief_value(v, depth) for v in value) + \
                ("," if len(value) == 1 else "") + ")"
        kinds = {type(v).__name__ for v in value}
        kind = kinds.pop() if len(kinds) == 1 and isinstance(value[0], Result) else "items"
        return f"<{len(value)} {kind}>"
    if isinstance(value, Mapping):
        if len(value) <= 4 and all(isinstance(v, _SCALARS) for v in value.values()):
            return "{" + ", ".join(f"{k!r}: {_brief_value(v, depth)}"
                                   for k, v in value.items()) + "}"
        return f"{{<{len(value)} keys>}}"
    return repr(value)
