"""Every error of /v1/fit and of the HTTP layer is a problem+json naming the field and fix.

Statuses follow RFC 9110 (400/404/405 with Allow/413/415) and the project contract
(422 for invalid or unfittable input); the body shape follows RFC 9457.
"""

from __future__ import annotations

import pytest

from tests.api.helpers import assert_problem, post_json, post_raw

GOOD = {"x": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "y": [1.1, 3.9, 9.2, 15.8, 25.1, 36.2]}


def body(**changes):
    out = {**GOOD, **changes}
    return {k: v for k, v in out.items() if v is not ...}


@pytest.mark.parametrize("raw, hint", [
    (b'{"x": [1, NaN, 3], "y": [1, 2, 3]}', "NaN and Infinity are not JSON"),
    (b'{"x": [1, 2, Infinity], "y": [1, 2, 3]}', "NaN and Infinity are not JSON"),
    (b'{"x": [1, 2, -Infinity], "y": [1, 2, 3]}', "NaN and Infinity are not JSON"),
    (b'{"x": [1, 2, 3], "y": [1, 2, 3],}', "not valid JSON"),
    (b'{"x": [1, 2, 3] "y": [1, 2, 3]}', "not valid JSON"),
    (b'{"x": [1e400], "y": [1]}', "not valid JSON"),
    (b'{"x": [1], "y": "\xff"}', "UTF-8"),
    (b"", "empty"),
    (b"   ", "empty"),
])
def test_unparsable_bodies_are_400(client, raw, hint):
    problem = assert_problem(post_raw(client, "/v1/fit", raw), 400, "invalid_json", "_body")
    assert hint in problem["detail"]


@pytest.mark.parametrize("content_type", ["text/plain", "application/x-www-form-urlencoded",
                                          "application/xml"])
def test_wrong_content_type_is_415(client, content_type):
    response = post_raw(client, "/v1/fit", b'{"x": [1], "y": [1]}', content_type=content_type)
    problem = assert_problem(response, 415, "unsupported_media_type", "_body")
    assert "application/json" in problem["detail"]


def test_missing_content_type_is_415(client):
    response = client.post("/v1/fit", data=b'{"x": [1], "y": [1]}')
    assert_problem(response, 415, "unsupported_media_type")


def test_unknown_path_is_404(client):
    assert_problem(client.get("/v1/fits"), 404, "not_found", "_path")


def test_wrong_method_is_405_with_allow(client):
    response = client.get("/v1/fit")
    problem = assert_problem(response, 405, "method_not_allowed", "_method")
    assert "POST" in response.headers["Allow"]
    assert "POST" in problem["errors"]["_method"][0]


def test_body_over_limit_is_413_before_it_is_read():
    from service.app import create_app

    client = create_app({"max_body_bytes": 1000}).test_client()
    data = b'{"x": [' + b",".join([b"1.0"] * 400) + b'], "y": [1]}'
    problem = assert_problem(post_raw(client, "/v1/fit", data), 413, "body_too_large")
    assert "1000" in problem["detail"]


def test_points_over_limit_is_413():
    from service.app import create_app

    client = create_app({"max_points": 5}).test_client()
    problem = assert_problem(post_json(client, "/v1/fit", GOOD), 413, "too_many_points", "x")
    assert "5" in problem["detail"]


@pytest.mark.parametrize("changes, field, words", [
    ({"y": [1.0, 2.0, "3", 4.0, 5.0, 6.0]}, "y[2]", "string"),
    ({"y": [1.0, 2.0, 3.0, True, 5.0, 6.0]}, "y[3]", "boolean"),
    ({"x": [1.0, [2.0], 3.0, 4.0, 5.0, 6.0]}, "x[1]", "nested array"),
    ({"x": [1.0, 2.0, {"v": 3}, 4.0, 5.0, 6.0]}, "x[2]", "object"),
    ({"x": "1,2,3"}, "x", "array of numbers"),
    ({"x": ...}, "x", "Missing required field"),
    ({"y": ...}, "y", "Missing required field"),
    ({"colour": "red"}, "colour", "Unknown field"),
    ({"model": {"degree": 2, "shape": "u"}}, "model.shape", "Unknown field"),
    ({"model": {"degree": 2.5}}, "model.degree", "integer"),
    ({"model": {"degree": "2"}}, "model.degree", "integer"),
    ({"model": {"degree": True}}, "model.degree", "integer"),
    ({"model": {"degree": -1}}, "model.degree", "0 or more"),
    ({"model": {"degree": 2, "max_degree": 3}}, "model.degree", "not both"),
    ({"model": {"degree": 2, "select": "aic"}}, "model.select", "max_degree"),
    ({"model": {"degree": 2, "min_degree": 3}}, "model.min_degree", "max_degree"),  # was ignored
    ({"model": {"max_degree": 3, "min_degree": 4}}, "model.min_degree", "max_degree"),
    ({"model": {"family": "spline"}}, "model.family", "polynomial"),
    ({"model": {"max_degree": 3, "select": "best"}}, "model.select", "sequential_f"),
    ({"model": {"intercept": "yes"}}, "model.intercept", "true or false"),
    ({"model": {"intercept": 1}}, "model.intercept", "true or false"),
    ({"model": {"transform_x": "exp"}}, "model.transform_x", "log10"),
    ({"model": {"alpha": 0}}, "model.alpha", "between 0 and 1"),
    ({"model": {"alpha": "0.05"}}, "model.alpha", "number"),
    ({"model": "quadratic"}, "model", "object"),
    ({"level": 1.5}, "level", "between 0 and 1"),
    ({"level": 95}, "level", "between 0 and 1"),
    ({"missing": "ignore"}, "missing", "drop"),
    ({"include": ["coefficients", "plots"]}, "include[1]", "diagnostics"),
    ({"include": "coefficients"}, "include", "array"),
    ({"grid": {"count": 1}}, "grid.count", "2 or more"),
    ({"grid": {"start": 1.0}}, "grid.stop", "together"),
    ({"grid": {"start": 2.0, "stop": 1.0}}, "grid.stop", "greater than start"),
    ({"grid": {"start": 1.0, "stop": 2.0, "step": 0}}, "grid.step", "greater than 0"),
    ({"grid": {"step": 0.1}}, "grid.step", "start and stop"),
    ({"grid": {"x": [1.0, 2.0], "count": 5}}, "grid.x", "alone"),
    ({"grid": {"x": [1.0, "a"]}}, "grid.x[1]", "string"),
    ({"grid": {"x": [1.0, None]}}, "grid.x[1]", "Remove the null"),
    ({"grid": {"resolution": 5}}, "grid.resolution", "Unknown field"),
])
def test_invalid_fields_are_422_naming_the_field(client, changes, field, words):
    problem = assert_problem(post_json(client, "/v1/fit", body(**changes)), 422,
                             "validation_error", field)
    assert any(words.lower() in m.lower() for m in problem["errors"][field]), problem["errors"]


@pytest.mark.parametrize("changes, field, words", [
    ({"y": [1.0, 2.0, 3.0, 4.0, None, 6.0]}, "y[4]", "missing"),
    ({"weights": [1.0, 1.0, None, 1.0, 1.0, 1.0]}, "weights[2]", "missing"),
    ({"x": []}, "x", "Empty array"),
    ({"x": [], "y": []}, "y", "Empty array"),
    ({"y": [1.0, 2.0, 3.0]}, "y", "same length"),
    ({"weights": [1.0, 2.0]}, "weights", "same length"),
])
def test_data_that_cannot_be_paired_is_invalid_data_as_in_batch(client, changes, field, words):
    # the README's catalogue: arrays of different lengths, empty arrays and missing values
    # are invalid_data; /v1/batch says so of the same series (tests/batch)
    problem = assert_problem(post_json(client, "/v1/fit", body(**changes)), 422,
                             "invalid_data", field)
    assert any(words.lower() in m.lower() for m in problem["errors"][field]), problem["errors"]
    batch = post_json(client, "/v1/batch", {"series": [body(**changes)]}).get_json()
    assert batch["results"][0]["error"]["code"] == "invalid_data", batch["results"][0]


def test_not_an_object_is_422(client):
    assert_problem(post_json(client, "/v1/fit", [1, 2, 3]), 422, "validation_error", "_body")


@pytest.mark.parametrize("changes, code, field", [
    ({"weights": [1.0, 1.0, 0.0, 1.0, 1.0, 1.0]}, "invalid_data", "weights[2]"),
    ({"weights": [1.0, 1.0, -2.0, 1.0, 1.0, 1.0]}, "invalid_data", "weights[2]"),
    ({"x": [1.0, 2.0, 3.0], "y": [1.0, 2.0, 3.0], "model": {"degree": 3}},
     "insufficient_design", None),
    ({"x": [1.0, 1.0, 1.0, 2.0, 2.0, 2.0], "model": {"degree": 2}}, "insufficient_design", None),
    ({"x": [-1.0, 2.0, 3.0, 4.0, 5.0, 6.0], "model": {"degree": 1, "transform_x": "log"}},
     "transform_domain", "x[0]"),
    ({"model": {"degree": 0, "intercept": False}}, "invalid_spec", "model.degree"),
])
def test_unfittable_input_is_422_from_the_core(client, changes, code, field):
    problem = assert_problem(post_json(client, "/v1/fit", body(**changes)), 422, code)
    if field is not None:
        assert field in problem["errors"], problem
    assert "Fix:" in problem["detail"]


def test_degree_over_the_server_limit_is_422():
    from service.app import create_app

    client = create_app({"max_degree": 3}).test_client()
    for model in ({"degree": 4}, {"max_degree": 4}):
        problem = assert_problem(post_json(client, "/v1/fit", body(model=model)), 422,
                                 "limit_exceeded")
        assert any(key.startswith("model.") for key in problem["errors"])


@pytest.mark.parametrize("grid", [{"count": 50_000}, {"x": [0.5] * 30_000},
                                  {"start": 0.0, "stop": 10.0, "step": 1e-4}])
def test_grid_over_the_limit_is_422(client, grid):
    assert_problem(post_json(client, "/v1/fit", body(grid=grid)), 422, "limit_exceeded", "grid")


def test_problem_type_pages_exist_for_every_code(client):
    from service.http.problems import CATALOGUE

    for code in CATALOGUE:
        page = client.get(f"/problems/{code}")
        assert page.status_code == 200 and page.mimetype == "text/html"
        assert code in page.get_data(as_text=True)
    assert_problem(client.get("/problems/no_such_code"), 404, "not_found")


def test_a_bug_is_a_500_problem_without_internals(app, monkeypatch):
    from service.api import fits

    def explode(*args, **kwargs):
        raise RuntimeError("secret internal detail")

    monkeypatch.setattr(fits, "fit_series", explode)
    app.config["TESTING"] = False
    app.config["PROPAGATE_EXCEPTIONS"] = False
    response = post_json(app.test_client(), "/v1/fit", GOOD)
    problem = assert_problem(response, 500, "internal_error")
    assert "secret" not in response.get_data(as_text=True)
    assert problem["title"]
