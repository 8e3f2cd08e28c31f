"""The bulk numeric-array field: numpy speed, JSON strictness, first bad index reported."""

from __future__ import annotations

import numpy as np
import pytest
from marshmallow import Schema, ValidationError

from schemas.fields import NumberArray, StrictBoolean, StrictFloat, StrictInteger


class Values(Schema):
    v = NumberArray()
    nullable = NumberArray(allow_null_items=True)


def test_loads_numbers_into_float64_exactly():
    values = [0.1, 1, -2.5e-300, 1.7976931348623157e308, 2**53 + 1]
    out = Values().load({"v": values})["v"]
    assert out.dtype == np.float64
    assert out.tolist() == [float(v) for v in values]


@pytest.mark.parametrize("bad, index, words", [
    ([1.0, "2.0"], 1, "string"), ([True, 1.0], 0, "boolean"), ([1.0, 2.0, [3.0]], 2, "nested"),
    ([1.0, None], 1, "missing"), ([1.0, {}], 1, "object"),
])
def test_reports_the_first_bad_element(bad, index, words):
    with pytest.raises(ValidationError) as info:
        Values().load({"v": bad})
    messages = info.value.messages["v"]
    assert list(messages) == [index] and words in messages[index][0]


def test_null_items_become_nan_when_allowed():
    out = Values().load({"nullable": [1.0, None, 3.0]})["nullable"]
    assert np.isnan(out[1]) and out[2] == 3.0


def test_big_arrays_load_in_bulk():
    values = np.random.default_rng(0).normal(size=200_000).tolist()
    assert np.array_equal(Values().load({"v": values})["v"], np.array(values))


@pytest.mark.parametrize("field, good, bad", [
    (StrictFloat(), [1, 0.5], ["0.5", True, float("nan"), float("inf")]),
    (StrictInteger(), [3, 3.0], [3.5, "3", True]),
    (StrictBoolean(), [True, False], [1, 0, "true"]),
])
def test_strict_scalars(field, good, bad):
    for value in good:
        field.deserialize(value)
    for value in bad:
        with pytest.raises(ValidationError):
            field.deserialize(value)
