"""The compute deadline and the early 413, through the Flask test client (main thread)."""

from __future__ import annotations

import io
import signal
import time

import pytest
from flask import Response

from service.app import create_app
from service.runtime import guard

LIMIT = 0.3


def assert_outer_timer_kept(before: tuple[float, float]) -> None:
    """Our timer is gone; whatever ran before (pytest-timeout's, or none) runs on."""
    left, interval = signal.getitimer(signal.ITIMER_REAL)
    if before[0] == 0:
        assert (left, interval) == (0.0, 0.0)
    else:
        assert 0 < left <= before[0] and interval == before[1]


@pytest.fixture
def guarded():
    app = create_app({"request_timeout": LIMIT, "max_body_bytes": 1000})

    @app.get("/test-only/spin")
    def spin():
        deadline = time.monotonic() + 10  # bounded: far past LIMIT
        while time.monotonic() < deadline:
            sum(range(1000))
        return {"finished": True}

    @app.get("/test-only/swallow")
    def swallow():
        deadline = time.monotonic() + 10
        swallowed = 0
        while time.monotonic() < deadline:
            try:
                while time.monotonic() < deadline:
                    sum(range(1000))
            except Exception:  # a careless broad except in some handler
                swallowed += 1
        return {"finished": True, "swallowed": swallowed}

    @app.get("/test-only/stream")
    def stream():
        def rows():
            for i in range(1000):
                time.sleep(0.01)
                yield f"{i}\n"
        return Response(rows(), mimetype="application/x-ndjson")

    @app.get("/test-only/quick")
    def quick():
        return {"ok": True}

    return app


def test_runaway_request_stopped_with_503_problem(guarded):
    client = guarded.test_client()
    before = signal.getitimer(signal.ITIMER_REAL)
    started = time.monotonic()
    response = client.get("/test-only/spin")
    elapsed = time.monotonic() - started
    assert response.status_code == 503
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["code"] == "timeout" and "CURVEWISE_REQUEST_TIMEOUT" in body["detail"]
    assert elapsed < LIMIT + 2, elapsed  # well before the view's own 10 s
    assert_outer_timer_kept(before)


def test_swallowed_timeout_fires_again(guarded):
    started = time.monotonic()
    response = guarded.test_client().get("/test-only/swallow")
    assert response.status_code == 503
    assert time.monotonic() - started < LIMIT + guard.REPEAT_SECONDS + 2


def test_streamed_body_is_guarded_too(guarded):
    client = guarded.test_client()
    before = signal.getitimer(signal.ITIMER_REAL)
    with pytest.raises(guard.ComputeTimeout):
        # headers are out already; the server can only cut the stream (gunicorn closes it)
        b"".join(client.get("/test-only/stream", buffered=True).response)
    assert_outer_timer_kept(before)


def test_quick_requests_untouched_and_timer_restored(guarded):
    client = guarded.test_client()
    before = signal.getsignal(signal.SIGALRM)
    timer = signal.getitimer(signal.ITIMER_REAL)
    for _ in range(5):
        assert client.get("/test-only/quick").status_code == 200
    assert_outer_timer_kept(timer)
    assert signal.getsignal(signal.SIGALRM) is before


def test_guard_stands_aside_off_the_main_thread(guarded):
    import threading
    result = {}

    def run():
        result["usable"] = guard.timer_usable()
        result["status"] = guarded.test_client().get("/test-only/quick").status_code

    worker = threading.Thread(target=run)
    worker.start()
    worker.join(10)
    assert result == {"usable": False, "status": 200}


def test_declared_oversize_body_refused_before_reading(guarded):
    client = guarded.test_client()

    class Unreadable(io.BytesIO):
        def read(self, *args):
            raise AssertionError("the body was read")
        readline = readlines = read1 = readinto = read

    response = client.post("/v1/fit", content_type="application/json",
                           environ_overrides={"CONTENT_LENGTH": "5000",
                                              "wsgi.input": Unreadable()})
    assert response.status_code == 413
    assert response.mimetype == "application/problem+json"
    body = response.get_json()
    assert body["code"] == "body_too_large" and "5000" in body["detail"]


def test_an_outer_timer_survives_requests(guarded):
    """A timer armed before the request (pytest-timeout does this) keeps running after it."""
    fired = []
    previous = signal.signal(signal.SIGALRM, lambda *a: fired.append(True))
    try:
        signal.setitimer(signal.ITIMER_REAL, 5.0)
        assert guarded.test_client().get("/test-only/quick").status_code == 200
        left, _ = signal.getitimer(signal.ITIMER_REAL)
        assert 3.0 < left <= 5.0
        signal.setitimer(signal.ITIMER_REAL, 0.2)
        assert guarded.test_client().get("/test-only/quick").status_code == 200
        deadline = time.monotonic() + 5
        while not fired and time.monotonic() < deadline:
            time.sleep(0.01)
        assert fired == [True]  # the outer handler, not the guard's, got the signal
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
