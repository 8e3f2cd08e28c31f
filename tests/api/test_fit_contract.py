"""/v1/fit success answers: every section and field of the contract, checked against outside
references (NIST StRD certified values; statsmodels and numpy as oracles on seeded data).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

from tests.api.helpers import fit_ok as fit
from tests.api.helpers import seeded_quadratic
from tests.conftest import load_nist

SECTIONS = ("coefficients", "anova", "statistics", "selection", "diagnostics", "grid",
            "fitted_model")


def digits(value: float, certified: float) -> float:
    """-log10 relative error (the NIST StRD 'log relative error'), 17 when identical."""
    if value == certified:
        return 17.0
    return -math.log10(abs(value - certified) / abs(certified))


@pytest.fixture(scope="module")
def seeded():
    return seeded_quadratic()


@pytest.mark.parametrize("name", ["pontius", "filip"])
def test_nist_certified_values_through_the_api(client, name):
    # Source: NIST/ITL StRD linear least squares, certified values (../shared/reference).
    ref = load_nist(name)
    cert = ref["certified"]
    out = fit(client, {"x": ref["data"]["x"], "y": ref["data"]["y"],
                       "model": {"degree": ref["polynomial_degree"]}, "grid": None})
    got = [c["estimate"] for c in out["coefficients"]]
    sds = [c["std_error"] for c in out["coefficients"]]
    for value, certified in zip(got + sds, cert["coefficients"] + cert["coefficient_sd"],
                                strict=True):
        assert digits(value, certified) >= 11, (value, certified)
    stats = out["statistics"]
    assert digits(stats["sigma"], cert["residual_sd"]) >= 11
    assert digits(stats["r_squared"], cert["r_squared"]) >= 11
    residual = out["anova"][-1]
    assert residual["term"] == "residual"
    assert residual["df"] == cert["anova"]["residual"]["df"]
    assert digits(residual["sum_of_squares"], cert["anova"]["residual"]["sum_sq"]) >= 11
    regression_ss = sum(row["sum_of_squares"] for row in out["anova"][:-1])
    assert digits(regression_ss, cert["anova"]["regression"]["sum_sq"]) >= 11
    assert digits(stats["f"], cert["anova"]["regression"]["f"]) >= 11


def test_floats_round_trip_exactly_through_json(client, seeded):
    # The JSON layer must not lose precision: the API's numbers are bit-identical to the
    # core's on the same input (orjson writes the shortest repr that round-trips).
    from service.core import FitOptions, ModelSpec, fit_series

    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2},
                       "include": ["coefficients", "statistics"]})
    report = fit_series(x, y, model=ModelSpec(degree=2),
                        options=FitOptions(include=frozenset({"coefficients", "statistics"})))
    for sent, core in zip(out["coefficients"], report.coefficients, strict=True):
        assert sent["estimate"] == core.estimate and sent["std_error"] == core.std_error
    assert out["statistics"]["sigma"] == report.statistics.sigma


def test_ordinary_fit_matches_statsmodels(client, seeded):
    # Oracle: statsmodels OLS on the raw powers of x (general-purpose library).
    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2},
                       "level": 0.9})
    ols = sm.OLS(y, np.vander(x, 3, increasing=True)).fit()
    ci = ols.conf_int(alpha=0.1)
    assert [c["term"] for c in out["coefficients"]] == ["intercept", "x", "x^2"]
    for i, c in enumerate(out["coefficients"]):
        assert c["estimate"] == pytest.approx(ols.params[i], rel=1e-9)
        assert c["std_error"] == pytest.approx(ols.bse[i], rel=1e-9)
        assert c["t"] == pytest.approx(ols.tvalues[i], rel=1e-9)
        assert c["p_value"] == pytest.approx(ols.pvalues[i], rel=1e-6, abs=1e-300)
        assert (c["lower"], c["upper"]) == pytest.approx(tuple(ci[i]), rel=1e-9)
    stats = out["statistics"]
    assert stats["r_squared"] == pytest.approx(ols.rsquared, rel=1e-10)
    assert stats["adj_r_squared"] == pytest.approx(ols.rsquared_adj, rel=1e-10)
    assert stats["df_residual"] == ols.df_resid
    assert stats["aic"] == pytest.approx(ols.aic, rel=1e-10)
    assert stats["bic"] == pytest.approx(ols.bic, rel=1e-10)
    # Sequential table: the x row is the explained SS of the straight-line fit
    # (statsmodels OLS), x^2 the further reduction; the residual row is the OLS residual SS.
    line = sm.OLS(y, np.vander(x, 2, increasing=True)).fit()
    assert [r["term"] for r in out["anova"]] == ["x", "x^2", "residual"]
    assert out["anova"][0]["sum_of_squares"] == pytest.approx(line.ess, rel=1e-9)
    assert out["anova"][1]["sum_of_squares"] == pytest.approx(line.ssr - ols.ssr, rel=1e-8)
    assert out["anova"][2]["sum_of_squares"] == pytest.approx(ols.ssr, rel=1e-9)
    assert out["anova"][2]["df"] == ols.df_resid and "f" not in out["anova"][2]


def test_weighted_fit_matches_statsmodels_wls(client, seeded):
    # Oracle: statsmodels WLS (weights = inverse variances).
    x, y, w = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "weights": w.tolist(),
                       "model": {"degree": 2}, "include": ["coefficients"]})
    wls = sm.WLS(y, np.vander(x, 3, increasing=True), weights=w).fit()
    for i, c in enumerate(out["coefficients"]):
        assert c["estimate"] == pytest.approx(wls.params[i], rel=1e-9)
        assert c["std_error"] == pytest.approx(wls.bse[i], rel=1e-9)


def test_no_intercept_uses_uncentred_r_squared(client):
    # Source: NIST StRD NoInt1 certified values (uncentred R^2 without intercept).
    ref = load_nist("noint1")
    out = fit(client, {"x": ref["data"]["x"], "y": ref["data"]["y"],
                       "model": {"degree": 1, "intercept": False}, "grid": None})
    assert [c["term"] for c in out["coefficients"]] == ["x"]
    assert digits(out["statistics"]["r_squared"], ref["certified"]["r_squared"]) >= 11
    assert out["statistics"]["centred"] is False


# fields the schema documents for the nonlinear families only (and their model summary)
NONLINEAR_ONLY = {"fit_info", "correlation", "expression", "comparison",
                  "derived", "scale"}


def test_every_section_and_field_is_present(client, seeded):
    from schemas.fit_response import FitResponseSchema

    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"max_degree": 4}})
    schema = FitResponseSchema()
    expected = set(schema.fields) - NONLINEAR_ONLY
    assert set(out) == expected, set(out) ^ expected
    for name in ("statistics", "selection", "diagnostics", "grid", "model"):
        nested = set(schema.fields[name].schema.fields) - NONLINEAR_ONLY
        assert set(out[name]) == nested, (name, set(out[name]) ^ nested)
    for name in ("coefficients", "anova"):
        nested = schema.fields[name].inner.schema
        for row in out[name]:
            assert set(row) <= set(nested.fields)
    assert out["n"] == 40 and out["n_input"] == 40 and out["dropped"] == []
    assert len(out["grid"]["x"]) == 200  # default grid: 200 points over the data range
    assert out["grid"]["x"][0] == pytest.approx(x.min()) and out["grid"]["x"][-1] == pytest.approx(
        x.max())
    assert out["fitted_model"]["schema_version"] >= 1 and "checksum" in out["fitted_model"]
    assert isinstance(out["warnings"], list) and isinstance(out["flags"], list)


def test_selection_trail_is_hierarchical_and_matches_sequential_f(client, seeded):
    # Oracle: the sequential F test of the top term, from statsmodels compare_f_test.
    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(),
                       "model": {"max_degree": 4, "select": "sequential_f", "alpha": 0.05},
                       "include": ["selection"]})
    selection = out["selection"]
    assert [c["degree"] for c in selection["candidates"]] == [1, 2, 3, 4]
    fits = [sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit() for d in range(1, 5)]
    for d in (2, 3, 4):
        f, p, _ = fits[d - 1].compare_f_test(fits[d - 2])
        row = selection["candidates"][d - 1]
        assert row["f_last"] == pytest.approx(f, rel=1e-7)
        assert row["p_last"] == pytest.approx(p, rel=1e-6)
    assert out["model"]["degree"] == selection["chosen_degree"]
    assert out["model"]["terms"] == ["intercept"] + ["x" if k == 1 else f"x^{k}"
                                                     for k in range(1, out["model"]["degree"] + 1)]


@pytest.mark.parametrize("method", ["aic", "aicc", "bic", "press", "adj_r2"])
def test_criterion_selection_picks_the_best_candidate(client, seeded, method):
    # Common practice: the criterion-minimizing (adj_r2: maximizing) candidate is chosen.
    x, y, _ = seeded
    out = fit(client, {"x": x.tolist(), "y": y.tolist(),
                       "model": {"max_degree": 4, "select": method}, "include": ["selection"]})
    key = "adj_r_squared" if method == "adj_r2" else method
    values = {c["degree"]: c[key] for c in out["selection"]["candidates"]}
    best = (max if method == "adj_r2" else min)(values, key=values.get)
    assert out["selection"]["method"] == method
    assert out["selection"]["chosen_degree"] == best


def test_grid_forms_and_bands_against_statsmodels(client, seeded):
    # Oracle: statsmodels get_prediction (mean and observation intervals).
    x, y, _ = seeded
    base = {"x": x.tolist(), "y": y.tolist(), "model": {"degree": 2}, "include": ["grid"]}
    step = fit(client, {**base, "grid": {"start": 1.0, "stop": 2.0, "step": 0.25}})["grid"]
    assert step["x"] == pytest.approx([1.0, 1.25, 1.5, 1.75, 2.0])
    count = fit(client, {**base, "grid": {"start": 0.0, "stop": 1.0, "count": 3}})["grid"]
    assert count["x"] == pytest.approx([0.0, 0.5, 1.0])
    explicit = fit(client, {**base, "grid": {"x": [-1.0, 5.0, 20.0]}})["grid"]
    assert explicit["x"] == [-1.0, 5.0, 20.0]
    assert explicit["extrapolated"] == [True, False, True]
    pred = sm.OLS(y, np.vander(x, 3, increasing=True)).fit().get_prediction(
        np.vander(np.array([-1.0, 5.0, 20.0]), 3, increasing=True)).summary_frame(alpha=0.05)
    assert explicit["fit"] == pytest.approx(pred["mean"].to_list(), rel=1e-9)
    assert explicit["mean_lower"] == pytest.approx(pred["mean_ci_lower"].to_list(), rel=1e-9)
    assert explicit["obs_upper"] == pytest.approx(pred["obs_ci_upper"].to_list(), rel=1e-9)
    assert "grid" in fit(client, {**base, "grid": None}) and fit(
        client, {**base, "grid": None})["grid"] is None
