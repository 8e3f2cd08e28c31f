"""NDJSON through a real gunicorn on a loopback port: a chunked request body streamed in,
results streamed out line by line, a broken line answered in place."""

from __future__ import annotations

import httpx
import numpy as np
import orjson
import pytest

from tests.batch.conftest import ragged_series

pytestmark = pytest.mark.live


def test_ndjson_streams_both_ways_through_gunicorn(live_url):
    series = [{"id": f"lot-{i}", "x": x.tolist(), "y": y.tolist()}
              for i, (x, y, _) in enumerate(ragged_series(21, 3000))]

    def body():   # a generator: httpx sends it with chunked transfer encoding
        yield orjson.dumps({"options": {"model": {"max_degree": 3, "select": "aic"}}}) + b"\n"
        for i, s in enumerate(series):
            if i == 1500:
                yield b'{"id": "broken", "x": [1, 2,\n'
            yield orjson.dumps(s) + b"\n"

    lines = []
    with httpx.Client(base_url=live_url, timeout=60.0) as http, http.stream(
            "POST", "/v1/batch", content=body(),
            headers={"Content-Type": "application/x-ndjson"}) as response:
        assert response.status_code == 200
        assert response.headers["content-type"].startswith("application/x-ndjson")
        for line in response.iter_lines():
            if line:
                lines.append(orjson.loads(line))
    summary = lines[-1]["summary"]
    results = lines[:-1]
    assert summary["ok"] == len(series) and summary["error"] == 1
    assert [r["id"] for r in results if r["status"] == "ok"] == [s["id"] for s in series]
    broken = [r for r in results if r["status"] == "error"]
    assert len(broken) == 1 and broken[0]["error"]["code"] == "invalid_json"
    assert broken[0]["line"] == 1502   # options line, 1500 series, then the broken one
    assert all(np.isfinite(r["fit"]["sigma"]) for r in results if r["status"] == "ok")


def test_ndjson_body_sent_whole_before_reading_does_not_deadlock(live_url):
    # Clients commonly send the whole body before they read the answer; with more data
    # than the socket buffers hold, a server that answers while reading would deadlock.
    series = [{"id": i, "x": x.tolist(), "y": y.tolist()}
              for i, (x, y, _) in enumerate(ragged_series(22, 12000))]
    data = b"".join(orjson.dumps(s) + b"\n" for s in series)
    assert len(data) > 8 << 20   # also past the in-memory part of the spool
    with httpx.Client(base_url=live_url, timeout=60.0) as http:
        response = http.post("/v1/batch", content=data,
                             headers={"Content-Type": "application/x-ndjson"})
    assert response.status_code == 200
    lines = response.content.splitlines()
    assert orjson.loads(lines[-1])["summary"]["ok"] == len(series)
    assert len(lines) == len(series) + 1
