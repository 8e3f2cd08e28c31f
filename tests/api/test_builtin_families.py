"""The built-in families over HTTP: each fits with no start values, /v1/families documents
its equation and parameters, and the options (scale, fixed, starts, bounds) do what they
say. Oracles: scipy.optimize.curve_fit from the true values (estimates and covariance),
the expression family with the derived quantity written in as a parameter (its Wald and
profile limits), and the equation identities stated beside each check."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

from schemas.builtin import BUILTIN_PARAMETERS
from tests.api.helpers import assert_problem, post_json
from tests.core.nonlinear import builtin_simulation as sim
from tests.core.nonlinear.builtin_designs import log4

FAMILIES = list(BUILTIN_PARAMETERS)


def _fit(client, body):
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200, res.data[:500]
    return res.get_json()


def _case(family: str) -> sim.Case:
    """A seeded invented series of ``family`` (see builtin_simulation.py for the designs)."""
    return sim.cases(family, 1, 7)[0]


@pytest.mark.parametrize("family", FAMILIES)
def test_each_family_fits_without_start_values(client, family):
    # Oracle: curve_fit started at the true values, tight tolerances (estimates, covariance).
    case = _case(family)
    model = {"family": family} if case.scale is None else {"family": family,
                                                            "scale": case.scale}
    out = _fit(client, {"x": case.x.tolist(), "y": case.y.tolist(), "model": model,
                        "grid": {"count": 20}})
    info = out["fit_info"]
    assert info["converged"] and info["started_from"] == "automatic", info
    assert info["starts_tried"] >= 1 and info["start_strategy"] != "given"
    assert out["model"]["terms"] == list(BUILTIN_PARAMETERS[family])
    popt, pcov = optimize.curve_fit(case.curve, case.x, case.y, p0=case.truth, xtol=1e-14,
                                    ftol=1e-14, gtol=1e-14, maxfev=20000)
    est = np.array([c["estimate"] for c in out["coefficients"]])
    se = np.array([c["std_error"] for c in out["coefficients"]])
    np.testing.assert_allclose(est, popt, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(se, np.sqrt(np.diag(pcov)), rtol=1e-5)
    grid = np.array(out["grid"]["x"])  # the fitted equation is the numpy curve of the family
    np.testing.assert_allclose(out["grid"]["fit"], case.curve(grid, *est), rtol=1e-12)


def test_families_documents_each_equation_and_parameter(client):
    listed = {f["name"]: f for f in client.get("/v1/families").get_json()["families"]}
    for family in FAMILIES:
        entry = listed[family]
        assert entry["equation"].startswith("y = ")
        assert [p["name"] for p in entry["parameters"]] == list(BUILTIN_PARAMETERS[family])
        for parameter in entry["parameters"]:
            assert parameter["name"] in entry["equation"]
            assert parameter["meaning"] and parameter["constraint"]
        options = {o["name"] for o in entry["options"]}
        assert {"family", "parameters", "lower", "upper", "fixed"} <= options
    assert {o["name"] for o in listed["logistic4"]["options"]} >= {"scale"}
    assert "(scale log)" in listed["logistic4"]["equation"]
    assert listed["expression"]["equation"] is None and listed["expression"]["parameters"] == []


def test_half_life_equals_the_expression_family_fitted_in_half_lives(client):
    # Oracle: the same curve written with the half-life as its parameter,
    # plateau + (y0 - plateau)*exp(-ln 2/half_life*x), fitted by the expression family:
    # its Wald standard error and profile limits are the derived row's (delta method and
    # profile likelihood are exact under this reparameterization).
    case = _case("exponential")
    body = {"x": case.x.tolist(), "y": case.y.tolist(), "grid": None}
    out = _fit(client, {**body, "model": {"family": "exponential"}})
    (row,) = out["derived"]
    est = {c["term"]: c["estimate"] for c in out["coefficients"]}
    assert row["name"] == "half_life" and row["estimate"] == pytest.approx(
        math.log(2) / est["k"], rel=1e-12)
    direct = _fit(client, {**body, "model": {
        "family": "expression",
        "expression": f"plateau + (y0 - plateau)*exp(-{math.log(2)!r}/half_life*x)",
        "parameters": {"y0": est["y0"], "plateau": est["plateau"],
                       "half_life": row["estimate"]}}})
    other = direct["coefficients"][2]
    for key in ("estimate", "std_error", "lower", "upper"):
        assert row[key] == pytest.approx(other[key], rel=1e-6), key
    for key in ("profile_lower", "profile_upper"):
        assert row[key] == pytest.approx(other[key], rel=1e-5), key


def test_peak_width_at_half_maximum_equals_the_expression_family(client):
    # Oracle as above, with baseline + height*exp(-4 ln 2 (x - centre)^2/fwhm^2).
    case = _case("gaussian_peak")
    body = {"x": case.x.tolist(), "y": case.y.tolist(), "grid": None}
    out = _fit(client, {**body, "model": {"family": "gaussian_peak"}})
    (row,) = out["derived"]
    est = {c["term"]: c["estimate"] for c in out["coefficients"]}
    direct = _fit(client, {**body, "model": {
        "family": "expression",
        "expression": f"baseline + height*exp(-{4 * math.log(2)!r}*(x - centre)^2/fwhm^2)",
        "parameters": {"baseline": est["baseline"], "height": est["height"],
                       "centre": est["centre"], "fwhm": row["estimate"]}}})
    other = direct["coefficients"][3]
    for key in ("estimate", "std_error", "lower", "upper"):
        assert row[key] == pytest.approx(other[key], rel=1e-6), key
    for key in ("profile_lower", "profile_upper"):
        assert row[key] == pytest.approx(other[key], rel=1e-5), key


def test_a_fixed_value_is_written_into_the_fitted_equation(client):
    # Identity: plateau + (0 - plateau) exp(-k x) = plateau (1 - exp(-k x)); the expression
    # family fitting the latter from our estimates must agree to rounding.
    x = np.linspace(0.0, 10.0, 15)
    y = 8.0 * (1 - np.exp(-0.5 * x)) + np.random.default_rng(3).normal(0, 0.1, x.size)
    body = {"x": x.tolist(), "y": y.tolist(), "grid": None}
    out = _fit(client, {**body, "model": {"family": "exponential", "fixed": {"y0": 0}}})
    assert out["model"]["expression"] == "plateau + (0 - plateau)*exp(-k*x)"
    assert out["model"]["terms"] == ["plateau", "k"]
    start = {c["term"]: c["estimate"] for c in out["coefficients"]}
    same = _fit(client, {**body, "model": {"family": "expression",
                                           "expression": "plateau*(1 - exp(-k*x))",
                                           "parameters": start}})
    for a, b in zip(out["coefficients"], same["coefficients"], strict=True):
        assert a["estimate"] == pytest.approx(b["estimate"], rel=1e-8)
        assert a["std_error"] == pytest.approx(b["std_error"], rel=1e-7)


def test_given_start_values_and_bounds_override(client):
    case = _case("michaelis_menten")
    body = {"x": case.x.tolist(), "y": case.y.tolist(), "grid": None}
    auto = _fit(client, {**body, "model": {"family": "michaelis_menten"}})
    given = _fit(client, {**body, "model": {"family": "michaelis_menten",
                                            "parameters": {"vmax": 50.0, "km": 10.0}}})
    assert given["fit_info"]["started_from"] == "given"
    assert given["fit_info"]["start"] == [50.0, 10.0] and given["fit_info"]["starts_tried"] == 1
    for a, b in zip(auto["coefficients"], given["coefficients"], strict=True):
        assert a["estimate"] == pytest.approx(b["estimate"], rel=1e-8)
    partial = _fit(client, {**body, "model": {"family": "michaelis_menten",
                                              "parameters": {"km": 10.0}}})
    assert partial["fit_info"]["started_from"] == "automatic"
    assert partial["fit_info"]["start"][1] == 10.0
    km = auto["coefficients"][1]["estimate"]
    bounded = _fit(client, {**body, "model": {"family": "michaelis_menten",
                                              "lower": {"km": 2 * km}}})
    assert bounded["fit_info"]["bound_status"] == ["free", "lower"]
    assert bounded["coefficients"][1]["estimate"] == pytest.approx(2 * km, rel=1e-12)


def test_logistic4_scales_and_a_falling_curve(client):
    # Identity: y_right + (y_left - y_right)/(1 + (x/ec50)^slope) is unchanged by
    # (y_left, y_right, slope) -> (y_right, y_left, -slope); the answer uses slope > 0.
    x = np.repeat([0.0, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0], 3)
    rng = np.random.default_rng(11)
    y = log4(x, 5.0, 1.0, 1.2, 2.0) + rng.normal(0, 0.05, x.size)
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "grid": None,
                        "model": {"family": "logistic4"}})    # log scale, zero dose kept
    est = {c["term"]: c["estimate"] for c in out["coefficients"]}
    assert est["slope"] > 0 and est["y_left"] > est["y_right"]
    popt, _ = optimize.curve_fit(log4, x, y, p0=[5.0, 1.0, 1.2, 2.0], xtol=1e-14,
                                 ftol=1e-14, gtol=1e-14)
    np.testing.assert_allclose(list(est.values()), popt, rtol=1e-6)
    lin = _fit(client, {"x": x.tolist(), "y": y.tolist(), "grid": None,
                        "model": {"family": "logistic4", "scale": "linear"}})
    assert lin["model"]["expression"] == "y_right + (y_left - y_right)/(1 + exp(slope*(x - ec50)))"
    negative = post_json(client, "/v1/fit", {"x": [-1.0] + x.tolist()[1:], "y": y.tolist(),
                                             "model": {"family": "logistic4"}})
    assert_problem(negative, 422, "transform_domain", "x[0]")


def test_known_sd_weighting_for_a_built_in_family(client):
    # Oracle: curve_fit with sigma = the known SDs and absolute_sigma=True.
    case = _case("michaelis_menten")
    sd = 0.02 * case.truth[0] * (1 + case.x / case.x.max())
    out = _fit(client, {"x": case.x.tolist(), "y": case.y.tolist(), "grid": None,
                        "weights": (1 / sd ** 2).tolist(), "weighting": "known_sd",
                        "model": {"family": "michaelis_menten"}})
    popt, pcov = optimize.curve_fit(case.curve, case.x, case.y, p0=case.truth, sigma=sd,
                                    absolute_sigma=True, xtol=1e-14, ftol=1e-14, gtol=1e-14)
    np.testing.assert_allclose([c["estimate"] for c in out["coefficients"]], popt, rtol=1e-7)
    np.testing.assert_allclose([c["std_error"] for c in out["coefficients"]],
                               np.sqrt(np.diag(pcov)), rtol=1e-6)


@pytest.mark.parametrize(("model", "field", "code"), [
    ({"family": "exponential", "fixed": {"b": 0}}, "model.fixed", "validation_error"),
    ({"family": "power", "parameters": {"a": 1}}, "model.parameters", "validation_error"),
    ({"family": "exponential", "scale": "log"}, "model.scale", "validation_error"),
    ({"family": "logistic4", "scale": "log2"}, "model.scale", "validation_error"),
    ({"family": "exponential", "fixed": {"k": 1}, "lower": {"k": 0}}, "model.lower.k",
     "invalid_spec"),
    ({"family": "power", "fixed": {"coefficient": 1, "exponent": 2}}, "model.fixed",
     "invalid_spec"),
    ({"family": "power", "lower": {"exponent": 3}, "upper": {"exponent": 1}},
     "model.lower.exponent", "invalid_spec"),
    ({"family": "power", "parameters": {"exponent": 5}, "upper": {"exponent": 1}},
     "model.parameters.exponent", "invalid_spec"),
])
def test_unusable_options_are_refused_naming_the_field(client, model, field, code):
    res = post_json(client, "/v1/fit", {"x": [1, 2, 3, 4, 5], "y": [1, 4, 9, 16, 25],
                                        "model": model})
    assert_problem(res, 422, code, field)
