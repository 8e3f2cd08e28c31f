"""Error messages that say what to do about the request actually sent.

- Every offending index is named, not only the first: the errors key stays the first
  path (``y[3]``) and its message lists the others, capped at ten then a count.
- A model option sent beside ``model`` (``degree`` at the top level) is told to move in.
- A whole /v1/fit answer sent as ``fitted_model`` is told to send its ``fitted_model``.
- A single data point is a message about the data (``x``), not about ``model.min_degree``.
"""

from __future__ import annotations

import pytest

from tests.api.helpers import assert_problem, post_json

X = [float(i) for i in range(1, 61)]
Y = [1.0 + 0.5 * v for v in X]


def _with(values, at, value):
    return [value if i in at else v for i, v in enumerate(values)]


@pytest.mark.parametrize("body, code, key, named", [
    ({"x": X, "y": _with(Y, {3, 7, 12}, "a")}, "validation_error", "y[3]", "indices 7, 12."),
    ({"x": X, "y": _with(Y, {5, 9}, None)}, "invalid_data", "y[5]", "index 9."),
    ({"x": X, "y": Y, "weights": _with([1.0] * 60, {2, 4, 8}, 0.0)}, "invalid_data",
     "weights[2]", "indices 4, 8."),
    ({"x": _with(X, {0, 1}, -1.0), "y": Y, "model": {"degree": 1, "transform_x": "log"}},
     "transform_domain", "x[0]", "index 1."),
    ({"x": _with(X, {10, 20}, 1e200), "y": Y}, "invalid_data", "x[10]", "index 20."),
])
def test_every_offending_index_is_named(client, body, code, key, named):
    problem = assert_problem(post_json(client, "/v1/fit", body), 422, code, key)
    assert named in problem["errors"][key][0], problem["errors"]


def test_a_long_list_of_indices_is_capped(client):
    bad = set(range(5, 60))  # 55 strings: the first is the key, ten more named, 44 counted
    problem = assert_problem(post_json(client, "/v1/fit", {"x": X, "y": _with(Y, bad, "a")}),
                             422, "validation_error", "y[5]")
    assert "indices 6, 7, 8, 9, 10, 11, 12, 13, 14, 15 and 44 more." in (
        problem["errors"]["y[5]"][0])


def test_the_same_in_a_batch_series(client):
    answer = post_json(client, "/v1/batch", {"series": [
        {"x": X, "y": Y, "weights": _with([1.0] * 60, {2, 4}, -1.0)}]}).get_json()
    error = answer["results"][0]["error"]
    assert error["code"] == "invalid_data" and "index 4." in error["errors"]["weights[2]"][0]


@pytest.mark.parametrize("name, value", [("degree", 2), ("max_degree", 3),
                                         ("expression", "a*x")])
def test_a_model_option_beside_model_is_told_to_move_in(client, name, value):
    problem = assert_problem(post_json(client, "/v1/fit", {"x": X, "y": Y, name: value}), 422,
                             "validation_error", name)
    message = problem["errors"][name][0]
    assert "move it into `model`" in message and f'{{"model": {{"{name}": ' in message


def test_a_whole_fit_answer_as_fitted_model_is_told_to_send_its_field(client):
    answer = post_json(client, "/v1/fit", {"x": X[:8], "y": Y[:8], "model": {"degree": 1}})
    whole = answer.get_json()
    for path, extra in (("/v1/predict", {"x": [2.5]}), ("/v1/invert", {"y": [2.5]})):
        problem = assert_problem(post_json(client, path, {"fitted_model": whole, **extra}),
                                 422, "invalid_document", "fitted_model")
        assert "send its `fitted_model` field" in problem["errors"]["fitted_model"][0].lower()
        assert len(problem["errors"]) == 1  # not a list of the document's missing fields
        fixed = post_json(client, path, {"fitted_model": whole["fitted_model"], **extra})
        assert fixed.status_code == 200, fixed.data[:300]


@pytest.mark.parametrize("body, says", [
    ({"x": [1.0], "y": [2.0]}, "a single data point"),
    ({"x": [2.0, 2.0, 2.0], "y": [1.0, 2.0, 3.0]}, "3 points, all at the same x"),
    ({"x": [1.0], "y": [2.0], "model": {"degree": 2}}, "a single data point"),
])
def test_too_few_points_is_said_of_the_data(client, body, says):
    problem = assert_problem(post_json(client, "/v1/fit", body), 422, "insufficient_design",
                             "x")
    assert says in problem["detail"] and "Too few data" in problem["detail"]
    assert not any(key.startswith("model") for key in problem["errors"])


def test_a_comparison_of_exact_fits_says_why_nothing_is_ranked(client):
    # found by schemathesis from the plot example (a 500 then; "...: None" later): on an exact
    # line every candidate has zero residuals and no finite criterion; /v1/plot and /v1/fit
    # say so, naming model.candidates
    body = {"x": X[:8], "y": Y[:8], "model": {"candidates": [{"degree": 1}, {"degree": 2}]}}
    for path in ("/v1/plot", "/v1/fit"):
        problem = assert_problem(post_json(client, path, body), 422, "unfittable_input",
                                 "model.candidates")
        assert "zero residuals" in problem["detail"] and "None" not in problem["detail"]


def test_a_comparison_is_drawn(client):
    noisy = [y + (0.1 if i % 2 else -0.1) for i, y in enumerate(Y[:8])]
    res = post_json(client, "/v1/plot", {"x": X[:8], "y": noisy, "model": {
        "candidates": [{"degree": 1}, {"degree": 2}]}, "plot": {"panels": ["selection"]}})
    assert res.status_code == 200 and res.mimetype == "image/png", res.data[:300]


def test_a_degree_the_caller_fixed_is_still_named(client):
    # three points at one x with degree 1 asked for: the degree is what to change
    problem = assert_problem(post_json(client, "/v1/fit", {
        "x": [2.0, 2.0, 2.0], "y": [1.0, 2.0, 3.0], "model": {"degree": 1}}), 422,
        "insufficient_design", "model.degree")
    assert "at most 0" in problem["detail"]


@pytest.mark.parametrize("model, key", [
    ({"family": "expression", "expression": "a*x^b", "parameters": {"a": 1, "b": 1e308}},
     "model.parameters"),
    ({"family": "expression", "expression": "a*log(x - b)", "parameters": {"a": 1, "b": 5}},
     "model.parameters"),
    ({"family": "expression", "expression": "a*sqrt(x - b)", "parameters": {"a": 1, "b": 1}},
     "model.parameters"),
])
def test_start_value_refusals_read_as_sentences(client, model, key):
    # the detail is "<message> Fix: <fix>": the message must end its sentence and the fix
    # start one (it read "... makes it finite Fix: change the start value of b ...")
    problem = assert_problem(post_json(client, "/v1/fit", {"x": X[:8], "y": Y[:8],
                                                          "model": model}),
                             422, "invalid_spec", key)
    message, fix = problem["detail"].split(" Fix: ")
    assert message[0].isupper() and message.endswith("."), message
    assert fix[0].isupper() and fix.endswith("."), fix
