"""The fast /v1/fit body loader (schemas/fit_fast.py) against the schema it stands in for.

For every body, valid or not, the fast loader either declines (None: the schema loads it and
answers any error) or returns exactly what ``FitRequestSchema().load`` returns: the same
dicts with the same key order, the same types, the same float64 array bytes (NaN where a
null was dropped). Bodies are drawn by Hypothesis (derandomized, bounded), mostly near the
valid shape with one or more awkward values (nulls, booleans, strings, huge integers, out of
range numbers, unknown or misplaced fields, other families' model objects, comparisons).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from marshmallow import ValidationError

from schemas.common import SECTIONS, SELECT_METHODS, TRANSFORMS
from schemas.fit import FitRequestSchema
from schemas.fit_fast import load_fit_body

SCHEMA = FitRequestSchema()


def same(a, b, path="body") -> None:
    """Assert a and b are equal in value, type and dict key order (arrays bit for bit)."""
    assert type(a) is type(b), f"{path}: {type(a).__name__} vs {type(b).__name__}"
    if isinstance(a, dict):
        assert list(a) == list(b), f"{path}: keys {list(a)} vs {list(b)}"
        for key in a:
            same(a[key], b[key], f"{path}.{key}")
    elif isinstance(a, list):
        assert len(a) == len(b), f"{path}: lengths {len(a)} vs {len(b)}"
        for i, (left, right) in enumerate(zip(a, b, strict=True)):
            same(left, right, f"{path}[{i}]")
    elif isinstance(a, np.ndarray):
        assert (a.dtype, a.shape) == (b.dtype, b.shape), path
        assert a.tobytes() == b.tobytes(), f"{path}: {a} vs {b}"
    else:
        assert a == b or (a != a and b != b), f"{path}: {a!r} vs {b!r}"


def schema_load(body):
    try:
        return SCHEMA.load(body)
    except ValidationError as error:
        return error


def check(body) -> bool:
    """The fast loader declines or agrees with the schema; True when it took the body."""
    fast = load_fit_body(body)
    if fast is None:
        return False
    slow = schema_load(body)
    assert not isinstance(slow, ValidationError), f"fast path took an invalid body: {slow}"
    same(fast, slow)
    return True


numbers = st.one_of(st.floats(-1e6, 1e6), st.integers(-1000, 1000),
                    st.sampled_from([0.0, -0.0, 1e308, -1e-308, 2**53 - 1, 2**53, 2**63 - 1]))
junk = st.one_of(st.none(), st.booleans(), st.text(max_size=3), st.just([1]), st.just({"a": 1}))
items = st.one_of(numbers, numbers, numbers, st.none(), junk)
arrays = st.lists(st.one_of(numbers, st.none()), min_size=0, max_size=6) | st.lists(
    items, max_size=4) | junk
small = st.one_of(st.integers(-1, 14), st.sampled_from([2.0, 2.5, 1e20, True, None, "3"]))
probability = st.one_of(st.floats(-0.5, 1.5), st.integers(-1, 2), junk)


def polynomial_models():
    return st.fixed_dictionaries({}, optional={
        "family": st.sampled_from(["polynomial", "spline", None, 3]),
        "degree": small, "max_degree": small, "min_degree": small,
        "select": st.sampled_from([*SELECT_METHODS, None, "best", 1]),
        "alpha": probability,
        "intercept": st.one_of(st.booleans(), st.sampled_from([None, 0, 1, "true"])),
        "transform_x": st.sampled_from([*TRANSFORMS, "exp", None]),
        "transform_y": st.sampled_from([*TRANSFORMS, "exp", None]),
        "colour": st.just("red")})


other_models = st.sampled_from([
    {"family": "exponential"}, {"family": "exponential", "fixed": {"y0": 0}},
    {"family": "exponential", "fixed": {"b": 0}}, {"family": "logistic4", "scale": "linear"},
    {"family": "expression", "expression": "a*x + b"}, {"family": "expression"},
    {"candidates": [{"degree": 1}, {"degree": 2}]}, {"candidates": []}])
grids = st.one_of(st.none(), junk, st.fixed_dictionaries({}, optional={
    "count": small, "start": st.one_of(numbers, junk), "stop": st.one_of(numbers, junk),
    "step": st.one_of(st.floats(-1, 5), junk), "x": arrays}))
includes = st.one_of(st.lists(st.sampled_from([*SECTIONS, "everything", 3, None]), max_size=4),
                     junk)


@st.composite
def bodies(draw):
    n = draw(st.integers(1, 6))
    x = draw(st.lists(numbers, min_size=n, max_size=n))
    y = draw(st.lists(numbers, min_size=n, max_size=n))
    body = {"x": x, "y": y}
    if draw(st.booleans()):  # disturb the data: nulls, other types, other lengths, absence
        key = draw(st.sampled_from(["x", "y", "weights"]))
        body[key] = draw(arrays)
        if draw(st.booleans()):
            body.pop(key)
    elif draw(st.booleans()):
        body["weights"] = draw(st.one_of(st.none(), st.lists(numbers, min_size=n, max_size=n)))
    body.update(draw(st.fixed_dictionaries({}, optional={
        "model": st.one_of(polynomial_models(), polynomial_models(), other_models, junk),
        "grid": grids, "level": probability, "include": includes,
        "missing": st.sampled_from(["error", "drop", "skip", None, 1]),
        "weighting": st.sampled_from(["relative", "known_sd", "exact", None]),
        "degree": st.just(2), "colour": st.just("red")})))
    return body


@settings(max_examples=400, deadline=None, database=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(bodies())
def test_the_fast_loader_declines_or_equals_the_schema(body):
    check(body)


X = [0.5, 1.0, 2.0, 3.5, 4.0, 6.0]
Y = [1.1, 1.9, 3.2, 4.8, 5.1, 7.9]


@pytest.mark.parametrize("extra", [
    {},
    {"model": {"max_degree": 4, "min_degree": 1, "select": "sequential_f"}, "grid": {"count": 200}},
    {"model": {"degree": 2, "intercept": False, "transform_x": "log", "transform_y": "sqrt"}},
    {"model": {"family": "polynomial", "max_degree": 2, "select": None, "alpha": 0.1}},
    {"model": {"min_degree": 5}},
    {"weights": [1, 2, 1, 2, 1, 2], "weighting": "known_sd", "level": 0.9},
    {"weights": None, "grid": None, "include": []},
    {"grid": {"start": -1, "stop": 3}, "include": ["grid", "grid", "coefficients"]},
    {"grid": {"start": 0, "stop": 3.0, "step": 0.25}},
    {"grid": {"start": 0, "stop": 3.0, "count": 2.0}},
    {"grid": {"x": [0, 1.5, -2]}},
    {"grid": {}},
    {"x": [0.5, None, 2.0, 3.5, 4.0, 6.0], "y": [None, 1.9, 3.2, 4.8, 5.1, 7.9],
     "missing": "drop"},
    {"model": {"family": "exponential", "fixed": {"y0": 0}}},
    {"model": {"family": "expression", "expression": "a*x + b",
               "parameters": {"a": 1, "b": 0}}},
])
def test_the_usual_bodies_take_the_fast_path_and_equal_the_schema(extra):
    body = {"x": X, "y": Y, **extra}
    assert check(body), f"declined: {extra}"


@pytest.mark.parametrize("extra", [
    {"model": {"candidates": [{"degree": 1}, {"degree": 2}]}},  # comparisons: the schema
    {"model": {"degree": 2, "max_degree": 3}},
    {"x": [0.5, None, 2.0, 3.5, 4.0, 6.0]},            # a null without missing=drop
    {"y": Y[:-1]},
    {"level": True}, {"level": 1}, {"include": None}, {"grid": {"step": 1}},
    {"degree": 2}, {"colour": "red"},
])
def test_unusual_or_invalid_bodies_are_left_to_the_schema(extra):
    assert load_fit_body({"x": X, "y": Y, **extra}) is None


@pytest.mark.parametrize("body", [
    {"x": X, "y": Y},
    {"x": X, "y": Y, "weights": [1, 2, 1, 2, 1, 2], "model": {"degree": 2},
     "grid": {"start": 0, "stop": 7, "count": 5}, "level": 0.9},
    {"x": [0.5, None, 2.0, 3.5, 4.0, 6.0], "y": Y, "missing": "drop", "include": ["grid"]},
    {"x": X, "y": Y, "model": {"degree": 9}},  # refused by the core: the same 422 both ways
])
def test_the_fast_path_answers_byte_for_byte_what_the_schema_path_answers(app, body, monkeypatch):
    client = app.test_client()
    fast = client.post("/v1/fit", json=body)
    view = app.view_functions["fits.fit"]
    assert view.loader(body) is not None  # the fast path took it
    monkeypatch.setattr(view, "loader", lambda data: None)  # every body through the schema
    slow = client.post("/v1/fit", json=body)
    assert (fast.status_code, fast.get_data()) == (slow.status_code, slow.get_data())
    assert fast.headers["Content-Type"] == slow.headers["Content-Type"]


def test_the_fast_loader_knows_every_field_of_the_schemas_it_stands_in_for():
    # A field added to a schema but not to the loader would be missing from its result.
    from schemas import fit_fast
    from schemas.fit import GridSchema
    from schemas.polynomial import ModelSchema

    assert set(FitRequestSchema().fields) == fit_fast._TOP
    assert set(ModelSchema().fields) == fit_fast._MODEL
    assert set(GridSchema().fields) == fit_fast._GRID
