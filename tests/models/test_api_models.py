"""POST /v1/predict and /v1/invert end to end: /v1/fit -> document -> predict/invert, and 422s."""

from __future__ import annotations

import copy

import numpy as np
import orjson
import pytest
import statsmodels.api as sm
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

from service.app import create_app
from service.core.models.inverse import STATUSES
from tests.conftest import load_nist

PROBLEM = "application/problem+json"



def _post(api, path, body):
    return api.post(path, data=orjson.dumps(body), content_type="application/json")


@pytest.fixture(scope="module")
def pontius_fit(api):
    ref = load_nist("pontius")
    response = _post(api, "/v1/fit", {"x": ref["data"]["x"], "y": ref["data"]["y"],
                                      "model": {"degree": 2}, "grid": {"count": 57}})
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def test_predict_reproduces_the_fit_grid(api, pontius_fit):
    # Issue 5: /v1/predict with the returned document equals /v1/fit's grid (1e-12 relative).
    grid = pontius_fit["grid"]
    response = _post(api, "/v1/predict", {"fitted_model": pontius_fit["fitted_model"],
                                          "x": grid["x"]})
    assert response.status_code == 200, response.get_json()
    rows = response.get_json()["predictions"]
    assert [row["x"] for row in rows] == grid["x"]
    for column in ("fit", "mean_lower", "mean_upper", "obs_lower", "obs_upper",
                   "band_lower", "band_upper"):
        np.testing.assert_allclose([row[column] for row in rows], grid[column], rtol=1e-12,
                                   atol=0, err_msg=column)
    assert [row["extrapolated"] for row in rows] == grid["extrapolated"]


@pytest.mark.parametrize("name, model", [
    ("norris", {"degree": 1}),
    ("noint1", {"degree": 1, "intercept": False}),
    ("filip", {"degree": 10}),
    ("pontius", {"degree": 2, "transform_x": "log", "transform_y": "sqrt"}),
    ("pontius", {"max_degree": 4, "select": "bic", "transform_y": "reciprocal"}),
])
def test_fit_then_predict_is_exact_across_models(api, name, model):
    # Issue 5 round trip over /v1/fit -> /v1/predict for lines, no-intercept, degree 10
    # (NIST Filip, ill-conditioned), transforms and a selected degree.
    ref = load_nist(name)
    fit = _post(api, "/v1/fit", {"x": ref["data"]["x"], "y": ref["data"]["y"], "model": model,
                                 "grid": {"count": 41}}).get_json()
    grid = fit["grid"]
    rows = _post(api, "/v1/predict", {"fitted_model": fit["fitted_model"],
                                      "x": grid["x"]}).get_json()["predictions"]
    for column in ("fit", "obs_lower", "obs_upper", "mean_lower", "mean_upper"):
        # null where a reciprocal band reaches the pole (unbounded): equal as NaN
        np.testing.assert_allclose(np.array([r[column] for r in rows], dtype=float),
                                   np.array(grid[column], dtype=float), rtol=1e-12, atol=0,
                                   err_msg=column)
    assert [r["unbounded"] for r in rows] == grid["unbounded"]


def test_document_with_null_raw_coefficients_is_accepted_over_the_wire(api):
    # Seeded degree-10 data on x in [0, 1e40]: raw powers leave the double range (null).
    rng = np.random.default_rng(1)
    x = np.linspace(0.0, 1e40, 30)
    y = 1 + 2 * (x / 1e40) + 3 * (x / 1e40) ** 4 + rng.normal(0, 0.01, x.size)
    fit = _post(api, "/v1/fit", {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 10},
                                 "grid": {"count": 9}}).get_json()
    assert None in fit["fitted_model"]["raw_coefficients"]
    response = _post(api, "/v1/predict", {"fitted_model": fit["fitted_model"],
                                          "x": fit["grid"]["x"]})
    assert response.status_code == 200, response.get_json()
    np.testing.assert_allclose([r["fit"] for r in response.get_json()["predictions"]],
                               fit["grid"]["fit"], rtol=1e-12, atol=0)


def test_predict_replicate_band_matches_statsmodels(api, pontius_fit):
    # Oracle: statsmodels OLS on x/max(x) (exact reparameterization); the band for the mean of
    # m new readings has variance se_mean^2 + sigma^2/m (common practice).
    ref = load_nist("pontius")
    x, y = np.asarray(ref["data"]["x"]), np.asarray(ref["data"]["y"])
    at = np.array([2.0e5, 1.1e6, 2.9e6, 3.5e6])
    response = _post(api, "/v1/predict", {"fitted_model": pontius_fit["fitted_model"],
                                          "x": at.tolist(), "replicates": 4, "level": 0.9})
    body = response.get_json()
    ols = sm.OLS(y, np.vander(x / x.max(), 3, increasing=True)).fit()
    pred = ols.get_prediction(np.vander(at / x.max(), 3, increasing=True))
    se_mean, sigma = pred.se_mean, np.sqrt(ols.scale)
    half = stats.t.ppf(0.95, 37) * np.sqrt(se_mean**2 + sigma**2 / 4)
    rows = body["predictions"]
    np.testing.assert_allclose([r["obs_upper"] - r["fit"] for r in rows], half, rtol=1e-8)
    assert [r["extrapolated"] for r in rows] == [False, False, False, True]
    assert body["extrapolated_count"] == 1 and body["level"] == 0.9


def test_invert_reads_the_load_cell_example(api, pontius_fit):
    # Source: NIST/SEMATECH e-Handbook 4.6.1.10: deflection 1.239722 -> load 1,705,106
    # (published to the unit; as quoted in issue 5).
    response = _post(api, "/v1/invert", {"fitted_model": pontius_fit["fitted_model"],
                                         "y": [1.239722, 2.5], "replicates": [1, 3]})
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    first, second = body["estimates"]
    assert first["status"] == "ok" and abs(first["x"] - 1705106) <= 1
    assert first["lower"] < first["x"] < first["upper"]
    assert len(first["other_roots"]) == 1 and first["other_roots"][0] > 1e8
    assert second["status"] == "outside_range" and second["x"] is None
    assert second["sensitivity"] is None and first["sensitivity"] > 0
    assert body["monotone"] is True and body["calibration"]["available"] is True
    assert body["calibration"]["blank_extrapolated"] is True


def _problem(response, field: str, words: str):
    assert response.status_code == 422, response.get_json()
    assert response.mimetype == PROBLEM
    errors = response.get_json()["errors"]
    assert field in errors, errors
    assert any(words in message for message in errors[field]), errors[field]


@pytest.mark.parametrize("path, extra", [("/v1/predict", {"x": [1e6]}),
                                         ("/v1/invert", {"y": [1.0]})])
def test_bad_documents_get_422_naming_what_is_wrong(api, pontius_fit, path, extra):
    good = pontius_fit["fitted_model"]
    cases = []
    doc = copy.deepcopy(good)
    doc["raw_coefficients"][2] *= 1.5
    cases.append((doc, "fitted_model.raw_coefficients", "describe different curves"))
    doc = copy.deepcopy(good)
    doc["schema_version"] = 99
    cases.append((doc, "fitted_model.schema_version", "Unsupported schema_version"))
    doc = copy.deepcopy(good)
    doc["sigma"] = doc["sigma"] * 2
    cases.append((doc, "fitted_model.checksum", "does not match"))
    doc = copy.deepcopy(good)
    del doc["r_factor"]
    cases.append((doc, "fitted_model.r_factor", "Missing"))
    doc = copy.deepcopy(good)
    doc["x_scale"] = "big"
    cases.append((doc, "fitted_model.x_scale", "Not a number"))
    for doc, field, words in cases:
        response = _post(api, path, {"fitted_model": doc, **extra})
        _problem(response, field, words)
        # malformed, unknown version or failed checksum alike (the README's catalogue)
        assert response.get_json()["code"] == "invalid_document"


def test_bad_request_fields_are_named(api, pontius_fit):
    doc = pontius_fit["fitted_model"]
    _problem(_post(api, "/v1/invert", {"fitted_model": doc, "y": [1.0, 2.0],
                                       "replicates": [1, 0]}), "replicates[1]", "whole number")
    _problem(_post(api, "/v1/invert", {"fitted_model": doc, "y": [1.0, 2.0],
                                       "replicates": [1, 2, 3]}), "replicates", "counts")
    _problem(_post(api, "/v1/predict", {"fitted_model": doc, "x": [1.0], "level": 1.0}),
             "level", "between 0 and 1")
    _problem(_post(api, "/v1/predict", {"fitted_model": doc, "x": ["a"]}), "x[0]", "number")
    _problem(_post(api, "/v1/invert", {"fitted_model": doc}), "y", "Missing")


def test_too_many_values_is_refused_with_the_limit(pontius_fit):
    small = create_app({"max_grid_points": 3}).test_client()
    response = _post(small, "/v1/predict", {"fitted_model": pontius_fit["fitted_model"],
                                            "x": [1.0, 2.0, 3.0, 4.0]})
    _problem(response, "x", "the limit is 3")


def test_openapi_documents_both_endpoints_and_the_document(api):
    spec = api.get("/openapi.json").get_json()
    for path in ("/v1/predict", "/v1/invert"):
        operation = spec["paths"][path]["post"]
        assert {"200", "422"} <= set(operation["responses"])
        assert operation["summary"]
    components = spec["components"]["schemas"]
    fitted = components["FittedModel"]
    assert {"schema_version", "checksum", "r_factor", "basis_coefficients"} <= set(
        fitted["properties"])
    assert "checksum" in fitted["required"]


@settings(max_examples=60, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(readings=st.lists(st.floats(-1e300, 1e300), min_size=1, max_size=6),
       replicates=st.one_of(st.integers(-1, 10**9), st.lists(st.integers(0, 5), max_size=6)),
       level=st.one_of(st.none(), st.floats(0.0, 1.0)),
       risk=st.floats(0.001, 0.6))
def test_invert_answers_200_or_422_for_any_readings(api, pontius_fit, readings, replicates,
                                                    level, risk):
    # Robustness over the wire with a genuine document: never a 5xx, strict JSON out.
    response = _post(api, "/v1/invert", {"fitted_model": pontius_fit["fitted_model"],
                                         "y": readings, "replicates": replicates,
                                         "level": level, "detection_alpha": risk})
    assert response.status_code in (200, 422), response.get_data(as_text=True)
    body = orjson.loads(response.get_data())
    if response.status_code == 200:
        assert {e["status"] for e in body["estimates"]} <= set(STATUSES)
    else:
        assert response.mimetype == PROBLEM and body["errors"]
