"""The document writers' number helpers and the writer's checksum shortcut.

``to_vector``/``to_matrix`` are vectorised; each must equal the element-wise definition
(``float(v) + 0.0``, ``None`` for NaN and infinities: the documented canonical form), and a
writer's ``checksum(body, written=True)`` must equal the general checksum of the same body.
"""

from __future__ import annotations

import math

import numpy as np

from service.core import ModelSpec, fit_series
from service.core.models.canonical import checksum, to_matrix, to_vector
from service.core.models.document import to_document


def _element(value):
    value = float(value) + 0.0
    return value if math.isfinite(value) else None


def _same(got, want) -> bool:  # repr tells -0.0 from 0.0 and keeps every digit
    return repr(got) == repr(want)


def test_vector_and_matrix_writers_match_the_element_wise_definition():
    rng = np.random.default_rng(20261205)
    special = np.array([-0.0, 0.0, np.nan, np.inf, -np.inf, 5e-324, -1e308, 1e-17])
    for _ in range(50):
        values = rng.normal(size=rng.integers(1, 8)) * 10.0 ** rng.integers(-20, 20)
        values[rng.random(values.size) < 0.3] = rng.choice(special)
        assert _same(to_vector(values), [_element(v) for v in values])
        square = np.resize(values, (values.size, values.size))
        assert _same(to_matrix(square), [[_element(v) for v in row] for row in square])
    assert _same(to_matrix(2.5), [[2.5]]) and _same(to_vector([[1, -0.0]]), [1.0, 0.0])


def test_the_writers_checksum_equals_the_general_one():
    # x symmetric about 0: the centring shift and odd-power terms come out as (negative) zeros
    x = np.linspace(-2.0, 2.0, 9)
    for y in (x**2, 1.0 + 0.5 * x - 0.25 * x**3, np.cos(x)):
        doc = to_document(fit_series(x, y, model=ModelSpec(degree=3)).model)
        assert doc["checksum"] == checksum(doc)
