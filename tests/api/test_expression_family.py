"""The expression family over POST /v1/fit, each check against an outside oracle:
the polynomial family (itself held to NIST and statsmodels), scipy.optimize.curve_fit,
scipy.stats; and its refusals as problem+json naming the field."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, stats

from service.core import predict, read_document
from tests.api.helpers import assert_problem, post_json

FOUR_PL = "d + (a - d)/(1 + (x/c)^b)"


def _fit(client, body):
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200, res.data[:500]
    return res.get_json()


def _logistic(x, a, b, c, d):
    return d + (a - d) / (1 + (x / c) ** b)


@pytest.fixture
def assay():
    """Seeded 4-parameter logistic series (8 concentrations x 3 replicates)."""
    rng = np.random.default_rng(2024)
    x = np.repeat(np.geomspace(0.05, 50, 8), 3)
    y = _logistic(x, 0.1, 1.3, 2.0, 2.4) + rng.normal(0, 0.03, x.size)
    return x, y


def test_a_quadratic_written_as_an_expression_equals_the_polynomial_family(client):
    # Oracle: the polynomial family (held to NIST StRD and statsmodels elsewhere). A
    # quadratic is linear in its parameters, so both must agree to rounding: estimates,
    # standard errors, and the mean, new-observation and simultaneous bands.
    rng = np.random.default_rng(7)
    x = np.linspace(-2.0, 3.0, 30)
    y = 1.5 - 0.8 * x + 0.35 * x * x + rng.normal(0, 0.2, x.size)
    grid = {"x": [-2.5, 0.0, 1.7, 3.5]}
    poly = _fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2},
                         "grid": grid})
    expr = _fit(client, {"x": x.tolist(), "y": y.tolist(), "grid": grid, "model": {
        "family": "expression", "expression": "c0 + c1*x + c2*x^2",
        "parameters": {"c0": 0, "c1": 0, "c2": 0}}})
    for a, b in zip(poly["coefficients"], expr["coefficients"], strict=True):
        for key in ("estimate", "std_error", "t", "lower", "upper"):
            assert b[key] == pytest.approx(a[key], rel=1e-8, abs=1e-12), key
    for key in ("fit", "se_mean", "mean_lower", "mean_upper", "obs_lower", "obs_upper",
                "band_lower", "band_upper"):
        np.testing.assert_allclose(expr["grid"][key], poly["grid"][key], rtol=1e-8)
    assert expr["grid"]["extrapolated"] == [True, False, False, True]
    for key in ("rss", "sigma", "r_squared", "aic", "aicc", "bic", "log_likelihood"):
        assert expr["statistics"][key] == pytest.approx(poly["statistics"][key], rel=1e-8)
    # linear in the parameters: profile limits are the Wald limits
    for row in expr["coefficients"]:
        assert row["profile_lower"] == pytest.approx(row["lower"], rel=1e-6)
        assert row["profile_upper"] == pytest.approx(row["upper"], rel=1e-6)


def test_four_parameter_logistic_equals_curve_fit(client, assay):
    # Oracle: scipy.optimize.curve_fit (estimates and covariance, tight tolerances).
    x, y = assay
    start = {"a": 0.2, "b": 1.0, "c": 1.5, "d": 2.0}
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {
        "family": "expression", "expression": FOUR_PL, "parameters": start}})
    popt, pcov = optimize.curve_fit(_logistic, x, y, p0=list(start.values()), xtol=1e-14,
                                    ftol=1e-14, gtol=1e-14, maxfev=20000)
    est = np.array([c["estimate"] for c in out["coefficients"]])
    se = np.array([c["std_error"] for c in out["coefficients"]])
    np.testing.assert_allclose(est, popt, rtol=1e-6)
    np.testing.assert_allclose(se, np.sqrt(np.diag(pcov)), rtol=1e-6)
    corr = pcov / np.outer(np.sqrt(np.diag(pcov)), np.sqrt(np.diag(pcov)))
    np.testing.assert_allclose(out["correlation"], corr, rtol=1e-5, atol=1e-8)
    # p-values: two-sided Student t on n - p df (scipy.stats)
    df = x.size - 4
    for row in out["coefficients"]:
        assert row["p_value"] == pytest.approx(2 * stats.t.sf(abs(row["t"]), df), rel=1e-9)
        assert row["profile_lower_status"] == row["profile_upper_status"] == "found"
    assert out["fit_info"]["converged"] and out["fit_info"]["started_from"] == "given"
    assert {t["name"] for t in out["diagnostics"]["tests"]} >= {"shapiro_wilk",
                                                               "breusch_pagan", "durbin_watson"}
    assert out["diagnostics"]["lack_of_fit"] is not None      # replicated concentrations


def test_known_sd_weighting_uses_the_stated_errors(client, assay):
    # Oracle: curve_fit with sigma = the known SDs and absolute_sigma=True (covariance
    # (J'WJ)^-1, not rescaled); the goodness-of-fit p-value from scipy.stats.chi2.
    x, y = assay
    sd = np.full(x.size, 0.03)
    start = {"a": 0.2, "b": 1.0, "c": 1.5, "d": 2.0}
    body = {"x": x.tolist(), "y": y.tolist(), "weights": (1 / sd ** 2).tolist(),
            "weighting": "known_sd",
            "model": {"family": "expression", "expression": FOUR_PL, "parameters": start}}
    out = _fit(client, body)
    _, pcov = optimize.curve_fit(_logistic, x, y, p0=list(start.values()), sigma=sd,
                                 absolute_sigma=True, xtol=1e-14, ftol=1e-14, gtol=1e-14)
    se = np.array([c["std_error"] for c in out["coefficients"]])
    np.testing.assert_allclose(se, np.sqrt(np.diag(pcov)), rtol=1e-6)
    chi = next(t for t in out["diagnostics"]["tests"] if t["name"] == "chi_square_fit")
    assert chi["statistic"] == pytest.approx(out["statistics"]["rss"], rel=1e-12)
    assert chi["p_value"] == pytest.approx(stats.chi2.sf(chi["statistic"], x.size - 4), rel=1e-9)
    assert out["model"]["weighting"] == "known_sd"
    # the same data with SDs stated three times too small fail the test, and say so
    body["weights"] = (1 / (sd / 3) ** 2).tolist()
    bad = _fit(client, body)
    assert "chi_square_fit_failed" in {f["code"] for f in bad["flags"]}


def test_parameters_that_only_appear_as_a_product_are_flagged_not_fatal(client):
    x = np.linspace(1, 10, 12)
    y = 3.0 * x + np.random.default_rng(1).normal(0, 0.1, x.size)
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {
        "family": "expression", "expression": "a*b*x", "parameters": {"a": 1, "b": 2}}})
    codes = {f["code"]: f["severity"] for f in out["flags"]}
    assert codes.get("parameters_not_identifiable") == "serious"
    assert all(c["std_error"] is None for c in out["coefficients"])


def test_profile_limit_that_does_not_exist_is_null_and_flagged(client):
    # Saturation never reached: the data bound the plateau from below only.
    x = np.array([0.1, 0.2, 0.3, 0.4, 0.5, 0.6])
    y = 10 * x / (50 + x) + np.array([0.0004, -0.0003, 0.0002, -0.0004, 0.0003, -0.0001])
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {
        "family": "expression", "expression": "vmax*x/(km + x)",
        "parameters": {"vmax": 10, "km": 50}}})
    assert out["fit_info"]["converged"]
    vmax = out["coefficients"][0]
    assert "unbounded" in (vmax["profile_lower_status"], vmax["profile_upper_status"])
    side = "profile_upper" if vmax["profile_upper_status"] == "unbounded" else "profile_lower"
    assert vmax[side] is None
    assert "poorly_determined_parameter" in {f["code"] for f in out["flags"]}


@pytest.mark.parametrize("expression", [
    "__import__('os')", "x.real", "(lambda: 1)()", "[b for b in x]", "b if x else 1",
    "b**1e9", "(" * 300 + "b" + ")" * 300, "-" * 500 + "b", "b*x²", "gamma(x)*b", "b; x",
    "exp(x=b)",
])
def test_hostile_equations_are_refused_naming_the_field(client, expression):
    res = post_json(client, "/v1/fit", {"x": [1, 2, 3, 4], "y": [1, 2, 3, 4], "model": {
        "family": "expression", "expression": expression, "parameters": {"b": 1}}})
    body = assert_problem(res, 422, "invalid_expression", "model.expression")
    assert "column" in body["errors"]["model.expression"][0]


def test_an_equation_over_the_length_limit_is_refused_by_the_contract(client):
    res = post_json(client, "/v1/fit", {"x": [1, 2, 3], "y": [1, 2, 3], "model": {
        "family": "expression", "expression": "(" * 5000 + "b" + ")" * 5000,
        "parameters": {"b": 1}}})
    assert_problem(res, 422, "validation_error", "model.expression")


@pytest.mark.parametrize(("model", "extra", "field", "code"), [
    ({"expression": "b*exp(x)", "parameters": {"b": 1}}, {}, None, "invalid_spec"),
    ({"expression": "log(b*x)", "parameters": {"b": -1}}, {}, "model.parameters",
     "invalid_spec"),
    ({"expression": "b*x", "parameters": {"b": 1}, "lower": {"c": 0}}, {}, "model.lower",
     "validation_error"),
    ({"expression": "b*x", "parameters": {}}, {}, "model.parameters", "validation_error"),
    ({"expression": "b*x"}, {}, "model.parameters", "validation_error"),
])
def test_unusable_specs_are_refused_naming_the_field(client, model, extra, field, code):
    x = [1e300, 2e300, 3e300] if model["expression"] == "b*exp(x)" else [1, 2, 3, 4]
    body = {"x": x, "y": [1.0] * len(x), "model": {"family": "expression", **model}, **extra}
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 422, res.data[:300]
    assert_problem(res, 422, code, field)


@pytest.mark.parametrize("model", [{"max_degree": 2}, {"family": "michaelis_menten"},
                                   {"family": "expression", "expression": "a*x/(b+x)",
                                    "parameters": {"a": 3, "b": 2}}])
def test_known_sd_weighting_needs_the_sds(client, model):
    # without weights there are no known SDs to use: refused naming weights, for every family
    res = post_json(client, "/v1/fit", {"x": [1, 2, 3, 4, 5, 6], "y": [1, 1.8, 2.5, 2.9, 3.2, 3.4],
                                        "model": model, "weighting": "known_sd"})
    assert_problem(res, 422, "invalid_spec", "weights")


def test_families_describes_the_expression_family(client):
    listed = {f["name"]: f for f in client.get("/v1/families").get_json()["families"]}
    options = {o["name"] for o in listed["expression"]["options"]}
    assert {"family", "expression", "parameters", "lower", "upper"} <= options
    assert "equation" in listed["expression"]["description"]


def test_a_level_a_hair_below_one_keeps_finite_limits(client, assay):
    # Oracle: scipy.stats.t.isf of the upper tail (computed there without cancellation).
    x, y = assay
    level = 0.9999999999999999
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "level": level, "grid": {"count": 3},
                        "model": {"family": "expression", "expression": FOUR_PL,
                                  "parameters": {"a": 0.2, "b": 1.0, "c": 1.5, "d": 2.0}}})
    crit = stats.t.isf((1 - level) / 2, x.size - 4)
    row = out["coefficients"][0]
    assert row["upper"] == pytest.approx(row["estimate"] + crit * row["std_error"], rel=1e-9)
    assert all(v is not None for v in out["grid"]["mean_upper"])


def test_grid_points_where_the_equation_is_undefined_are_null_and_said(client):
    # log(x) is undefined for x <= 0 (a fact of arithmetic; numpy gives nan/-inf there), so the
    # fitted curve has no value at those grid points: they are null and a warning names them.
    x = np.linspace(1.0, 10.0, 12)
    y = 2.0 * np.log(x) + 1.0 + 0.05 * np.sin(np.arange(12))
    body = {"x": x.tolist(), "y": y.tolist(),
            "model": {"family": "expression", "expression": "a*log(x) + b",
                      "parameters": {"a": 1, "b": 0}},
            "grid": {"x": [-1, 0, 1, 2]}}
    out = _fit(client, body)
    assert out["grid"]["fit"][:2] == [None, None]
    assert np.allclose(out["grid"]["fit"][2:], np.polyval(
        np.polyfit(np.log(x), y, 1), np.log([1.0, 2.0])), rtol=1e-8)  # numpy oracle
    codes = {w["code"]: w["message"] for w in out["warnings"]}
    assert "non_finite_prediction" in codes
    assert "2 of the 4 points asked for (x = -1.0, 0.0)" in codes["non_finite_prediction"]
    assert list(codes).count("non_finite_prediction") == 1


def test_predict_counts_the_x_where_the_stored_equation_is_undefined(client):
    # log(x) has no finite value at x <= 0 (arithmetic); those rows are null and counted.
    x = np.linspace(1.0, 10.0, 12)
    y = 2.0 * np.log(x) + 1.0 + 0.05 * np.cos(np.arange(12))
    fitted = _fit(client, {"x": x.tolist(), "y": y.tolist(),
                           "model": {"family": "expression", "expression": "a*log(x) + b",
                                     "parameters": {"a": 1, "b": 0}}})["fitted_model"]
    res = post_json(client, "/v1/predict", {"fitted_model": fitted, "x": [-2, 0, 3]})
    assert res.status_code == 200, res.data[:300]
    body = res.get_json()
    assert [row["fit"] is None for row in body["predictions"]] == [True, True, False]
    assert body["undefined_count"] == 2 and body["extrapolated_count"] == 2
    # the core's prediction says the same count in its own notice (the fit's grid warning)
    notices = predict(read_document(fitted), [-2, 0, 3]).notices
    assert [n.code for n in notices] == ["non_finite_prediction"]
    assert "at 2 of the 3 points asked for (x = -2.0, 0.0)" in notices[0].message
