"""The README's error catalogue and the server agree, row by row.

The table under "### Error catalogue" in README.md is read here. Every row's code must be
in the server's catalogue with the same status, and every case its "when" column lists
must get exactly that code: each case below names the words of the README row it stands
for (so a row cannot change without this test noticing) and a request that is sent to the
app in-process, on an app with the case's settings. The proxy's refusals (rows marked
"from the proxy in front") are checked against nginx in tests/ops, not here. The data are
invented.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import orjson
import pytest

from service.app import create_app
from service.http.problems import CATALOGUE
from tests.api.helpers import assert_problem

ROOT = Path(__file__).resolve().parents[2]
PROXY_MARK = "(from the proxy in front"
X = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]
Y = [1.1, 3.9, 9.2, 15.8, 25.1, 36.2]
FIT = {"x": X, "y": Y}


def readme_rows() -> dict[str, tuple[int, str]]:
    """code -> (status, when) from the README's catalogue table."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    table = text.split("### Error catalogue", 1)[1].split("\n\n", 2)[1]
    rows = {}
    for line in table.splitlines():
        match = re.match(r"^\| (\d{3}) \| `([a-z_]+)` \| (.*?) \| (.*) \|$", line)
        if match:
            rows[match.group(2)] = (int(match.group(1)), match.group(3))
    return rows


def _post(body, path="/v1/fit", **kwargs):
    return ("POST", path, body, kwargs)


def _document():
    answer = create_app({}).test_client().post("/v1/fit", json={**FIT, "model": {"degree": 2}})
    return answer.get_json()["fitted_model"]


def _edited(**changes):
    return lambda: {**_document(), **changes}


def _without(name):
    return lambda: {k: v for k, v in _document().items() if k != name}


# code -> [(words of the README row, settings, request)]; a callable body is built when sent
CASES = {
    "invalid_json": [("`NaN`", {}, _post(b'{"x": [1, NaN, 3], "y": [1, 2, 3]}')),
                     ("not UTF-8", {}, _post(b'{"x": [1], "y": "\xff"}'))],
    "invalid_body": [("fewer bytes than its `Content-Length`", {},
                      ("POST", "/v1/fit", b'{"x": [1, 2', {"declared": 500}))],
    "unauthorized": [("no valid `Authorization: Bearer <token>`",
                      {"auth_tokens": ("catalogue-token-0123456789",)}, _post(FIT))],
    "origin_not_allowed": [("a CORS preflight from an origin not in", {
        "cors_origins": ("https://lab.example",)}, ("OPTIONS", "/v1/fit", None, {"headers": {
            "Origin": "https://elsewhere.example", "Access-Control-Request-Method": "POST"}}))],
    "not_found": [("no such path", {}, ("GET", "/v1/fits", None, {}))],
    "method_not_allowed": [("not for this method", {}, ("GET", "/v1/fit", None, {}))],
    "body_too_large": [("over `CURVEWISE_MAX_BODY_BYTES`", {"max_body_bytes": 40}, _post(FIT))],
    "too_many_points": [("more points than `CURVEWISE_MAX_POINTS`", {"max_points": 4},
                         _post(FIT))],
    "batch_too_large": [
        ("more series than `CURVEWISE_MAX_SERIES`", {"max_series": 1},
         _post({"series": [FIT, FIT]}, "/v1/batch")),
        ("`CURVEWISE_MAX_FULL_SERIES`", {"max_full_series": 1},
         _post({"series": [FIT, FIT], "detail": "full"}, "/v1/batch")),
        ("`CURVEWISE_MAX_TOTAL_POINTS`", {"max_total_points": 10},
         _post({"series": [FIT, FIT]}, "/v1/batch"))],
    "unsupported_media_type": [
        ("not sent as `application/json`", {}, _post(orjson.dumps(FIT),
                                                    content_type="text/plain")),
        ("`Content-Encoding` such as gzip", {}, _post(orjson.dumps(FIT), headers={
            "Content-Encoding": "gzip"}))],
    "validation_error": [("missing", {}, _post({"x": X})),
                         ("unknown", {}, _post({**FIT, "colour": "red"})),
                         ("of the wrong type", {}, _post({"x": X, "y": Y[:5] + ["36.2"]})),
                         ("out of range", {}, _post({**FIT, "level": 1.5}))],
    "limit_exceeded": [("degree over `CURVEWISE_MAX_DEGREE`", {"max_degree": 2},
                        _post({**FIT, "model": {"degree": 3}})),
                       ("grid over `CURVEWISE_MAX_GRID_POINTS`", {"max_grid_points": 10},
                        _post({**FIT, "grid": {"count": 11}}))],
    "invalid_data": [
        ("arrays of different lengths", {}, _post({"x": X, "y": Y[:5]})),
        ("arrays of different lengths", {}, _post({"series": [{"x": X, "y": Y[:5]}]},
                                                  "/v1/batch")),
        ("empty arrays", {}, _post({"x": [], "y": []})),
        ("empty arrays", {}, _post({"series": [{"x": [], "y": []}]}, "/v1/batch")),
        ("missing values (`null`)", {}, _post({"x": X, "y": Y[:5] + [None]})),
        ("values too large in magnitude", {}, _post({"x": [1e200] + X[1:], "y": Y})),
        ("values too large in magnitude", {}, _post({"series": [{"x": [1e200] + X[1:],
                                                                 "y": Y}]}, "/v1/batch")),
        ("weights <= 0", {}, _post({**FIT, "weights": [1.0, 0.0, 1.0, 1.0, 1.0, 1.0]})),
        ("ratio is over 1e16", {}, _post({**FIT, "weights": [1.0, 1e17, 1.0, 1.0, 1.0,
                                                               1.0]}))],
    "transform_domain": [
        ("log of x <= 0", {}, _post({"x": [0.0] + X[1:], "y": Y, "model": {
            "degree": 1, "transform_x": "log"}})),
        ("an x < 0 (data, grid or /v1/predict) for a curve defined for x >= 0 only", {},
         _post({"x": [-1.0] + X[1:], "y": Y, "model": {"family": "power"}})),
        ("an x < 0 (data, grid or /v1/predict) for a curve defined for x >= 0 only", {},
         _post({**FIT, "model": {"family": "power"}, "grid": {"x": [-1.0, 1.0]}}))],
    "insufficient_design": [
        ("too few points", {}, _post({"x": [1.0], "y": [2.0]})),
        ("distinct x for the degree", {}, _post({"x": [1.0, 1.0, 2.0, 2.0], "y": Y[:4],
                                                 "model": {"degree": 2}}))],
    "invalid_spec": [("do not make sense together", {}, _post({**FIT, "model": {
        "degree": 0, "intercept": False}}))],
    "invalid_expression": [("not a plain arithmetic expression", {}, _post({**FIT, "model": {
        "family": "expression", "expression": "a*x +", "parameters": {"a": 1.0}}}))],
    "invalid_table": [("cannot be read as its `Content-Type` says", {}, _post(
        b"id,x,y\na,1,1.1\n", "/v1/batch",
        content_type="application/vnd.apache.arrow.stream"))],
    "invalid_document": [
        ("malformed", {}, _post({"fitted_model": _without("r_factor"), "x": [2.5]},
                                "/v1/predict")),
        ("of an unknown version", {}, _post({"fitted_model": _edited(schema_version=9),
                                             "x": [2.5]}, "/v1/predict")),
        ("fails its checksum", {}, _post({"fitted_model": _edited(sigma=9.0), "y": [3.0]},
                                         "/v1/invert")),
        ("a whole /v1/fit answer", {}, _post({"fitted_model": lambda: {
            "model": {}, "fitted_model": _document()}, "x": [2.5]}, "/v1/predict"))],
    "unfittable_input": [("any other input the core cannot fit", {}, _post({**FIT, "model": {
        "candidates": [{"degree": 6}, {"degree": 7}]}}))],
}


def _materialize(value):
    if callable(value):
        return value()
    if isinstance(value, dict):
        return {k: _materialize(v) for k, v in value.items()}
    return value


def send(app, request):
    method, path, body, options = request
    client = app.test_client()
    headers = dict(options.get("headers", {}))
    if "declared" in options:  # a body shorter than its Content-Length
        return client.open(path, method=method, data=body, content_type="application/json",
                           environ_overrides={"CONTENT_LENGTH": str(options["declared"])})
    if body is not None and not isinstance(body, bytes):
        body = orjson.dumps(_materialize(body))
    return client.open(path, method=method, data=body, headers=headers,
                       content_type=options.get("content_type", "application/json")
                       if body is not None else None)


def _answer_code(answer, path):
    """The problem code of an answer; for /v1/batch, of its first series' result."""
    if path == "/v1/batch" and answer.status_code == 200:
        return answer.get_json()["results"][0]["error"]["code"]
    return None


ROWS = readme_rows()


def test_the_readme_table_and_the_server_list_the_same_codes():
    assert len(ROWS) >= 20, "the README's catalogue table was not found"
    assert {code: status for code, (status, _) in ROWS.items()} == {
        code: kind.status for code, kind in CATALOGUE.items()}


PROXY_ROWS = {code for code, (_, when) in ROWS.items() if when.startswith(PROXY_MARK)}
BUG_AND_DEADLINE = {"internal_error", "timeout", "warming_up"}  # the last tests of this module


def test_the_proxys_rows_are_the_proxys_codes():
    # refused by nginx before any worker sees them (checked against nginx in tests/ops)
    assert PROXY_ROWS == {code for code, kind in CATALOGUE.items()
                          if "refused by the proxy" in kind.when}
    assert set(CASES) == set(ROWS) - PROXY_ROWS - BUG_AND_DEADLINE


@pytest.mark.parametrize("code", sorted(set(ROWS) - PROXY_ROWS - BUG_AND_DEADLINE))
def test_each_row_is_what_its_documented_case_gets(code):
    status, when = ROWS[code]
    for words, settings, request in CASES[code]:
        assert words in when, f"the README row of {code} no longer says {words!r}"
        app = create_app(dict(settings))
        app.config["TESTING"] = True
        answer = send(app, request)
        batch_code = _answer_code(answer, request[1])
        if batch_code is not None:
            assert batch_code == code, (words, answer.get_json()["results"][0])
        else:
            assert_problem(answer, status, code)


def _spin(*args, **kwargs):
    deadline = time.monotonic() + 10  # bounded: far past the 0.3 s limit
    while time.monotonic() < deadline:
        sum(range(1000))
    raise AssertionError("the compute deadline did not stop the fit")


def _explode(*args, **kwargs):
    raise RuntimeError("a bug")


@pytest.mark.parametrize("code, replacement, settings", [
    ("internal_error", _explode, {}), ("timeout", _spin, {"request_timeout": 0.3})])
def test_a_bug_and_a_deadline_get_their_rows(code, replacement, settings, monkeypatch):
    from service.api import fits

    assert "a bug" in ROWS["internal_error"][1] and "`CURVEWISE_REQUEST_TIMEOUT`" in ROWS[
        "timeout"][1]
    monkeypatch.setattr(fits, "fit_series", replacement)
    app = create_app(settings)
    app.config.update(TESTING=False, PROPAGATE_EXCEPTIONS=False)
    assert_problem(send(app, _post(FIT)), ROWS[code][0], code)


def test_a_server_still_warming_up_gets_its_row(monkeypatch):
    # a worker whose kernels are still compiling (tests/live/test_readiness.py shows it live)
    from service.runtime import warming

    assert "compiling" in ROWS["warming_up"][1] or "kernels" in ROWS["warming_up"][1]
    monkeypatch.setattr(warming, "_warmth", warming._Warmth(None))
    response = send(create_app({}), _post(FIT))
    assert_problem(response, ROWS["warming_up"][0], "warming_up")
    assert response.headers["Retry-After"] == str(warming.RETRY_AFTER_SECONDS)
