"""Canonical form and checksum of the fitted-model document, and the writers' number helpers.

The checksum is ``"sha256:" + hex`` over the *canonical form*: every field
except ``checksum``, serialized as JSON with sorted keys, no whitespace, ASCII
only, floats in Python ``repr`` (shortest digits that round-trip exactly),
undefined numbers as ``null`` and negative zero as ``0.0``. See
:mod:`service.core.models.document` and ``docs/fitted-model.md``.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
from collections.abc import Mapping
from typing import Any

import numpy as np
import orjson

CHECKSUM_PREFIX = "sha256:"


def checksum(body: Mapping[str, Any], *, written: bool = False) -> str:
    """The ``sha256:<hex>`` checksum of a document's canonical form (``checksum`` excluded).

    ``written=True``: every float of ``body`` came from :func:`to_float`, :func:`to_vector`
    or :func:`to_matrix` (a writer's own body), so negative zeros are gone already.
    """
    return CHECKSUM_PREFIX + hashlib.sha256(canonical_bytes(body, written=written)).hexdigest()


def canonical_bytes(body: Mapping[str, Any], *, written: bool = False) -> bytes:
    """Canonical JSON of every field but ``checksum``: sorted keys, no spaces, float repr.

    Negative zero is written as ``0.0`` (many JSON tools drop the sign of zero).
    """
    if written:
        payload = {key: value for key, value in body.items() if key != "checksum"}
    else:
        payload = {key: _unsigned_zero(value) for key, value in body.items()
                   if key != "checksum"}
    return (_fast_canonical(payload, finite=written)
            or _CANONICAL.encode(payload).encode("ascii"))


_CANONICAL = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=True,
                              allow_nan=False)

# orjson writes the same bytes as _CANONICAL, several times faster, once two layouts of
# floats are put as repr writes them: compact JSON, keys sorted as Python sorts them (by code
# point), strings escaped alike once they are ASCII with nothing to escape, and every float
# with the same shortest round-trip digits as ``repr``, laid out alike but for (a) a one-digit
# negative exponent (orjson ``2.5e-9``, repr ``2.5e-09``) and (b) magnitudes in [1e-5, 1e-4)
# (orjson ``0.0000625``, repr ``6.25e-05``). Both are rewritten below (b as
# ``repr(float(token))``: the same double, as orjson's digits round-trip); checked against repr
# on millions of doubles (tests/models/test_canonical_fast.py). Everything else goes to the
# standard encoder: a non-ASCII or escaped string, a string holding ``e-`` or ``0.0000``, a
# value orjson refuses, and NaN or infinity (orjson writes null; the definition refuses them).
_SHORT_EXPONENT = re.compile(rb"e-(?=\d(?!\d))")  # a literal replacement: no template
_SMALL_DECIMAL = re.compile(rb"0\.0000\d*")
_DIGITS = frozenset(b"0123456789.")
_FAST_OPTIONS = (orjson.OPT_SORT_KEYS | orjson.OPT_PASSTHROUGH_DATACLASS
                 | orjson.OPT_PASSTHROUGH_DATETIME | orjson.OPT_PASSTHROUGH_SUBCLASS)


def _fast_canonical(payload: dict, finite: bool) -> bytes | None:
    """The canonical bytes by orjson (see above), or None: the standard encoder decides.

    ``finite``: the payload holds no NaN or infinity (a writer's, whose floats went through
    :func:`to_float`), so a ``null`` in the text is a None; otherwise a null goes the slow way.
    """
    try:
        text = orjson.dumps(payload, default=_refuse, option=_FAST_OPTIONS)
    except orjson.JSONEncodeError:
        return None
    if not text.isascii() or b"\\" in text or (not finite and b"null" in text):
        return None
    exponents, decimals = b"e-" in text, b"0.0000" in text
    if exponents or decimals:
        strings = b"".join(text.split(b'"')[1::2])  # no escaped quote: odd parts are strings
        if b"e-" in strings or b"0.0000" in strings:
            return None
        if exponents:
            text = _SHORT_EXPONENT.sub(b"e-0", text)
        if decimals:
            text = _SMALL_DECIMAL.sub(_small_decimal, text)
    return text


def _small_decimal(match: re.Match) -> bytes:
    """repr's layout of a ``0.0000...`` token (left as it is inside a longer number)."""
    at = match.start()
    if at and match.string[at - 1] in _DIGITS:  # e.g. the 0.0000 of 10.00001
        return match.group()
    return repr(float(match.group())).encode("ascii")  # a minus sign before it stays


def _refuse(value):
    raise TypeError  # orjson then raises JSONEncodeError: the standard encoder decides


def to_float(value) -> float | None:
    """A finite float with the sign of zero dropped, or ``None`` for NaN/inf."""
    value = float(value) + 0.0  # + 0.0 turns -0.0 into 0.0
    return value if math.isfinite(value) else None


def _unsigned_zero(value):
    if isinstance(value, float):
        return value + 0.0
    if isinstance(value, list):  # floats inline: a document holds a few hundred of them
        return [item + 0.0 if type(item) is float else _unsigned_zero(item) for item in value]
    return value


def to_vector(values) -> list:
    """A flat list of :func:`to_float` values."""
    array = np.asarray(values, dtype=float).ravel()
    out = array.tolist()
    # a finite sum: every value finite (see _with_none); + 0.0 turns -0.0 into 0.0, the same
    # IEEE addition as numpy's, on the Python floats (half the cost of a ufunc call on a few)
    if math.isfinite(sum(out)):
        return [value + 0.0 for value in out]
    return _with_none(array + 0.0)


def to_matrix(values) -> list:
    """A list of rows of :func:`to_float` values (at least 2-D)."""
    array = np.asarray(values, dtype=float)
    if array.ndim != 2:  # a writer's matrices are 2-D already (atleast_2d: ~2 us a call)
        array = np.atleast_2d(array)
        if array.ndim > 2:  # each row flattened, as to_vector does
            array = array.reshape(array.shape[0], int(np.prod(array.shape[1:])))
    return _with_none(array + 0.0)  # + 0.0 turns -0.0 into 0.0


def _with_none(array: np.ndarray) -> list:
    """``array.tolist()`` (Python floats, nested for 2-D) with NaN and infinities as ``None``."""
    values = array.tolist()
    # a finite sum means every value is finite (NaN and infinities make it NaN or infinite); a
    # sum that overflows although every value is finite only takes the element-wise path
    if math.isfinite(sum(values) if array.ndim == 1 else sum(map(sum, values))):
        return values
    return [_with_none(row) if np.ndim(row) else (float(row) if np.isfinite(row) else None)
            for row in array]
