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
from collections.abc import Mapping
from typing import Any

import numpy as np

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
    return _CANONICAL.encode(payload).encode("ascii")


_CANONICAL = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=True,
                              allow_nan=False)


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
    array = np.asarray(values, dtype=float).ravel() + 0.0  # + 0.0 turns -0.0 into 0.0
    return _with_none(array)


def to_matrix(values) -> list:
    """A list of rows of :func:`to_float` values (at least 2-D)."""
    array = np.atleast_2d(np.asarray(values, dtype=float))
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
