"""An exact fit (sigma = 0) reads back without intervals, never with zero-width ones.

The straight line y = 1 + 2x through five points is reproduced exactly, so the stored
sigma is 0: /v1/predict gives the fitted value (hand computation: 1 + 2x) with se_mean
and every limit null and ``intervals_withheld``; /v1/invert gives x = (y - 1) / 2 (hand
computation) with null limits and status ``no_residual_variance``; the figures of merit
are unavailable. A nonlinear curve with sigma = 0 answers the same on the single and the
batched path. Data: invented exact line and seeded demo logistic.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import orjson
import pytest

from service.core import ModelSpec, fit_series
from service.core.models.curve_inverse import invert_curve


def _post(api, path, body):
    response = api.post(path, data=orjson.dumps(body), content_type="application/json")
    assert response.status_code == 200, response.get_json()
    return response.get_json()


@pytest.fixture(scope="module")
def exact_line(api):
    doc = _post(api, "/v1/fit", {"x": [0, 1, 2, 3, 4], "y": [1, 3, 5, 7, 9],
                                 "model": {"degree": 1}})["fitted_model"]
    assert doc["sigma"] == 0.0
    return doc


def test_predict_withholds_the_intervals_of_an_exact_fit(api, exact_line):
    body = _post(api, "/v1/predict", {"fitted_model": exact_line, "x": [1.5, 6.0]})
    rows = body["predictions"]
    assert [r["fit"] for r in rows] == pytest.approx([4.0, 13.0], rel=1e-12)  # 1 + 2x
    for row in rows:
        assert all(row[name] is None for name in ("se_mean", "mean_lower", "mean_upper",
                                                  "obs_lower", "obs_upper", "band_lower",
                                                  "band_upper"))
    assert body["intervals_withheld"]["code"] == "no_residual_variance"
    assert "sigma = 0" in body["intervals_withheld"]["message"]


def test_invert_gives_x_without_limits_for_an_exact_fit(api, exact_line):
    body = _post(api, "/v1/invert", {"fitted_model": exact_line, "y": [4.0, 5.0, 20.0]})
    first, second, beyond = body["estimates"]
    for row, y0 in ((first, 4.0), (second, 5.0)):
        assert row["x"] == pytest.approx((y0 - 1) / 2, rel=1e-12)  # x = (y - 1) / 2
        assert row["lower"] is None and row["upper"] is None
        assert row["status"] == "no_residual_variance"
    assert beyond["status"] == "outside_range"  # a reading past the range says so first
    assert body["calibration"]["available"] is False
    assert "sigma = 0" in body["calibration"]["reason"]


def test_a_fit_with_noise_keeps_its_intervals_and_answer_shape(api):
    rng = np.random.default_rng(9)
    x = np.linspace(0, 4, 9)
    doc = _post(api, "/v1/fit", {"x": x.tolist(), "y": (1 + 2 * x + rng.normal(0, 0.1, 9))
                                 .tolist(), "model": {"degree": 1}})["fitted_model"]
    body = _post(api, "/v1/predict", {"fitted_model": doc, "x": [1.5]})
    assert "intervals_withheld" not in body
    assert body["predictions"][0]["obs_lower"] < body["predictions"][0]["obs_upper"]


def test_nonlinear_curve_without_residual_variance_single_and_batched():
    rng = np.random.default_rng(4)
    x = np.repeat(np.geomspace(0.05, 50, 7), 2)
    y = 0.1 + 1.9 / (1 + (x / 2.0) ** -1.3) + rng.normal(0, 0.02, x.size)
    fitted = fit_series(x, y, model=ModelSpec(family="logistic4", scale="log")).model
    exact = dataclasses.replace(fitted, sigma=0.0, noise_variance=0.0,
                                covariance=np.zeros_like(fitted.covariance))
    readings = [0.5, 1.0, 1.5]
    batched = invert_curve(exact, readings).estimates
    single = [invert_curve(exact, [r]).estimates[0] for r in readings]
    reference = invert_curve(fitted, readings).estimates
    for got, one, noisy in zip(batched, single, reference, strict=True):
        assert got.status == one.status == "no_residual_variance"
        assert got.x == one.x == noisy.x  # the estimate does not depend on sigma
        assert math.isnan(got.lower) and math.isnan(got.upper) and math.isnan(one.upper)


def test_the_fit_grid_of_an_exact_fit_withholds_its_bands_as_predict_does(api, exact_line):
    # the same line through /v1/fit: its grid agrees with /v1/predict from its document
    # (values 1 + 2x, bands null) and the warning says why the bands are null
    body = _post(api, "/v1/fit", {"x": [0, 1, 2, 3, 4], "y": [1, 3, 5, 7, 9],
                                  "model": {"degree": 1}, "grid": {"x": [1.5, 3.0]}})
    grid = body["grid"]
    assert grid["fit"] == pytest.approx([4.0, 7.0], rel=1e-12)  # 1 + 2x
    for name in ("mean_lower", "mean_upper", "obs_lower", "obs_upper"):
        assert grid[name] == [None, None], name
    assert "no_residual_variance" in [w["code"] for w in body["warnings"]]
    assert "exact_fit" in [f["code"] for f in body["flags"]]
    again = _post(api, "/v1/predict", {"fitted_model": exact_line, "x": [1.5, 3.0]})
    assert [r["obs_upper"] for r in again["predictions"]] == grid["obs_upper"]


def test_a_nonlinear_curve_through_every_point_stores_sigma_zero(api):
    # y = 3.1 x / (0.7 + x) exactly (hand computation, no noise): the Michaelis-Menten fit
    # reproduces it to rounding (a residual SD of about 1e-16 before this rule), so, as a
    # polynomial's, its document stores sigma 0 and its grid and predictions give no
    # bands; the same curve with noise keeps them
    x = np.linspace(0.5, 6.5, 9)
    curve = 3.1 * x / (0.7 + x)
    model = {"family": "michaelis_menten"}
    exact = _post(api, "/v1/fit", {"x": x.tolist(), "y": curve.tolist(), "model": model,
                                    "grid": {"x": [1.0, 2.0]}})
    assert "exact_fit" in [f["code"] for f in exact["flags"]]
    assert exact["fitted_model"]["sigma"] == 0.0
    assert exact["grid"]["fit"] == pytest.approx([3.1 / 1.7, 6.2 / 2.7], rel=1e-9)
    assert exact["grid"]["obs_lower"] == [None, None]
    assert "no_residual_variance" in [w["code"] for w in exact["warnings"]]
    again = _post(api, "/v1/predict", {"fitted_model": exact["fitted_model"], "x": [1.0]})
    assert again["intervals_withheld"]["code"] == "no_residual_variance"
    rng = np.random.default_rng(11)
    noisy = _post(api, "/v1/fit", {"x": x.tolist(), "model": model, "grid": {"x": [1.0]},
                                    "y": (curve + rng.normal(0, 0.01, x.size)).tolist()})
    assert noisy["fitted_model"]["sigma"] > 0
    assert noisy["grid"]["obs_lower"][0] < noisy["grid"]["fit"][0]
