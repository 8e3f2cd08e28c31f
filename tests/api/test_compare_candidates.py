"""Choosing between candidate models (model.candidates) over POST /v1/fit, each number
against an outside oracle: statsmodels (nested polynomial F tests, information criteria)
and the candidates' own single fits."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from tests.api.helpers import assert_problem, post_json

MM = {"family": "expression", "expression": "vmax*x/(km + x)",
      "parameters": {"vmax": 10, "km": 1}}
RISE = {"family": "expression", "expression": "a*(1 - exp(-k*x))",
        "parameters": {"a": 10, "k": 0.5}}


@pytest.fixture
def kinetics():
    rng = np.random.default_rng(5)
    x = np.repeat(0.25 * 2.0 ** np.arange(8), 2)
    return x, 12 * x / (2.5 + x) + rng.normal(0, 0.25, x.size)


def _fit(client, body):
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200, res.data[:500]
    return res.get_json()


def test_the_table_repeats_each_candidates_own_fit_and_the_smallest_aicc_wins(client, kinetics):
    x, y = kinetics
    data = {"x": x.tolist(), "y": y.tolist(), "grid": None}
    out = _fit(client, {**data, "model": {"candidates": [RISE, MM, {"degree": 2}]}})
    rows = out["comparison"]["candidates"]
    singles = [_fit(client, {**data, "model": m}) for m in (RISE, MM, {"degree": 2})]
    for row, single in zip(rows, singles, strict=True):
        for key in ("rss", "aic", "aicc", "bic", "sigma", "df_residual", "n_parameters"):
            assert row[key] == pytest.approx(single["statistics"][key], rel=1e-12), key
    aicc = [r["aicc"] for r in rows]
    assert out["comparison"]["chosen_index"] == int(np.argmin(aicc))
    chosen = singles[int(np.argmin(aicc))]
    assert out["coefficients"] == chosen["coefficients"]      # the answer reports the winner
    assert "smallest AICc" in out["comparison"]["reason"]
    assert out["comparison"]["chosen"] in out["comparison"]["reason"]


def test_nested_polynomials_get_statsmodels_f_tests_and_the_walk_stops_there(client):
    # Oracle: statsmodels OLS compare_f_test between the nested polynomial fits.
    rng = np.random.default_rng(9)
    x = np.linspace(0, 4, 25)
    y = 1 + 0.8 * x - 0.3 * x * x + rng.normal(0, 0.2, x.size)
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "grid": None, "model": {
        "select": "f_test", "candidates": [{"degree": 1}, {"degree": 2}, {"degree": 3}]}})
    fits = {d: sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit() for d in (1, 2, 3)}
    tests = {(t["simpler"], t["richer"]): t for t in out["comparison"]["nested_tests"]}
    for small, big in ((1, 2), (1, 3), (2, 3)):
        f, p, dfn = fits[big].compare_f_test(fits[small])
        t = tests[(f"polynomial degree {small}", f"polynomial degree {big}")]
        assert t["f"] == pytest.approx(f, rel=1e-9) and t["p_value"] == pytest.approx(p, rel=1e-7)
        assert t["df_numerator"] == dfn
    assert out["comparison"]["chosen"] == "polynomial degree 2"   # 1->2 significant, 2->3 not
    assert "does not improve" in out["comparison"]["reason"]


def test_a_candidate_that_cannot_be_fitted_is_reported_not_fatal(client, kinetics):
    x, y = kinetics
    broken = {"family": "expression", "expression": "a*x/(b - b)", "parameters": {"a": 1,
                                                                               "b": 1}}
    out = _fit(client, {"x": x.tolist(), "y": y.tolist(), "model": {"candidates": [MM, broken]}})
    rows = out["comparison"]["candidates"]
    assert rows[1]["error"] and rows[1]["converged"] is False and rows[1]["rss"] is None
    assert out["comparison"]["chosen_index"] == 0


@pytest.mark.parametrize(("model", "field"), [
    ({"candidates": [MM]}, "model.candidates"),
    ({"candidates": [MM, {"candidates": [MM, RISE]}]}, "model.candidates[1].candidates"),
    ({"candidates": [MM, RISE], "select": "r2"}, "model.select"),
    ({"candidates": [MM, {**RISE, "expression": "a*(1-exp(-k*x)"}]},
     "model.candidates[1].expression"),
    ({"candidates": [MM, {"degree": 99}]}, "model.candidates[1].degree"),
])
def test_bad_comparisons_are_refused_naming_the_field(client, kinetics, model, field):
    x, y = kinetics
    res = post_json(client, "/v1/fit", {"x": x.tolist(), "y": y.tolist(), "model": model})
    assert res.status_code == 422, res.data[:300]
    body = assert_problem(res, 422, res.get_json()["code"])
    assert any(key.startswith(field) for key in body["errors"]), body["errors"]


def test_when_no_candidate_fits_every_candidates_error_is_named(client):
    """3 points cannot determine logistic4's 4 or logistic5's 5 parameters (a count, no
    reference needed): the problem names both, each under model.candidates[i] with its fix."""
    res = post_json(client, "/v1/fit", {"x": [1, 2, 3], "y": [1, 2, 4], "model": {
        "candidates": [{"family": "logistic4"}, {"family": "logistic5"}]}})
    body = assert_problem(res, 422, "unfittable_input", "model.candidates")
    for i, (family, p) in enumerate((("logistic4", 4), ("logistic5", 5))):
        (entry,) = body["errors"][f"model.candidates[{i}]"]
        assert entry.startswith(f"{family}, field x:"), entry
        assert f"cannot determine {p} parameters" in entry and "To fix:" in entry, entry
        assert f"Candidate {i}, {family}" in body["detail"], body["detail"]
