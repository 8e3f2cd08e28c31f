"""POST /v1/batch with Arrow and Parquet bodies: the same answers as the JSON body.

The reference is the service's own JSON batch answer for the same series (itself checked
against /v1/fit, and /v1/fit against NIST StRD and statsmodels, in the other tests), and
the in-process ``fit_frame`` for the tidy Arrow answer. Data: seeded random series
(tests/batch/conftest.py), shuffled row order.
"""

from __future__ import annotations

import io
from urllib.parse import quote

import numpy as np
import orjson
import pandas as pd
import pyarrow as pa
import pyarrow.compute  # noqa: F401 - pa.compute below
import pyarrow.parquet as pq
import pytest

from service.app import create_app
from service.core import ModelSpec
from service.core.batch.frames import fit_frame
from service.core.batch.tidy import table_frame
from tests.batch.conftest import ragged_series

ARROW = "application/vnd.apache.arrow.stream"
MODEL = {"max_degree": 4, "select": "aic"}
TESTS = ("shapiro_wilk_p", "breusch_pagan_p", "durbin_watson", "durbin_watson_p",
         "lack_of_fit_p")


def _series(count=24, seed=31, *, int_ids=False, weighted=False):
    out = []
    for i, (x, y, w) in enumerate(ragged_series(seed, count, 12, 40, weighted=weighted)):
        item = {"id": 1000 + 7 * i if int_ids else f"lot-{i:03d}", "x": x.tolist(),
                "y": y.tolist()}
        if weighted:
            item["weights"] = w.tolist()
        out.append(item)
    if count > 5:
        out[3]["x"] = [2.0] * len(out[3]["x"])      # one distinct x: insufficient_design
        out[5]["y"][4] = None                        # a missing value: invalid_data y[4]
    return out


def _long(series, seed=5) -> pd.DataFrame:
    """One row per point, rows of all series shuffled, each series' points in order."""
    rows = pd.DataFrame({
        "id": [s["id"] for s in series for _ in s["x"]],
        "x": [v for s in series for v in s["x"]],
        "y": [np.nan if v is None else v for s in series for v in s["y"]]})
    if "weights" in series[0]:
        rows["weight"] = [v for s in series for v in s["weights"]]
    order = np.random.default_rng(seed).permutation(len(rows))
    shuffled = rows.iloc[order].reset_index(drop=True)
    # keep the point order inside each series: its k-th row (in the shuffled table) gets
    # its k-th point
    rank = shuffled.groupby("id", sort=False).cumcount().to_numpy()
    start = rows.groupby("id", sort=False).cumcount().to_numpy()
    first = {ident: i - k for i, (ident, k) in enumerate(zip(rows["id"], start, strict=True))}
    source = np.array([first[ident] + k for ident, k in zip(shuffled["id"], rank, strict=True)])
    shuffled[rows.columns[1:]] = rows.iloc[source, 1:].to_numpy()
    return shuffled


def _in_table_order(series, frame):
    """The series in the order the answer has them: of their first row in the table."""
    by_id = {s["id"]: s for s in series}
    return [by_id[ident] for ident in pd.unique(frame["id"])]


def _ipc(frame_or_table, kind="stream") -> bytes:
    table = frame_or_table if isinstance(frame_or_table, pa.Table) else \
        pa.Table.from_pandas(frame_or_table, preserve_index=False)
    sink = io.BytesIO()
    if kind == "parquet":
        pq.write_table(table, sink)
        return sink.getvalue()
    opener = pa.ipc.new_stream if kind == "stream" else pa.ipc.new_file
    with opener(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=97)   # several record batches
    return sink.getvalue()


def _post(client, body, options=None, *, accept="application/json", content_type=ARROW,
          query=None):
    url = "/v1/batch"
    if query is not None:
        url += "?" + query
    elif options is not None:
        url += "?options=" + quote(orjson.dumps(options).decode())
    return client.post(url, data=body, content_type=content_type, headers={"Accept": accept})


def _arrow_answer(response) -> pa.Table:
    assert response.status_code == 200, response.get_data()[:500]
    assert response.mimetype == ARROW
    return pa.ipc.open_stream(response.data).read_all()


@pytest.mark.parametrize("int_ids, weighted, missing", [
    (False, False, "error"), (True, False, "error"), (False, True, "error"),
    (True, True, "drop")])
def test_arrow_body_answers_exactly_as_the_json_body(client, int_ids, weighted, missing):
    frame = _long(_series(int_ids=int_ids, weighted=weighted))
    series = _in_table_order(_series(int_ids=int_ids, weighted=weighted), frame)
    options = {"model": MODEL, "missing": missing, "level": 0.9}
    reference = client.post("/v1/batch", data=orjson.dumps({"series": series, **options}),
                            content_type="application/json").get_json()
    assert reference["summary"]["error"] == (2 if missing == "error" else 1)
    got = _post(client, _ipc(frame), options)
    assert got.status_code == 200 and got.mimetype == "application/json"
    assert got.get_json() == reference


@pytest.mark.parametrize("int_ids, weighted", [(False, False), (True, True)])
def test_arrow_answer_holds_the_json_numbers_one_row_per_series(client, int_ids, weighted):
    frame = _long(_series(int_ids=int_ids, weighted=weighted))
    series = _in_table_order(_series(int_ids=int_ids, weighted=weighted), frame)
    reference = client.post("/v1/batch", data=orjson.dumps({"series": series, "model": MODEL}),
                            content_type="application/json").get_json()
    table = _arrow_answer(_post(client, _ipc(frame), {"model": MODEL}, accept=ARROW))
    assert table.column("id").to_pylist() == [s["id"] for s in series]
    assert orjson.loads(table.schema.metadata[b"curvewise.summary"]) == reference["summary"]
    rows = table.to_pylist()
    for row, ref in zip(rows, reference["results"], strict=True):
        assert row["status"] == ref["status"]
        if ref["status"] == "error":
            error = ref["error"]
            assert row["error_code"] == error["code"] and row["error"] == error["detail"]
            assert row["error_field"] in error["errors"]
            assert row["coef_0"] is None and row["n"] is None and row["severity"] is None
            continue
        fit = ref["fit"]
        for term, estimate, se in zip(fit["terms"], fit["estimate"], fit["std_error"],
                                      strict=True):
            k = 0 if term == "intercept" else 1 if term == "x" else int(term[2:])
            assert row[f"coef_{k}"] == estimate and row[f"se_{k}"] == se
        assert all(row[f"coef_{k}"] is None for k in range(fit["degree"] + 1, 5))
        for name in ("n", "degree", "sigma", "r_squared", "adj_r_squared", "df_residual"):
            assert row[name] == fit[name], name
        for name in TESTS:
            assert row[name] == fit["tests"][name], name
        assert row["flag_codes"] == ";".join(f["code"] for f in fit["flags"])
        assert row["flag_severities"] == ";".join(f["severity"] for f in fit["flags"])
    bad = {row["id"]: row for row in rows if row["status"] == "error"}
    sent = _series(int_ids=int_ids, weighted=weighted)
    assert bad[sent[3]["id"]]["error_code"] == "insufficient_design"
    assert bad[sent[5]["id"]]["error_field"] == "y[4]"


def test_arrow_answer_is_the_in_process_fit_frame(client):
    series = _series(40, seed=8)
    frame = _long(series)
    table = _arrow_answer(_post(client, _ipc(frame), {"model": MODEL}, accept=ARROW))
    expected = fit_frame(frame, model=ModelSpec(max_degree=4, select="aic"))
    pd.testing.assert_frame_equal(table_frame(table), expected)


@pytest.mark.parametrize("kind, content_type", [
    ("file", "application/vnd.apache.arrow.file"), ("parquet", "application/vnd.apache.parquet")])
def test_arrow_files_and_parquet_equal_the_arrow_stream(client, kind, content_type):
    frame = _long(_series(12, seed=3))
    stream = _post(client, _ipc(frame), {"model": MODEL}, accept=ARROW)
    other = _post(client, _ipc(frame, kind), {"model": MODEL}, accept=ARROW,
                  content_type=content_type)
    assert _arrow_answer(other).equals(_arrow_answer(stream))


def test_dictionary_ids_and_integer_numbers_are_read(client):
    series = _series(6, seed=2)
    frame = _long(series)
    table = pa.Table.from_pandas(frame, preserve_index=False)
    dictionary = table.set_column(0, "id", table.column("id").dictionary_encode())
    plain = _arrow_answer(_post(client, _ipc(table), {"model": MODEL}, accept=ARROW))
    encoded = _arrow_answer(_post(client, _ipc(dictionary), {"model": MODEL}, accept=ARROW))
    assert encoded.equals(plain)
    # run-end encoded ids (as the client sends them): runs of a shuffled table repeat ids,
    # those of a grouped one do not; both answer as the plain column
    grouped = frame.sort_values("id", kind="stable").reset_index(drop=True)
    for source in (frame, grouped):
        table = pa.Table.from_pandas(source, preserve_index=False)
        runs = table.set_column(0, "id", pa.chunked_array(
            [pa.compute.run_end_encode(chunk) for chunk in table.column("id").chunks]))
        expected = _arrow_answer(_post(client, _ipc(table), {"model": MODEL}, accept=ARROW))
        got = _arrow_answer(_post(client, _ipc(runs), {"model": MODEL}, accept=ARROW))
        assert got.equals(expected)
    whole = pa.table({"id": [1] * 6 + [2] * 6, "x": list(range(6)) * 2,
                      "y": [1, 3, 2, 5, 4, 6] * 2})           # int64 x and y
    out = _arrow_answer(_post(client, _ipc(whole), {"model": {"degree": 1}}, accept=ARROW))
    assert out.column("status").to_pylist() == ["ok", "ok"]
    assert out.column("id").type == pa.int64()


@pytest.mark.parametrize("options, query, field", [
    ({"model": {"degree": -1}}, None, "options.model.degree"),
    ({"model": {"degree": 99}}, None, "options.model.degree"),          # over the server max
    ({"level": 2}, None, "options.level"),
    ({"series": []}, None, "options.series"),
    ({"detail": "full"}, None, "options.detail"),                        # with an Arrow answer
    (None, "options=%7Bnot%20json", "options"),
    (None, "options=%5B1%5D", "options"),                               # not an object
    (None, "model=%7B%7D", "model"),                                    # unknown parameter
])
def test_bad_options_are_422_naming_the_field(client, options, query, field):
    answer = _post(client, _ipc(_long(_series(6))), options, accept=ARROW, query=query)
    assert answer.status_code == 422 and answer.mimetype == "application/problem+json"
    assert field in answer.get_json()["errors"], answer.get_json()


@pytest.mark.parametrize("table, field", [
    (pa.table({"id": ["a"] * 4, "x": [1.0, 2, 3, 4]}), "y"),                    # missing
    (pa.table({"id": ["a"] * 4, "x": [1.0, 2, 3, 4], "y": [1.0, 2, 3, 4],
               "colour": ["red"] * 4}), "colour"),                            # unknown
    (pa.table({"id": [1.5] * 4, "x": [1.0, 2, 3, 4], "y": [1.0, 2, 3, 4]}), "id"),
    (pa.table({"id": ["a", None, "a", "a"], "x": [1.0, 2, 3, 4], "y": [1.0, 2, 3, 4]}), "id"),
    (pa.table({"id": ["a"] * 4, "x": ["1", "2", "3", "4"], "y": [1.0, 2, 3, 4]}), "x"),
])
def test_bad_columns_are_422_naming_the_column(client, table, field):
    answer = _post(client, _ipc(table), {"model": {"degree": 1}})
    assert answer.status_code == 422, answer.get_json()
    assert field in answer.get_json()["errors"]


def test_wrong_content_is_400_or_415_with_a_clear_message(client):
    json_body = orjson.dumps({"series": _series(6)})
    answer = _post(client, json_body)                        # JSON labelled as Arrow
    assert answer.status_code == 400 and answer.get_json()["code"] == "invalid_table"
    assert "not an Arrow IPC stream" in answer.get_json()["detail"]
    answer = _post(client, _ipc(_long(_series(6))), content_type="application/vnd.apache.parquet")
    assert answer.status_code == 400 and "not a Parquet file" in answer.get_json()["detail"]
    answer = _post(client, b"")
    assert answer.status_code == 400 and "empty" in answer.get_json()["detail"]
    answer = _post(client, b"id,x,y\na,1,2\n", content_type="text/csv")
    assert answer.status_code == 415
    assert "application/vnd.apache.arrow.stream" in answer.get_json()["detail"]
    answer = client.post("/v1/batch?options=%7B%7D", data=json_body,
                         content_type="application/json")
    assert answer.status_code == 422 and "options" in answer.get_json()["errors"]


@pytest.mark.parametrize("kind, content_type", [
    ("stream", ARROW), ("file", "application/vnd.apache.arrow.file"),
    ("parquet", "application/vnd.apache.parquet")])
@pytest.mark.parametrize("overrides, code", [({"max_series": 5}, "batch_too_large"),
                                             ({"max_total_points": 100}, "batch_too_large"),
                                             ({"max_body_bytes": 2000}, "body_too_large")])
def test_limits_are_413(overrides, code, kind, content_type):
    client = create_app(overrides).test_client()
    answer = _post(client, _ipc(_long(_series(8)), kind), {"model": MODEL}, accept=ARROW,
                   content_type=content_type)
    assert answer.status_code == 413 and answer.mimetype == "application/problem+json"
    assert answer.get_json()["code"] == code


def test_a_series_over_the_point_limit_is_an_error_row():
    client = create_app({"max_points": 30}).test_client()
    frame = _long(_series(10, seed=6))
    series = _in_table_order(_series(10, seed=6), frame)
    long_ones = [s["id"] for s in series if len(s["x"]) > 30]
    assert 0 < len(long_ones) < len(series)
    body = _ipc(frame)
    table = _arrow_answer(_post(client, body, {"model": MODEL}, accept=ARROW))
    assert table.column("id").to_pylist() == [s["id"] for s in series]
    rows = {row["id"]: row for row in table.to_pylist()}
    assert all(rows[i]["error_code"] == "too_many_points" for i in long_ones)
    json_answer = _post(client, body, {"model": MODEL}).get_json()
    reference = client.post("/v1/batch", data=orjson.dumps({"series": series, "model": MODEL}),
                            content_type="application/json").get_json()
    assert json_answer == reference
    for result in json_answer["results"]:
        assert (result["id"] in long_ones) == (result.get("error", {}).get("code")
                                               == "too_many_points")


@pytest.mark.parametrize("accept", [ARROW, "application/json"])
def test_batch_metrics_count_arrow_requests_once(client, accept):
    from tests.ops.test_observability import _batch_counts

    frame = _long(_series(8, seed=12))
    before = _batch_counts(client)
    answer = _post(client, _ipc(frame), {"model": MODEL}, accept=accept)
    assert answer.status_code == 200
    summary = orjson.loads(_arrow_answer(answer).schema.metadata[b"curvewise.summary"]) \
        if accept == ARROW else answer.get_json()["summary"]
    after = _batch_counts(client)
    assert [a - b for a, b in zip(after, before, strict=True)] == [
        1, 8, summary["ok"], summary["error"]]
