"""An equation that is undefined at some of the caller's x (log(x) at a zero-dose blank) is
refused naming that point, not the start values, which no choice could repair; a built-in
curve that a fixed value makes unfittable is refused naming model.fixed.

Oracle: the arithmetic fact that log(0) is not finite; the request positions are those of
the body (a null dropped with missing=drop does not shift them)."""

from __future__ import annotations

from tests.api.helpers import assert_problem, post_json

DOSES = [0.0, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0]
SIGNAL = [0.2, 1.1, 1.9, 2.7, 3.4, 4.2, 4.9]
LOG_LINE = {"family": "expression", "expression": "a + b*log(x)",
            "parameters": {"a": 1.0, "b": 2.0}}


def test_log_of_a_zero_dose_names_the_point_and_the_fix(client):
    res = post_json(client, "/v1/fit", {"x": DOSES, "y": SIGNAL, "model": LOG_LINE})
    body = assert_problem(res, 422, "invalid_spec", field="x[0]")
    assert "x[0] = 0" in body["detail"] and "1 of 7 points" in body["detail"]
    assert "Drop the points" in body["detail"]
    assert "model.parameters" not in body["errors"]


def test_the_position_is_the_request_position_after_dropped_nulls(client):
    x = [1.0, None, *DOSES]
    y = [0.3, 0.4, *SIGNAL]
    res = post_json(client, "/v1/fit", {"x": x, "y": y, "model": LOG_LINE, "missing": "drop"})
    body = assert_problem(res, 422, "invalid_spec", field="x[2]")
    assert "x[2] = 0" in body["detail"]


def test_start_values_that_one_change_repairs_still_name_the_parameters(client):
    # sqrt(x - c) with c = 1 is undefined at x < 1; c = -1 alone repairs it at every x
    res = post_json(client, "/v1/fit", {"x": DOSES, "y": SIGNAL, "model": {
        "family": "expression", "expression": "a*sqrt(x - c)", "parameters": {"a": 1.0,
                                                                               "c": 1.0}}})
    body = assert_problem(res, 422, "invalid_spec", field="model.parameters")
    assert "changing c (e.g. c=-1) alone" in body["detail"]


def test_a_fixed_value_that_no_start_can_fit_is_named(client):
    # logistic4 on log x with a zero-dose blank: a fixed slope < 0 makes x^slope infinite at
    # x = 0 whatever the other values, so the refusal must point at model.fixed and quote the
    # family's constraint on slope (GET /v1/families), not ask for start values.
    x = [0.0, 0.0, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0]
    y = [0.05, 0.06, 0.1, 0.2, 0.5, 1.2, 1.9, 2.3, 2.45]
    res = post_json(client, "/v1/fit", {"x": x, "y": y, "model": {
        "family": "logistic4", "fixed": {"slope": -1.2}}})
    body = assert_problem(res, 422, "invalid_spec", field="model.fixed")
    assert "slope=-1.2" in body["detail"] and "> 0" in body["detail"]
