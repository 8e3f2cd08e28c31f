"""POST /v1/batch through the Flask test client: equals /v1/fit, isolates bad series, streams.

The reference for each fitted series is the service's own /v1/fit answer for
the same data and model (issue requirement); /v1/fit itself is checked
against NIST StRD and statsmodels in tests/api.
"""

from __future__ import annotations

import numpy as np
import orjson
import pytest

from service.app import create_app
from tests.batch.conftest import ragged_series, rel

MODEL = {"max_degree": 4, "select": "aic"}


def _series(count=30, seed=4):
    return [{"id": f"probe-{i:03d}", "x": x.tolist(), "y": y.tolist()}
            for i, (x, y, _) in enumerate(ragged_series(seed, count))]


def _post(client, body):
    return client.post("/v1/batch", data=orjson.dumps(body), content_type="application/json")


def _ndjson(client, lines):
    data = b"\n".join(line if isinstance(line, bytes) else orjson.dumps(line) for line in lines)
    response = client.post("/v1/batch", data=data, content_type="application/x-ndjson")
    assert response.status_code == 200 and response.mimetype == "application/x-ndjson"
    return [orjson.loads(line) for line in response.data.splitlines()]


def test_batch_results_equal_single_fit_results(client):
    series = _series()
    answer = _post(client, {"series": series, "model": MODEL})
    assert answer.status_code == 200
    body = answer.get_json()
    assert [r["id"] for r in body["results"]] == [s["id"] for s in series]
    assert body["summary"]["ok"] == len(series) and body["summary"]["error"] == 0
    for s, result in zip(series, body["results"], strict=True):
        one = _post_fit(client, s)
        fit = result["fit"]
        assert fit["degree"] == one["model"]["degree"]
        assert fit["terms"] == one["model"]["terms"]
        assert rel(fit["estimate"], [c["estimate"] for c in one["coefficients"]]) < 1e-9
        assert rel(fit["std_error"], [c["std_error"] for c in one["coefficients"]]) < 1e-9
        for name in ("sigma", "r_squared", "adj_r_squared"):
            assert rel(fit[name], one["statistics"][name]) < 1e-9
        assert fit["flags"] == [{"code": f["code"], "severity": f["severity"]}
                                for f in one["flags"]]
        aic = [c["aic"] for c in one["selection"]["candidates"]]
        assert rel(fit["selection"]["values"], aic) < 1e-9


def _post_fit(client, s):
    answer = client.post("/v1/fit", data=orjson.dumps(
        {"x": s["x"], "y": s["y"], "model": MODEL, "grid": None}),
        content_type="application/json")
    assert answer.status_code == 200, answer.get_json()
    return answer.get_json()


def test_full_detail_is_the_fit_report(client):
    series = _series(3)
    body = _post(client, {"series": series, "model": MODEL, "detail": "full"}).get_json()
    for s, result in zip(series, body["results"], strict=True):
        one = _post_fit(client, s)
        fit = result["fit"]
        assert fit["coefficients"] == one["coefficients"]
        assert fit["selection"] == one["selection"]
        assert fit["fitted_model"] == one["fitted_model"]


def test_bad_series_get_error_results_and_the_others_are_fitted(client):
    series = _series(8)
    series[1]["y"] = series[1]["y"][:-1]                 # mismatched lengths (core, 422)
    series[2]["x"][4] = "abc"                            # not a number (schema, 422)
    series[3] = {"id": "probe-003", "x": [1.0], "y": [2.0]}   # too short
    series[4]["model"] = {"degree": 99}                  # over this server's max degree
    series[5]["colour"] = "red"                          # unknown field
    body = _post(client, {"series": series, "model": MODEL}).get_json()
    status = [r["status"] for r in body["results"]]
    assert status == ["ok", "error", "error", "error", "error", "error", "ok", "ok"]
    errors = {i: body["results"][i]["error"] for i in range(1, 6)}
    assert errors[1]["status"] == 422 and "y" in errors[1]["errors"]
    assert "x[4]" in errors[2]["errors"]
    assert errors[3]["code"] == "insufficient_design"
    assert errors[4]["code"] == "limit_exceeded" and "model.degree" in errors[4]["errors"]
    assert "colour" in errors[5]["errors"]
    assert body["summary"]["ok"] == 3 and body["summary"]["error"] == 5


def test_ndjson_survives_a_broken_line_and_keeps_order(client):
    series = _series(6)
    lines = [{"options": {"model": MODEL}}] + series[:3] + [b'{"id": "oops", "x": [1, 2'] \
        + series[3:]
    out = _ndjson(client, lines)
    summary = out[-1]["summary"]
    assert set(summary) == {"ok", "error", "flagged", "serious", "caution", "info"}
    assert summary["ok"] == 6 and summary["error"] == 1
    assert summary["serious"] + summary["caution"] + summary["info"] <= 6
    assert summary["flagged"] == summary["serious"] + summary["caution"]
    results = out[:-1]
    assert [r["line"] for r in results] == [2, 3, 4, 5, 6, 7, 8]
    assert results[3]["status"] == "error" and results[3]["error"]["status"] == 400
    assert [r["id"] for r in results if r["status"] == "ok"] == [s["id"] for s in series]
    json_body = _post(client, {"series": series, "model": MODEL}).get_json()
    ok = [r for r in results if r["status"] == "ok"]
    assert [r["fit"] for r in ok] == [r["fit"] for r in json_body["results"]]



def test_ndjson_options_line_after_a_series_is_named_as_such(client):
    # docs/scaling.md: "an optional first line {"options": {...}}"; one further down is not
    # read, and its answer says so (not "Unknown field"), the other lines still fitted
    series = _series(2)
    out = _ndjson(client, [series[0], {"options": {"model": {"degree": 1}}}, series[1]])
    assert [r["status"] for r in out[:-1]] == ["ok", "error", "ok"]
    error = out[1]["error"]
    assert error["status"] == 422 and list(error["errors"]) == ["options"]
    assert "first line" in error["detail"] and "not applied" in error["detail"]

def test_summary_counts_series_by_their_most_severe_flag(client):
    # seeded invented series: two clean quadratics (at most info flags expected), one with
    # an absurd spike (outliers: caution), one interpolated exactly (no_residual_df: serious)
    rng = np.random.default_rng(4)
    x = np.linspace(0.0, 10.0, 40)
    clean = [1.0 + 0.5 * x - 0.03 * x * x + rng.normal(0.0, 0.2, x.size) for _ in range(2)]
    spike = clean[0].copy()
    spike[17] += 50.0
    series = [{"id": i, "x": x.tolist(), "y": y.tolist()} for i, y in
              enumerate([*clean, spike])] + [{"id": 3, "x": [0.0, 1, 2], "y": [1.0, 3, 2]}]
    body = _post(client, {"series": series, "model": {"degree": 2}}).get_json()
    worst = []
    for result in body["results"]:
        levels = {f["severity"] for f in result["fit"]["flags"]}
        worst.append(next((s for s in ("serious", "caution", "info") if s in levels), "none"))
    assert worst[2:] == ["caution", "serious"]
    assert {"code": "outliers", "severity": "caution"} in body["results"][2]["fit"]["flags"]
    summary = body["summary"]
    for severity in ("serious", "caution", "info"):
        assert summary[severity] == worst.count(severity), severity
    assert summary["flagged"] == worst.count("serious") + worst.count("caution")


def test_ndjson_without_options_line_uses_the_defaults(client):
    out = _ndjson(client, _series(2))
    assert [r["status"] for r in out[:-1]] == ["ok", "ok"]
    assert out[0]["fit"]["selection"]["method"] == "sequential_f"


@pytest.mark.parametrize("overrides, body_series, code", [
    ({"max_series": 3}, 4, "batch_too_large"),
    ({"max_total_points": 100}, 4, "batch_too_large"),
])
def test_batch_limits_are_413(overrides, body_series, code):
    client = create_app(overrides).test_client()
    answer = _post(client, {"series": _series(body_series)})
    assert answer.status_code == 413 and answer.mimetype == "application/problem+json"
    assert answer.get_json()["code"] == code
    out = _ndjson(client, _series(body_series))
    assert out[-2]["error"]["status"] == 413
    assert "truncated_at_line" in out[-1]["summary"]


def test_points_per_series_limit_fails_only_that_series():
    client = create_app({"max_points": 40}).test_client()
    series = _series(10)
    body = _post(client, {"series": series}).get_json()
    for s, r in zip(series, body["results"], strict=True):
        if len(s["x"]) > 40:
            assert r["status"] == "error" and r["error"]["code"] == "too_many_points"
        else:
            assert r["status"] == "ok"


def test_bad_envelope_is_422_and_wrong_media_type_is_415(client):
    answer = _post(client, {"series": _series(2), "detail": "everything"})
    assert answer.status_code == 422 and "detail" in answer.get_json()["errors"]
    answer = _post(client, {"series": _series(2), "model": {"degree": 99}})
    assert answer.status_code == 422 and answer.get_json()["code"] == "limit_exceeded"
    answer = client.post("/v1/batch", data="x", content_type="text/plain")
    assert answer.status_code == 415
    answer = _post(client, {"model": MODEL})
    assert answer.status_code == 422 and "series" in answer.get_json()["errors"]


def test_undefined_numbers_are_null_not_nan(client):
    body = _post(client, {"series": [{"id": 1, "x": [0.0, 1.0], "y": [1.0, 3.0]}],
                          "model": {"degree": 1}})
    assert b"NaN" not in body.data
    fit = body.get_json()["results"][0]["fit"]
    assert fit["df_residual"] == 0 and fit["tests"]["durbin_watson"] is None
    assert np.allclose(fit["estimate"], [1.0, 2.0])


@pytest.mark.filterwarnings("error::RuntimeWarning")
@pytest.mark.parametrize("series", [
    [None], [{"x": [], "y": []}], [{"x": [1e308, -1e308, 0.0], "y": [1, 2, 3]}],
    [{"x": [1, 2, 3, 4], "y": [1e300, -1e300, 1e300, 2]}],
    [{"x": [1, 2, 3, 4, 5], "y": [1, 2, 3, 4, 5], "weights": [1e-300, 1, 1, 1, 1e300]}],
    [{"x": [0, 0, 0, 1], "y": [1, 2, 3, 4]}], [{"x": [1, 2, 3], "y": [1, 2, 3], "id": 1.5}],
    [{"x": [1, 2, 3], "y": [1, 2, 3], "model": "abc"}], [{"x": [1, 2], "y": [5, 5]}],
    [{"x": [1, 2, 3, 4, 5, 6], "y": [5, 5, 5, 5, 5, 5]}],
])
def test_hostile_series_get_a_result_never_a_500_or_a_warning(client, series):
    answer = _post(client, {"series": series, "model": {"max_degree": 3, "select": "press"}})
    assert answer.status_code == 200
    results = answer.get_json()["results"]
    assert len(results) == len(series)
    for r in results:
        assert r["status"] in ("ok", "error")
        if r["status"] == "error":
            assert r["error"]["status"] in (400, 413, 422) and r["error"]["detail"]


@pytest.mark.parametrize("detail", ["summary", "full"])
def test_plain_series_gathered_in_bulk_answer_exactly_as_checked_one_by_one(client, detail):
    # Plain {id, x, y} series take the bulk path; the same series with "weights": null
    # (no weights either) take the per-series checks. The answers must be identical.
    series = _series(40, seed=9)
    series[3]["x"] = [int(v * 100) for v in series[3]["x"]]      # integers are numbers too
    plain = _post(client, {"series": series, "model": MODEL, "detail": detail})
    checked = _post(client, {"series": [{**s, "weights": None} for s in series],
                             "model": MODEL, "detail": detail})
    assert plain.status_code == checked.status_code == 200
    assert plain.get_json() == checked.get_json()
    assert plain.get_json()["summary"]["ok"] == 40


@pytest.mark.parametrize("bad, field", [
    ({"id": True}, "id"),                       # a boolean is not an id
    ({"x": [1.0, None, 3.0, 4.0, 5.0, 6.0]}, None),   # null: the missing-value policy decides
    ({"x": [1.0, 2.0, True, 4.0, 5.0, 6.0]}, "x[2]"),
    ({"y": [1.0, 2.0, 3.0]}, None),             # lengths differ
    ({"y": ["1.0", 2.0, 3.0, 4.0, 5.0, 6.0]}, "y[0]"),   # a string is not a number
    ({"weights": [1.0] * 6, "x": [1.0, 1.0, 1.0, 1.0, 1.0, 1.0]}, None),   # constant x
])
def test_one_irregular_series_sends_the_batch_to_the_per_series_checks(client, bad, field):
    series = _series(5, seed=10)
    series = [{"id": s["id"], "x": s["x"][:6], "y": s["y"][:6]} for s in series]
    series[2] = {**series[2], **bad}
    body = _post(client, {"series": series, "model": {"degree": 1}}).get_json()
    statuses = [r["status"] for r in body["results"]]
    assert statuses[:2] == ["ok", "ok"] and statuses[3:] == ["ok", "ok"]
    assert statuses[2] == "error"
    if field is not None:
        assert field in body["results"][2]["error"]["errors"]


def test_a_series_with_an_invalid_id_gets_its_position_as_id(client):
    # found by schemathesis: the error result echoed {"id": {}}, which the response
    # schema (string or integer) does not allow
    series = _series(3, seed=11)
    series[1]["id"] = {"not": "an id"}
    body = _post(client, {"series": series, "model": MODEL}).get_json()
    assert body["results"][1]["id"] == 1
    assert body["results"][1]["error"]["errors"] == {"id": ["Must be a string or an integer."]}


def test_a_comparison_in_a_batch_is_refused_as_a_batch_limit(client):
    # README: a batch model is "any model /v1/fit accepts" but one per series (docs/scaling.md);
    # the refusal must say that, not call the batch's model a candidate
    compare = {"candidates": [{"degree": 1}, {"degree": 2}]}
    series = _series(2)
    shared = _post(client, {"series": series, "model": compare})
    assert shared.status_code == 422
    own = _post(client, {"series": [{**series[0], "model": compare}, series[1]]}).get_json()
    assert [r["status"] for r in own["results"]] == ["error", "ok"]
    for errors in (shared.get_json()["errors"], own["results"][0]["error"]["errors"]):
        (message,) = errors["model.candidates"]
        assert "candidate cannot hold" not in message and "/v1/fit" in message


@pytest.mark.parametrize("member", [{"include": ["coefficients"]}, {"grid": {"count": 5}}])
def test_full_report_options_without_full_detail_are_refused(client, member):
    # /v1/batch documents include and grid as "detail=full only"; a summary has neither, so
    # sending them with the default detail was silently ignored: a 422 naming the member
    (name,) = member
    answer = _post(client, {"series": _series(2), **member})
    assert answer.status_code == 422
    (message,) = answer.get_json()["errors"][name]
    assert '"detail": "full"' in message
    assert _post(client, {"series": _series(2), "detail": "full", **member}).status_code == 200


def test_an_unreadable_ndjson_line_gets_its_position_as_id(client):
    # Series documentation (schemas/batch_series.py): id defaults to "the series' position";
    # a line that is not JSON, or not an object, has no id of its own, so both get that default
    series = _series(3)
    out = _ndjson(client, [series[0], b'{"id": "oops", "x": [1, 2', b"[1, 2]", series[1]])
    assert [(r["line"], r["id"], r["status"]) for r in out[:-1]] == [
        (1, series[0]["id"], "ok"), (2, 1, "error"), (3, 2, "error"), (4, series[1]["id"], "ok")]


def test_an_ndjson_line_with_nan_is_told_what_to_send(client):
    # as /v1/fit answers a NaN token (README, error catalogue: invalid_json), so does a line
    out = _ndjson(client, [b'{"x": [1, 2, 3], "y": [1, NaN, 3]}',
                          b'{"x": [1, 2], "y": [-Infinity, 1]}'])
    for result in out[:-1]:
        assert result["error"]["code"] == "invalid_json"
        assert "NaN and Infinity are not JSON numbers" in result["error"]["detail"]


def test_an_id_beyond_64_bits_is_told_to_be_a_string(client):
    # the JSON reader (orjson) reads integers beyond 64 bits as floats; the refusal must not
    # say "Must be a string or an integer" of what the caller sent as an integer
    body = b'{"series": [{"id": 18446744073709551616, "x": [1, 2, 3, 4], "y": [1, 2, 3, 5]}]}'
    answer = client.post("/v1/batch", data=body, content_type="application/json").get_json()
    (message,) = answer["results"][0]["error"]["errors"]["id"]
    assert "64" in message and "string" in message
