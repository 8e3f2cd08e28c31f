"""The weight of a new reading in /v1/predict's observation band and /v1/invert's intervals.

A weighted fit stores sigma^2, the variance of a reading of weight 1; a new reading of
weight w has variance sigma^2 / w (inverse-variance weights: common practice, e.g. 1/y^2
for an assay whose SD grows in proportion to the signal). Oracles: statsmodels WLS
(parameters, covariance, scale, se of the fitted mean) with scipy's t quantile, and the
textbook formulas written out by hand beside each check. The calibration series are
seeded invented data (demo designs), not reference values.
"""

from __future__ import annotations

import numpy as np
import orjson
import pytest
import statsmodels.api as sm
from scipy import stats

from service.core import ModelSpec, fit_series
from service.core.models.curve_inverse import invert_curve
from service.core.models.curve_reader import CurveReader


def _post(api, path, body):
    return api.post(path, data=orjson.dumps(body), content_type="application/json")


def _assay():
    """A straight-line assay whose SD is 5% of the signal (seeded demo data)."""
    rng = np.random.default_rng(20261205)
    x = np.repeat([0.5, 1.0, 2.0, 5.0, 10.0, 20.0], 3)
    y = (0.05 + 0.1 * x) * (1 + 0.05 * rng.standard_normal(x.size))
    return x, y


@pytest.fixture(scope="module")
def line(api):
    x, y = _assay()
    response = _post(api, "/v1/fit", {"x": x.tolist(), "y": y.tolist(),
                                      "weights": (1 / y**2).tolist(), "model": {"degree": 1}})
    assert response.status_code == 200, response.get_json()
    wls = sm.WLS(y, sm.add_constant(x), weights=1 / y**2).fit()
    return response.get_json()["fitted_model"], wls


def test_predict_obs_band_uses_the_weight_of_each_new_reading(api, line):
    doc, wls = line
    at, weights, m = np.array([1.0, 2.5, 10.0]), np.array([16.0, 1.0, 0.25]), 2
    body = _post(api, "/v1/predict", {"fitted_model": doc, "x": at.tolist(),
                                      "weights": weights.tolist(), "replicates": m}).get_json()
    rows = body["predictions"]
    # hand computation (common practice): half-width t_{0.975, df} sqrt(se_mean^2 +
    # sigma^2 / (m w)), se_mean and sigma^2 from statsmodels WLS
    se_mean = wls.get_prediction(sm.add_constant(at)).se_mean
    half = stats.t.ppf(0.975, wls.df_resid) * np.sqrt(se_mean**2 + wls.scale / (m * weights))
    np.testing.assert_allclose([r["obs_upper"] - r["fit"] for r in rows], half, rtol=1e-9)
    np.testing.assert_allclose([r["fit"] - r["obs_lower"] for r in rows], half, rtol=1e-9)
    # the mean and simultaneous bands do not depend on a new reading's weight
    plain = _post(api, "/v1/predict", {"fitted_model": doc, "x": at.tolist(),
                                       "replicates": m}).get_json()["predictions"]
    for column in ("fit", "se_mean", "mean_lower", "band_upper"):
        assert [r[column] for r in rows] == [r[column] for r in plain]
    assert rows[1]["obs_upper"] == pytest.approx(plain[1]["obs_upper"], rel=1e-14)


def _weighted_fieller(wls, y0, m, w, level=0.95):
    """Straight-line classical interval by hand: the x where (b0 + b1 x - y0)^2 =
    q^2 (sigma^2 / (m w) + var(b0 + b1 x)) (Eisenhart's inversion of the prediction band,
    Draper & Smith sec. 3.2, from memory; the weight in the new reading's variance is the
    inverse-variance convention, common practice)."""
    (b0, b1), cov, s2 = wls.params, wls.cov_params(), wls.scale
    q2 = stats.t.ppf(0.5 + level / 2, wls.df_resid) ** 2
    a = b1**2 - q2 * cov[1, 1]
    b = 2 * b1 * (b0 - y0) - 2 * q2 * cov[0, 1]
    c = (b0 - y0) ** 2 - q2 * (s2 / (m * w) + cov[0, 0])
    return np.sort(np.roots([a, b, c]).real)


def test_invert_interval_uses_the_weight_of_each_reading(api, line):
    doc, wls = line
    y = [0.25, 0.25, 1.0]
    weights, m = [1 / 0.25**2, 1.0, 1.0], [1, 1, 3]
    body = _post(api, "/v1/invert", {"fitted_model": doc, "y": y, "weights": weights,
                                     "replicates": m}).get_json()
    for row, y0, w, k in zip(body["estimates"], y, weights, m, strict=True):
        lo, hi = _weighted_fieller(wls, y0, k, w)
        assert row["status"] == "ok"
        np.testing.assert_allclose([row["lower"], row["upper"]], [lo, hi], rtol=1e-9)
    at_quarter, at_one = body["estimates"][0], body["estimates"][1]
    # at y = 0.25 with 1/y^2 weights the reading's SD is sigma/4: about 4x narrower
    ratio = (at_one["upper"] - at_one["lower"]) / (at_quarter["upper"] - at_quarter["lower"])
    assert 3.0 < ratio < 4.0


def test_weights_of_one_give_the_unweighted_answer_exactly(api, line):
    doc, _ = line
    y = [0.2, 0.7, 1.5]
    plain = _post(api, "/v1/invert", {"fitted_model": doc, "y": y}).get_json()
    ones = _post(api, "/v1/invert", {"fitted_model": doc, "y": y,
                                     "weights": [1, 1, 1]}).get_json()
    assert ones == plain


def test_known_sd_fit_takes_the_new_readings_sd(api):
    # known SDs: sigma is 1 and a new reading's weight is 1/sd^2 of that reading; the band is
    # fit +- z sqrt(se_mean^2 + sd^2) with z the normal quantile (common practice)
    x, y = _assay()
    sd = 0.05 * y
    fit = _post(api, "/v1/fit", {"x": x.tolist(), "y": y.tolist(), "weights": (1 / sd**2)
                                 .tolist(), "weighting": "known_sd", "model": {"degree": 1}})
    assert fit.status_code == 200, fit.get_json()
    new_sd = np.array([0.01, 0.05])
    rows = _post(api, "/v1/predict", {"fitted_model": fit.get_json()["fitted_model"],
                                      "x": [1.0, 10.0], "weights": (1 / new_sd**2).tolist()}
                 ).get_json()["predictions"]
    se = np.array([r["se_mean"] for r in rows])
    half = stats.norm.ppf(0.975) * np.sqrt(se**2 + new_sd**2)
    np.testing.assert_allclose([r["obs_upper"] - r["fit"] for r in rows], half, rtol=1e-9)


@pytest.fixture(scope="module")
def logistic():
    rng = np.random.default_rng(7)
    x = np.repeat(np.geomspace(0.05, 50, 7), 3)
    mu = 0.1 + (2.0 - 0.1) / (1 + (x / 2.0) ** -1.3)
    y = mu * (1 + 0.04 * rng.standard_normal(x.size))
    return fit_series(x, y, 1 / y**2, model=ModelSpec(family="logistic4", scale="log"))


def test_nonlinear_bands_and_intervals_use_the_weight(api, logistic):
    from service.core.models.curve_document import to_curve_document
    doc = to_curve_document(logistic.model)
    at, weights = [0.5, 5.0], [1 / 0.5**2, 1 / 1.5**2]
    rows = _post(api, "/v1/predict", {"fitted_model": doc, "x": at, "weights": weights}
                 ).get_json()["predictions"]
    sigma, df = logistic.statistics.sigma, logistic.statistics.df_residual
    se = np.array([r["se_mean"] for r in rows])
    # hand computation: t_{0.975, df} sqrt(se_mean^2 + sigma^2 / w) (delta method se_mean)
    half = stats.t.ppf(0.975, df) * np.sqrt(se**2 + sigma**2 / np.array(weights))
    np.testing.assert_allclose([r["obs_upper"] - r["fit"] for r in rows], half, rtol=1e-9)
    y0, w0 = 0.8, 1 / 0.8**2
    one = _post(api, "/v1/invert", {"fitted_model": doc, "y": [y0], "weights": [w0]}
                ).get_json()["estimates"][0]
    assert one["status"] == "ok"
    # the limits are where the observation band (same weight) reaches the reading
    edges = _post(api, "/v1/predict", {"fitted_model": doc, "x": [one["lower"], one["upper"]],
                                       "weights": [w0, w0]}).get_json()["predictions"]
    np.testing.assert_allclose([edges[0]["obs_upper"], edges[1]["obs_lower"]], [y0, y0],
                               rtol=1e-8)


def test_batched_and_single_nonlinear_paths_agree_with_weights(logistic):
    fitted = logistic.model
    y = np.array([0.3, 0.8, 1.2, 1.8, 0.8])
    m = np.array([1, 2, 1, 3, 2])
    w = 1 / y**2
    batched = invert_curve(fitted, y, replicates=m, weights=w).estimates
    reader = CurveReader(fitted, fitted.level)
    for got, y0, k, g in zip(batched, y, m, w, strict=True):
        want = reader.read(float(y0), int(k), float(g))
        assert got.status == want.status
        np.testing.assert_allclose([got.x, got.lower, got.upper],
                                   [want.x, want.lower, want.upper], rtol=1e-10)
    # the weight changed the answer (a weight-blind path would not)
    plain = invert_curve(fitted, y, replicates=m).estimates
    assert all(a.upper - a.lower != b.upper - b.lower for a, b in zip(batched, plain,
                                                                        strict=True))


@pytest.mark.parametrize("path, count_field, weights, field, words", [
    ("/v1/predict", "x", [1.0, -2.0], "weights[1]", "> 0"),
    ("/v1/predict", "x", [1.0], "weights", "one weight per x"),
    ("/v1/invert", "y", [1.0, 0.0], "weights[1]", "> 0"),
    ("/v1/invert", "y", [1.0, None], "weights[1]", "null is not a weight"),
    ("/v1/invert", "y", [1.0, 2.0, 3.0], "weights", "one weight per reading"),
])
def test_bad_weights_get_422_naming_the_element_and_the_fix(api, line, path, count_field,
                                                           weights, field, words):
    doc, _ = line
    response = _post(api, path, {"fitted_model": doc, count_field: [0.5, 1.0],
                                 "weights": weights})
    assert response.status_code == 422, response.get_json()
    errors = response.get_json()["errors"]
    assert field in errors and words in " ".join(errors[field]), errors
