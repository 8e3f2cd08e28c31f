"""A JSON batch with detail "full" holds every report until it answers, so its size has its
own limit (CURVEWISE_MAX_FULL_SERIES): over it, a 413 problem naming the series and pointing
to NDJSON; at it, the answer's peak memory per series is what the README states (about
30 KB a report), measured with tracemalloc. Data are invented and seeded."""

from __future__ import annotations

import tracemalloc

import numpy as np
import orjson

from service.app import create_app
from tests.api.helpers import assert_problem


def _client(**overrides):
    app = create_app(overrides)
    app.config["TESTING"] = True
    return app.test_client()


def _body(count: int) -> bytes:
    rng = np.random.default_rng(3)
    x = np.linspace(0, 1, 20)
    series = [{"id": f"s{i}", "x": x.tolist(), "y": (1 + x + rng.normal(0, 0.1, 20)).tolist()}
              for i in range(count)]
    return orjson.dumps({"series": series, "detail": "full", "model": {"degree": 1}})


def test_full_detail_over_its_limit_is_refused_naming_the_series():
    client = _client(max_full_series=50)
    res = client.post("/v1/batch", data=_body(51), content_type="application/json")
    body = assert_problem(res, 413, "batch_too_large", "series")
    assert "NDJSON" in body["detail"] and "50" in body["detail"]
    ok = client.post("/v1/batch", data=_body(50), content_type="application/json")
    assert ok.status_code == 200 and ok.get_json()["summary"]["ok"] == 50


def test_full_detail_memory_per_series_is_bounded():
    client = _client(max_full_series=200)
    peaks = {}
    for count in (50, 200):
        body = _body(count)
        tracemalloc.start()
        res = client.post("/v1/batch", data=body, content_type="application/json")
        peaks[count] = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
        assert res.status_code == 200
    per_series = (peaks[200] - peaks[50]) / 150
    print(f"\nJSON detail=full: peak {peaks[50] / 1e6:.1f} MB at 50 series, "
          f"{peaks[200] / 1e6:.1f} MB at 200; {per_series / 1e3:.1f} KB a series")
    # the README's figure (about 30 KB a report) with room for allocator noise; the
    # limit of 2,000 series then bounds a request to well under 200 MB
    assert per_series < 80e3
