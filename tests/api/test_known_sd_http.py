"""Known measurement SDs over HTTP for polynomials: the answer, the document, predict, invert.

The numbers themselves are checked against statsmodels and scipy in
tests/core/test_known_sd_polynomial.py; here the wire: what is reported, that the
stored document carries the weighting, and that tampering with it is refused by name.
Oracle for the goodness-of-fit p-value: ``scipy.stats.chi2.sf`` on n - p df.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tests.api.helpers import assert_problem, post_json


def _body(sd_factor=1.0):
    rng = np.random.default_rng(11)
    x = np.repeat(np.linspace(1.0, 9.0, 9), 2)
    sd = 0.1 + 0.02 * x
    y = 0.3 + 1.1 * x + rng.normal(0.0, sd)
    return {"x": x.tolist(), "y": y.tolist(), "weights": (1 / (sd_factor * sd) ** 2).tolist(),
            "weighting": "known_sd", "model": {"degree": 1}, "grid": {"count": 9}}


def test_fit_reports_the_weighting_and_the_chi_square_test(client):
    res = post_json(client, "/v1/fit", _body())
    assert res.status_code == 200, res.data[:300]
    out = res.get_json()
    assert out["model"]["weighting"] == "known_sd"
    assert out["fitted_model"]["weighting"] == "known_sd"
    chi = next(t for t in out["diagnostics"]["tests"] if t["name"] == "chi_square_fit")
    rss = out["statistics"]["rss"]
    assert chi["statistic"] == pytest.approx(rss, rel=1e-12)
    assert chi["p_value"] == pytest.approx(stats.chi2.sf(rss, 18 - 2), rel=1e-9)
    relative = post_json(client, "/v1/fit", {**_body(), "weighting": "relative"}).get_json()
    assert relative["model"]["weighting"] == "relative"
    assert "weighting" not in relative["fitted_model"]
    # relative weights rescale by the residual SD; known SDs do not
    ratio = out["coefficients"][1]["std_error"] / relative["coefficients"][1]["std_error"]
    assert ratio == pytest.approx(1 / relative["statistics"]["sigma"], rel=1e-9)


def test_understated_sds_flag_the_fit(client):
    out = post_json(client, "/v1/fit", _body(sd_factor=0.3)).get_json()
    assert "chi_square_fit_failed" in {f["code"] for f in out["flags"]}


def test_stored_document_predicts_the_grid_and_inverts(client):
    out = post_json(client, "/v1/fit", _body()).get_json()
    doc, grid = out["fitted_model"], out["grid"]
    rows = post_json(client, "/v1/predict", {"fitted_model": doc, "x": grid["x"]}
                     ).get_json()["predictions"]
    for name in ("fit", "mean_lower", "obs_upper"):
        assert [r[name] for r in rows] == grid[name], name
    inv = post_json(client, "/v1/invert", {"fitted_model": doc, "y": [5.0]})
    assert inv.status_code == 200, inv.data[:300]


@pytest.mark.parametrize("field, value, code", [
    ("weighting", "relative", "invalid_document"),   # the schema knows only known_sd
    ("weighting", None, "invalid_document"),
    ("sigma", 0.9, "invalid_document"),              # known SDs mean sigma 1
    ("weighted", False, "invalid_document")])
def test_tampered_weighting_is_refused_by_name(client, field, value, code):
    doc = dict(post_json(client, "/v1/fit", _body()).get_json()["fitted_model"])
    doc[field] = value
    res = post_json(client, "/v1/predict", {"fitted_model": doc, "x": [2.0]})
    assert_problem(res, 422, code, f"fitted_model.{field}")


def test_dropping_the_weighting_is_caught_by_the_checksum(client):
    doc = dict(post_json(client, "/v1/fit", _body()).get_json()["fitted_model"])
    del doc["weighting"]  # it would silently turn the known SDs into relative weights
    res = post_json(client, "/v1/predict", {"fitted_model": doc, "x": [2.0]})
    assert_problem(res, 422, "invalid_document", "fitted_model.checksum")
