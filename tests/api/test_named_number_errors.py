"""A bad bound or start value given by parameter name is refused naming that parameter's
path (``model.upper.km``), not marshmallow's internal ``.value``/``.key`` level.

Oracle: the contract's error shape (errors keyed by the request's field path)."""

from __future__ import annotations

import pytest

from tests.api.helpers import assert_problem, post_json

DATA = {"x": [0.5, 1.0, 2.0, 4.0, 8.0, 16.0], "y": [1.4, 2.3, 3.6, 5.0, 6.1, 6.9]}


@pytest.mark.parametrize(("model", "field"), [
    ({"family": "michaelis_menten", "upper": {"km": "inf"}}, "model.upper.km"),
    ({"family": "michaelis_menten", "lower": {"km": None}}, "model.lower.km"),
    ({"family": "expression", "expression": "vmax*x/(km + x)",
      "parameters": {"vmax": 10.0, "km": True}}, "model.parameters.km"),
])
def test_a_bad_named_number_names_the_parameter(client, model, field):
    res = post_json(client, "/v1/fit", {**DATA, "model": model})
    body = assert_problem(res, 422, "validation_error", field=field)
    assert not any(path.endswith((".value", ".key")) for path in body["errors"]), body


def test_a_bad_parameter_name_names_the_mapping(client):
    model = {"family": "expression", "expression": "b*x", "parameters": {"b": 1.0},
             "lower": {"": 0.0}}
    body = assert_problem(post_json(client, "/v1/fit", {**DATA, "model": model}), 422,
                          "validation_error")
    assert not any(path.endswith((".value", ".key")) for path in body["errors"]), body
    assert any(path.startswith("model.lower") for path in body["errors"]), body
