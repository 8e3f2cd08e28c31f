"""NDJSON batches: bounded memory whatever the lines hold, every line counted, and the same
answers as the JSON form for bad shared options.

The memory bound is measured in-process with tracemalloc (peak of Python allocations while
the whole answer is produced and consumed line by line): a body of malformed lines used to be
held as error results until the end (113 MB for 100,000 lines, 2.5 GB for 2,000,000); now
at most one chunk of lines waits, and lines of garbage count against CURVEWISE_MAX_SERIES.
Data are invented and seeded.
"""

from __future__ import annotations

import tracemalloc

import orjson
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.api.batch_stream import STREAM_CHUNK
from service.app import create_app

NDJSON = "application/x-ndjson"
PEAK_BOUND = 8 << 20  # bytes of Python allocations while streaming the answer


def _client(**overrides):
    app = create_app(overrides)
    app.config["TESTING"] = True
    return app.test_client()


def _stream(client, body: bytes):
    """(status, answer lines) consumed one chunk at a time."""
    response = client.post("/v1/batch", data=body, content_type=NDJSON, buffered=False)
    try:
        if response.status_code != 200:
            return response.status_code, [response.get_json()]
        lines = []
        for chunk in response.response:
            lines.extend(orjson.loads(line) for line in chunk.splitlines() if line)
        return 200, lines
    finally:
        response.close()


def test_a_body_of_malformed_lines_streams_in_bounded_memory():
    client = _client(max_series=10_000_000)
    count = 30_000
    body = b"x\n" * count
    tracemalloc.start()  # before the request: the test client may run the app inside post()
    response = client.post("/v1/batch", data=body, content_type=NDJSON, buffered=False)
    try:
        answered = 0
        for chunk in response.response:
            answered += chunk.count(b"\n")
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
        response.close()
    assert answered == count + 1  # one error line per line, then the summary
    assert peak < PEAK_BOUND, f"peak {peak / 1e6:.1f} MB"


def test_malformed_lines_count_against_the_series_limit():
    status, lines = _stream(_client(max_series=1000), b"x\n" * 5000)
    assert status == 200
    assert [line["line"] for line in lines[:-2]] == list(range(1, 1001))
    assert lines[-2]["error"]["code"] == "batch_too_large" and lines[-2]["line"] == 1001
    assert lines[-1]["summary"]["truncated_at_line"] == 1001
    assert lines[-1]["summary"]["error"] == 1000


def _series_line(i: int) -> bytes:
    x = [1.0, 2.0, 3.0, 4.0, 5.0]
    y = [1.0 + 0.5 * v + 0.01 * ((i * 7 + k) % 5) for k, v in enumerate(x)]
    return orjson.dumps({"id": f"s{i}", "x": x, "y": y})


@settings(max_examples=30, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(kinds=st.lists(st.sampled_from(["series", "garbage", "blank", "bad_series"]),
                      min_size=1, max_size=60),
       max_series=st.integers(1, 40))
def test_every_non_blank_line_is_answered_once_in_order_up_to_the_limit(kinds, max_series):
    body = []
    for i, kind in enumerate(kinds):
        body.append({"series": _series_line(i), "garbage": b"{not json", "blank": b"   ",
                     "bad_series": b'{"x": [1, 2], "y": "no"}'}[kind])
    status, lines = _stream(_client(max_series=max_series), b"\n".join(body) + b"\n")
    assert status == 200
    summary = lines[-1]["summary"]
    results = [line for line in lines[:-1]
               if line.get("error", {}).get("code") != "batch_too_large"]
    numbered = [i + 1 for i, kind in enumerate(kinds) if kind != "blank"]
    expected = numbered[:max_series]
    assert [line["line"] for line in results] == expected
    assert summary["ok"] + summary["error"] == len(expected)
    assert summary["ok"] == sum(1 for line in results if line["status"] == "ok")
    assert ("truncated_at_line" in summary) == (len(numbered) > max_series)
    for line in results:
        kind = kinds[line["line"] - 1]
        assert (line["status"] == "ok") == (kind == "series"), (kind, line)


def test_no_more_than_one_chunk_waits():
    # a series first, then garbage: the error lines wait with the series' chunk, never longer
    body = _series_line(0) + b"\n" + b"x\n" * (3 * STREAM_CHUNK)
    status, lines = _stream(_client(max_series=10_000), body)
    assert status == 200 and len(lines) == 3 * STREAM_CHUNK + 2
    assert [line["line"] for line in lines[:-1]] == list(range(1, 3 * STREAM_CHUNK + 2))


BAD_OPTIONS = [
    {"model": {"degree": "two"}},
    {"model": {"degree": 1}, "colour": "red"},
    {"model": {"degree": 99}},
    {"model": {"max_degree": 3, "select": "magic"}},
    {"model": {"degree": 1}, "grid": {"count": 10**6}},
    {"model": {"degree": 1}, "detail": "everything"},
    {"level": 1.5},
]


@pytest.mark.parametrize("options", BAD_OPTIONS)
def test_bad_shared_options_are_the_same_problem_in_both_forms(options):
    client = _client()
    series = {"x": [1.0, 2.0, 3.0, 4.0], "y": [1.1, 1.9, 3.2, 3.9]}
    as_json = client.post("/v1/batch", json={"series": [series], **options})
    body = orjson.dumps({"options": options}) + b"\n" + orjson.dumps(series) + b"\n"
    as_ndjson = client.post("/v1/batch", data=body, content_type=NDJSON)
    assert as_json.status_code == as_ndjson.status_code == 422, as_ndjson.data[:300]
    assert as_json.mimetype == as_ndjson.mimetype == "application/problem+json"
    json_problem, ndjson_problem = as_json.get_json(), as_ndjson.get_json()
    assert json_problem["code"] == ndjson_problem["code"]
    # the same fields, under the options line's own path in the NDJSON body
    assert {"options." + key for key in json_problem["errors"]} == set(ndjson_problem["errors"])


def test_a_byte_order_mark_before_the_first_line_is_skipped():
    client = _client()
    body = b"\xef\xbb\xbf" + orjson.dumps({"options": {"model": {"degree": 1}}}) + b"\n" \
        + _series_line(1) + b"\n"
    status, lines = _stream(client, body)
    assert status == 200 and lines[0]["status"] == "ok" and lines[-1]["summary"]["ok"] == 1
