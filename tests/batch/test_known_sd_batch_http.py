"""POST /v1/batch with weighting "known_sd": every body form equals /v1/fit, bad input is named.

Reference for each fitted series: the service's own /v1/fit answer with the same data,
model and weighting (its known-SD numbers are checked against statsmodels and scipy in
tests/core/test_known_sd_polynomial.py and tests/api/test_expression_family.py). Polynomials
agree to 1e-10 relative, nonlinear fits to 1e-7 (the single fit's solver tolerance). The
data are seeded and invented (tests/batch/test_known_sd_batch_engine.py, curves_data.py).
"""

from __future__ import annotations

import io
from urllib.parse import quote

import numpy as np
import orjson
import pyarrow as pa
import pytest

from tests.api.helpers import assert_problem
from tests.batch.conftest import rel
from tests.batch.curves_data import SUBSTRATE
from tests.batch.test_known_sd_batch_engine import known_sd_series

ARROW = "application/vnd.apache.arrow.stream"
NDJSON = "application/x-ndjson"
POLY = {"max_degree": 3, "select": "aic"}
CURVE = {"family": "michaelis_menten"}


def _poly_series(count=8, seed=11):
    return [{"id": f"cal-{i}", "x": x.tolist(), "y": y.tolist(), "weights": w.tolist()}
            for i, (x, y, w) in enumerate(known_sd_series(count, seed))]


def _curve_series(count=4, seed=12, *, understate=False):
    """Seeded Michaelis-Menten series; with ``understate`` every third states its SDs three
    times too small (the chi-square test must fail there)."""
    rng = np.random.default_rng(seed)
    sd = 0.1 + 0.02 * SUBSTRATE
    out = []
    for i in range(count):
        vmax, km = 12.0 * np.exp(rng.normal(0, 0.1)), 5.0 * np.exp(rng.normal(0, 0.3))
        y = vmax * SUBSTRATE / (km + SUBSTRATE) + rng.normal(0, sd)
        stated = sd / 3 if understate and i % 3 == 2 else sd
        out.append({"id": i, "x": SUBSTRATE.tolist(), "y": y.tolist(),
                    "weights": (1 / stated ** 2).tolist()})
    return out


def _json(client, body):
    return client.post("/v1/batch", data=orjson.dumps(body), content_type="application/json")


def _ndjson(client, options, series):
    lines = [orjson.dumps({"options": options}), *map(orjson.dumps, series)]
    return client.post("/v1/batch", data=b"\n".join(lines), content_type=NDJSON)


def _arrow(client, series, options, *, accept=ARROW, weight=True):
    columns = {"id": [s["id"] for s in series for _ in s["x"]],
               "x": [v for s in series for v in s["x"]],
               "y": [v for s in series for v in s["y"]]}
    if weight:
        columns["weight"] = [v for s in series for v in s["weights"]]
    sink = io.BytesIO()
    table = pa.table(columns)
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return client.post("/v1/batch?options=" + quote(orjson.dumps(options).decode()),
                       data=sink.getvalue(), content_type=ARROW, headers={"Accept": accept})


def _single(client, s, model):
    res = client.post("/v1/fit", data=orjson.dumps(
        {"x": s["x"], "y": s["y"], "weights": s["weights"], "model": model, "grid": None,
         "weighting": "known_sd"}), content_type="application/json")
    assert res.status_code == 200, res.data[:300]
    return res.get_json()


def _chi(one):
    return next(t for t in one["diagnostics"]["tests"] if t["name"] == "chi_square_fit")


def _check_poly(fit, one):
    """A batch summary against the /v1/fit answer of the same series (oracle)."""
    assert fit["degree"] == one["model"]["degree"] and fit["terms"] == one["model"]["terms"]
    assert rel(fit["estimate"], [c["estimate"] for c in one["coefficients"]]) < 1e-10
    assert rel(fit["std_error"], [c["std_error"] for c in one["coefficients"]]) < 1e-10
    assert rel(fit["sigma"], one["statistics"]["sigma"]) < 1e-10
    assert rel(fit["selection"]["values"],
               [c["aic"] for c in one["selection"]["candidates"]]) < 1e-10
    chi = _chi(one)
    assert rel(fit["tests"]["chi_square_fit"], chi["statistic"]) < 1e-10
    assert rel(fit["tests"]["chi_square_fit_p"], chi["p_value"]) < 1e-10
    assert fit["flags"] == [{"code": f["code"], "severity": f["severity"]} for f in one["flags"]]


def test_json_and_ndjson_polynomial_batches_equal_single_fits(client):
    series = _poly_series()
    answer = _json(client, {"series": series, "model": POLY, "weighting": "known_sd"})
    assert answer.status_code == 200, answer.data[:300]
    results = answer.get_json()["results"]
    flagged = 0
    for s, result in zip(series, results, strict=True):
        assert result["status"] == "ok", result
        _check_poly(result["fit"], _single(client, s, POLY))
        flagged += "chi_square_fit_failed" in {f["code"] for f in result["fit"]["flags"]}
    assert flagged >= 2   # every third series states its SDs three times too small
    streamed = _ndjson(client, {"model": POLY, "weighting": "known_sd"}, series)
    lines = [orjson.loads(line) for line in streamed.data.splitlines()]
    assert [line["fit"] for line in lines[:-1]] == [r["fit"] for r in results]
    assert lines[-1]["summary"] == answer.get_json()["summary"]


def test_arrow_polynomial_batch_equals_single_fits(client):
    series = _poly_series(6, seed=13)
    table = pa.ipc.open_stream(_arrow(client, series, {"model": POLY,
                                                       "weighting": "known_sd"}).data).read_all()
    for s, row in zip(series, table.to_pylist(), strict=True):
        one = _single(client, s, POLY)
        assert row["status"] == "ok" and row["degree"] == one["model"]["degree"]
        for k, c in enumerate(one["coefficients"]):
            assert rel(row[f"coef_{k}"], c["estimate"]) < 1e-10
            assert rel(row[f"se_{k}"], c["std_error"]) < 1e-10
        for name in ("aic", "aicc", "bic"):   # the likelihood at the known variances
            assert rel(row[name], one["statistics"][name]) < 1e-10
        assert rel(row["chi_square_fit_p"], _chi(one)["p_value"]) < 1e-10
        assert row["flag_codes"] == ";".join(f["code"] for f in one["flags"])


def test_nonlinear_batches_equal_single_fits_in_every_body_form(client, compiled_only):
    # compiled_only: the batch may not fall back to the single fit (/v1/fit still uses it)
    series = _curve_series(6, understate=True)
    options = {"model": CURVE, "weighting": "known_sd"}
    answer = _json(client, {"series": series, **options})
    assert answer.status_code == 200, answer.data[:300]
    results = answer.get_json()["results"]
    flagged = 0
    for s, result in zip(series, results, strict=True):
        fit, one = result["fit"], _single(client, s, CURVE)
        assert result["status"] == "ok", result
        assert rel(fit["estimate"], [c["estimate"] for c in one["coefficients"]]) < 1e-7
        assert rel(fit["std_error"], [c["std_error"] for c in one["coefficients"]]) < 1e-7
        for name in ("aic", "aicc", "bic", "rss", "sigma"):
            assert rel(fit[name], one["statistics"][name]) < 1e-7
        assert rel(fit["tests"]["chi_square_fit"], _chi(one)["statistic"]) < 1e-7
        assert rel(fit["tests"]["chi_square_fit_p"], _chi(one)["p_value"]) < 1e-7
        assert fit["flags"] == [{"code": f["code"], "severity": f["severity"]}
                                for f in one["flags"]]
        flagged += "chi_square_fit_failed" in {f["code"] for f in fit["flags"]}
    assert flagged >= 2   # the series with understated SDs are caught
    streamed = _ndjson(client, options, series)
    lines = [orjson.loads(line) for line in streamed.data.splitlines()]
    assert [line["fit"] for line in lines[:-1]] == [r["fit"] for r in results]
    tabled = _arrow(client, series, options, accept="application/json")
    assert tabled.status_code == 200, tabled.data[:300]
    assert [r["fit"] for r in tabled.get_json()["results"]] == [r["fit"] for r in results]
    table = pa.ipc.open_stream(_arrow(client, series, options).data).read_all()
    assert table.column("chi_square_fit_p").to_pylist() == [
        r["fit"]["tests"]["chi_square_fit_p"] for r in results]


def test_full_detail_reports_are_the_single_known_sd_fits(client):
    series = _poly_series(2, seed=14)
    body = {"series": series, "model": POLY, "weighting": "known_sd", "detail": "full",
            "include": ["coefficients", "statistics", "diagnostics"]}
    results = _json(client, body).get_json()["results"]
    for s, result in zip(series, results, strict=True):
        report, one = result["fit"], _single(client, s, POLY)   # oracle: /v1/fit
        assert report["model"]["weighting"] == "known_sd"
        assert report["coefficients"] == one["coefficients"]   # normal-based p and limits
        assert _chi(report) == _chi(one)


def test_relative_summaries_keep_their_tests(client):
    series = _poly_series(2)
    fit = _json(client, {"series": series, "model": POLY}).get_json()["results"][0]["fit"]
    assert set(fit["tests"]) == {"shapiro_wilk_p", "breusch_pagan_p", "durbin_watson",
                                 "durbin_watson_p", "lack_of_fit_p"}


@pytest.mark.parametrize("model", [POLY, CURVE])
def test_a_series_without_weights_gets_its_own_error(client, model):
    series = _poly_series(3) if model is POLY else _curve_series(3)
    del series[1]["weights"]
    body = _json(client, {"series": series, "model": model, "weighting": "known_sd"}).get_json()
    assert [r["status"] for r in body["results"]] == ["ok", "error", "ok"]
    error = body["results"][1]["error"]
    assert error["status"] == 422 and list(error["errors"]) == ["weights"]
    # no series has weights (the bulk path): each is refused the same way
    for s in series:
        s.pop("weights", None)
    body = _json(client, {"series": series, "model": model, "weighting": "known_sd"}).get_json()
    assert body["summary"]["error"] == 3
    assert all(list(r["error"]["errors"]) == ["weights"] for r in body["results"])


def test_bad_weighting_is_refused_naming_the_field_in_every_body_form(client):
    series = _poly_series(1)
    assert_problem(_json(client, {"series": series, "weighting": "absolute"}), 422,
                   "validation_error", "weighting")
    assert_problem(_ndjson(client, {"weighting": "absolute"}, series), 422,
                   "validation_error", "options.weighting")
    assert_problem(_arrow(client, series, {"weighting": "absolute"}), 422,
                   "validation_error", "options.weighting")
    # known SDs need a weight column: a table without one is refused as a whole
    body = assert_problem(_arrow(client, series, {"weighting": "known_sd"}, weight=False), 422,
                          "validation_error", "weight")
    assert "known_sd" in body["detail"]
