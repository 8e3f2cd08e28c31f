"""POST /v1/predict for every family: the stored document predicts what /v1/fit reported.

Oracles: the /v1/fit grid of the same fit (the same x sent back to /v1/predict must give
the same curve and bands to 1e-12 relative); for the bands of a built-in curve, an
independent delta-method evaluation (central finite differences of the numpy curve of
tests/core/nonlinear/builtin_designs.py, scipy's Student t quantile; the band for the mean
of m new readings adds sigma^2/m, Bates & Watts 1988, sec. 2.3). The series are seeded
invented designs (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tests.api.helpers import post_json
from tests.core.nonlinear.builtin_designs import cases

COLUMNS = ("fit", "se_mean", "mean_lower", "mean_upper", "obs_lower", "obs_upper",
           "band_lower", "band_upper")


def _expression_body():
    rng = np.random.default_rng(416)
    x = np.linspace(0.5, 10.0, 25)
    y = 3.0 * (1.0 - np.exp(-0.4 * x)) + 0.02 * rng.standard_normal(x.size)
    return {"x": x.tolist(), "y": y.tolist(),
            "model": {"family": "expression", "expression": "a*(1 - exp(-k*x))",
                      "parameters": {"a": 2.0, "k": 0.3}}}


def _builtin_body(name="logistic4"):
    case = cases(name, 1, 11)[0]
    model = {"family": name} if case.scale is None else {"family": name, "scale": case.scale}
    return {"x": case.x.tolist(), "y": case.y.tolist(), "model": model}


def _polynomial_body():
    rng = np.random.default_rng(417)
    x = np.linspace(0.0, 5.0, 20)
    y = 1.0 + 0.5 * x - 0.05 * x**2 + 0.01 * rng.standard_normal(x.size)
    return {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2}}


BODIES = {"expression": _expression_body, "logistic4": _builtin_body,
          "polynomial": _polynomial_body}


def _fit(client, body):
    res = post_json(client, "/v1/fit", {**body, "grid": {"count": 30}})
    assert res.status_code == 200, res.data[:500]
    return res.get_json()


def _close(a, b, rtol=1e-12):
    a = np.array([np.nan if v is None else v for v in a], dtype=float)
    b = np.array([np.nan if v is None else v for v in b], dtype=float)
    np.testing.assert_allclose(a, b, rtol=rtol, atol=0.0, equal_nan=True)


@pytest.mark.parametrize("family", list(BODIES))
def test_predict_equals_the_fit_grid(client, family):
    out = _fit(client, BODIES[family]())
    doc = out["fitted_model"]
    assert doc["schema_version"] == (1 if family == "polynomial" else 2)
    grid = out["grid"]
    res = post_json(client, "/v1/predict", {"fitted_model": doc, "x": grid["x"]})
    assert res.status_code == 200, res.data[:500]
    rows = res.get_json()["predictions"]
    for name in COLUMNS:
        _close([r[name] for r in rows], grid[name])
    assert [r["extrapolated"] for r in rows] == grid["extrapolated"]


@pytest.mark.parametrize("family", ["expression", "logistic4"])
def test_extrapolation_is_flagged(client, family):
    doc = _fit(client, BODIES[family]())["fitted_model"]
    inside = 0.5 * (doc["x_min"] + doc["x_max"])
    res = post_json(client, "/v1/predict", {"fitted_model": doc,
                                            "x": [inside, doc["x_max"] * 1.5]})
    body = res.get_json()
    assert [r["extrapolated"] for r in body["predictions"]] == [False, True]
    assert body["extrapolated_count"] == 1


def test_bands_of_a_builtin_curve_match_an_independent_delta_method(client):
    case = cases("logistic4", 1, 11)[0]
    out = _fit(client, _builtin_body())
    doc, m, level = out["fitted_model"], 4, 0.9
    xs = np.linspace(doc["x_min"], doc["x_max"], 7)
    res = post_json(client, "/v1/predict", {"fitted_model": doc, "x": xs.tolist(),
                                            "replicates": m, "level": level})
    rows = res.get_json()["predictions"]
    theta = np.array(doc["estimates"])
    cov = np.array(doc["covariance"])
    # the numpy curve of the design takes its parameters in the family's order
    assert doc["parameter_names"] == ["y_left", "y_right", "slope", "ec50"]
    steps = 1e-6 * np.maximum(np.abs(theta), 1e-3)
    grad = np.empty((xs.size, theta.size))
    for j, h in enumerate(steps):
        up, down = theta.copy(), theta.copy()
        up[j] += h
        down[j] -= h
        grad[:, j] = (case.curve(xs, *up) - case.curve(xs, *down)) / (2 * h)
    se = np.sqrt(np.einsum("ij,jk,ik->i", grad, cov, grad))
    t = stats.t.ppf(0.5 + level / 2, doc["df_residual"])
    fit = case.curve(xs, *theta)
    np.testing.assert_allclose([r["fit"] for r in rows], fit, rtol=1e-12)
    np.testing.assert_allclose([r["se_mean"] for r in rows], se, rtol=1e-6)
    half_obs = t * np.sqrt(se**2 + doc["sigma"] ** 2 / m)
    np.testing.assert_allclose([r["obs_upper"] - r["fit"] for r in rows], half_obs, rtol=1e-6)
    np.testing.assert_allclose([r["fit"] - r["mean_lower"] for r in rows], t * se, rtol=1e-6)


def test_openapi_documents_both_layouts(client):
    spec = client.get("/openapi.json").get_json()
    components = spec["components"]["schemas"]
    assert {"expression", "parameter_names", "covariance", "checksum"} <= set(
        components["CurveDocument"]["properties"])
    for name in ("PredictRequest", "InvertRequest"):
        field = components[name]["properties"]["fitted_model"]
        assert {r["$ref"] for r in field["oneOf"]} == {"#/components/schemas/FittedModel",
                                                       "#/components/schemas/CurveDocument"}


def _cubic_body():
    rng = np.random.default_rng(418)
    x = np.linspace(0.0, 5.0, 20)
    y = 1.0 + 0.5 * x - 0.05 * x**3 + 0.01 * rng.standard_normal(x.size)
    return {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 3}}


@pytest.mark.parametrize("body", [_builtin_body, _expression_body, _cubic_body])
def test_a_vanishing_level_gives_bands_equal_to_the_fit(client, body):
    """At level -> 0 every band's width -> 0 (its critical value is a quantile at a
    vanishing probability: t -> 0, sqrt(p F_{p,df}) -> 0; for p = 4, level 1e-300, the F
    quantile is about 1e-150, mpmath-checked in tests/core/test_quantiles.py): each band is
    the fit, for every family alike. Was: null simultaneous bands with p > 2 (scipy's fdtri
    gives NaN at such a level)."""
    doc = _fit(client, body())["fitted_model"]
    res = post_json(client, "/v1/predict", {"fitted_model": doc, "level": 1e-300,
                                            "x": [0.5 * (doc["x_min"] + doc["x_max"])]})
    assert res.status_code == 200, res.data[:500]
    (row,) = res.get_json()["predictions"]
    for name in COLUMNS:
        if name not in ("fit", "se_mean"):
            assert row[name] == pytest.approx(row["fit"], rel=1e-12, abs=0.0), (name, row)
