"""Integers and numbers at the edges: every answer is a documented problem or a correct 200.

Whole numbers beyond 2^53 - 1 are not exchanged exactly by every JSON implementation
(RFC 8259 section 6; I-JSON, RFC 7493): every integer field refuses them with a 422 naming the
field, instead of wrapping or failing inside the numerics. A level a hair below 1 has finite
limits (the upper quantile from 1 - level, oracle scipy.stats.t.isf), and a grid whose ends are
further apart than the largest double is refused naming the grid.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

from service.app import create_app
from tests.api.helpers import PROBLEM_KEYS

EDGE_INTEGERS = (2**31, 2**53 - 1, 2**53, 2**53 + 1, 2**62, 2**63 - 1, 2**63, 2**64 - 1, 2**64,
                 10**20, 10**400, -(2**63) - 1, -(2**53), 0, -1)
EDGE_FLOATS = (1e20, 9.3e18, 1.8e19, 4e15, 2.0**53, 1e308, -1e308)
X = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0]
Y = [1.2, 1.9, 3.2, 3.8, 5.3, 5.9, 7.4, 7.9]  # invented, noisy around y = x


@pytest.fixture(scope="module")
def api():
    app = create_app({})
    app.config["TESTING"] = True
    return app.test_client()


@pytest.fixture(scope="module")
def document(api):
    answer = api.post("/v1/fit", json={"x": X, "y": Y, "model": {"degree": 1}})
    assert answer.status_code == 200
    return answer.get_json()["fitted_model"]


def _post(api, path: str, body: dict):
    # json, not orjson: orjson cannot write integers beyond 64 bits
    return api.post(path, data=json.dumps(body), content_type="application/json")


def _answered(response) -> dict:
    """200 JSON, or a problem document; never a 500."""
    assert response.status_code < 500, response.data[:400]
    body = response.get_json()
    if response.status_code != 200:
        assert response.mimetype == "application/problem+json"
        assert PROBLEM_KEYS <= set(body)
    return body


def _requests(document, value):
    yield "/v1/predict", {"fitted_model": document, "x": [2.5], "replicates": value}
    yield "/v1/invert", {"fitted_model": document, "y": [3.0], "replicates": value}
    yield "/v1/invert", {"fitted_model": document, "y": [3.0, 4.0], "replicates": [1, value]}
    yield "/v1/fit", {"x": X, "y": Y, "model": {"degree": value}}
    yield "/v1/fit", {"x": X, "y": Y, "model": {"max_degree": value}}
    yield "/v1/fit", {"x": X, "y": Y, "grid": {"count": value}}
    yield "/v1/batch", {"series": [{"x": X, "y": Y}], "model": {"degree": value}}


@settings(max_examples=60, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(value=st.one_of(st.sampled_from(EDGE_INTEGERS + EDGE_FLOATS),
                       st.integers(-(2**70), 2**70)))
def test_integer_fields_at_the_edges_answer_200_or_a_named_422(api, document, value):
    for path, body in _requests(document, value):
        answer = _answered(_post(api, path, body))
        if answer.get("status", 200) == 422 and isinstance(value, int) and value > 2**53 - 1:
            assert any("2^53 - 1" in " ".join(m) or "limit" in " ".join(m)
                       for m in answer["errors"].values()), answer
        if path == "/v1/invert" and "estimates" in answer:
            assert all(e["replicates"] >= 1 for e in answer["estimates"]), answer


def test_replicates_past_the_exact_range_are_refused_not_wrapped(api, document):
    for value in (2**63, 2**64 - 1):
        answer = _post(api, "/v1/invert", {"fitted_model": document, "y": [3.0],
                                            "replicates": value})
        assert answer.status_code == 422, answer.get_json()
        assert "replicates" in answer.get_json()["errors"]
        answer = _post(api, "/v1/predict", {"fitted_model": document, "x": [3.0],
                                             "replicates": value})
        assert answer.status_code == 422 and "replicates" in answer.get_json()["errors"]


@pytest.mark.parametrize("level", [1 - 2.0**-53, 0.999999999999, 2.0**-52, 0.5])
def test_levels_near_one_have_finite_limits(api, document, level):
    fit = _answered(_post(api, "/v1/fit", {"x": X, "y": Y, "model": {"degree": 1},
                                           "level": level}))
    df = fit["statistics"]["df_residual"]
    quantile = stats.t.isf((1 - level) / 2, df)  # oracle: scipy's upper tail
    for row in fit["coefficients"]:
        assert row["upper"] is not None and row["lower"] is not None, row
        assert math.isclose(row["upper"] - row["estimate"], quantile * row["std_error"],
                            rel_tol=1e-9)
    answer = _answered(_post(api, "/v1/predict", {"fitted_model": document, "x": [2.5, 9.0],
                                                   "level": level}))
    for row in answer["predictions"]:
        assert None not in (row["mean_lower"], row["mean_upper"], row["obs_lower"],
                            row["obs_upper"], row["band_lower"], row["band_upper"]), row
        assert math.isclose(row["mean_upper"] - row["fit"], quantile * row["se_mean"],
                            rel_tol=1e-9)


@settings(max_examples=40, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(start=st.sampled_from([-1e308, -1.7e308, -1e300, -1.0, 0.0]),
       stop=st.sampled_from([1e308, 1.7e308, 1e300, 2.0]),
       form=st.sampled_from(["count", "step", "none"]))
def test_grids_at_the_double_range_are_refused_naming_the_grid_or_have_finite_x(
        api, start, stop, form):
    grid = {"start": start, "stop": stop}
    if form == "count":
        grid["count"] = 5
    elif form == "step":
        grid["step"] = (stop - start) / 4 if math.isfinite(stop - start) else 1e300
    for path, body in (("/v1/fit", {"x": X, "y": Y, "model": {"degree": 1}, "grid": grid}),
                       ("/v1/batch", {"series": [{"x": X, "y": Y}], "model": {"degree": 1},
                                      "detail": "full", "include": ["grid"], "grid": grid})):
        answer = _answered(_post(api, path, body))
        if "status" in answer and answer["status"] != 200:
            assert any(key.startswith("grid") for key in answer["errors"]), answer
            continue
        fit = answer["results"][0] if path == "/v1/batch" else answer
        if path == "/v1/batch":
            if fit["status"] == "error":
                assert any(k.startswith("grid") for k in fit["error"]["errors"]), fit
                continue
            fit = fit["fit"]
        assert all(v is not None and np.isfinite(v) for v in fit["grid"]["x"]), fit["grid"]
