"""Small untruths fixed at their root: every message is ours and says what is true.

- A UTF-8 byte order mark before JSON is skipped (RFC 8259 section 8.1 lets a parser ignore
  it); a body sent with a Content-Encoding the server does not decode is a 415 (RFC 9110
  section 15.5.16, RFC 7694), never "not valid UTF-8".
- Degree limits in messages are this server's (CURVEWISE_MAX_DEGREE), not the core's ceiling.
- No answer carries marshmallow's stock texts: a missing field, nested document or list says
  what to do, like every other field.
- gunicorn's guess "Perhaps out of memory?" for a SIGKILLed worker is replaced by what is
  known (a unit test of the log filter, and a live kill with the server's log read back).
"""

from __future__ import annotations

import copy
import gzip
import logging
import os
import signal
import time
import zlib

import orjson
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.app import create_app
from service.runtime.logs import WorkerSignalFilter
from tests.api.helpers import assert_problem

FIT = {"x": [1.0, 2.0, 3.0, 4.0, 5.0], "y": [1.1, 2.3, 2.9, 4.2, 4.8], "model": {"degree": 1}}
STOCK_TEXTS = ("Missing data for required field.", "Field may not be null.", "Not a valid list.",
               "Not a valid mapping type.", "Invalid input type.", "Invalid value.")


@pytest.fixture(scope="module")
def api():
    app = create_app({"max_degree": 6})
    app.config["TESTING"] = True
    return app.test_client()


@pytest.fixture(scope="module")
def document(api):
    return api.post("/v1/fit", json=FIT).get_json()["fitted_model"]


def test_a_byte_order_mark_before_json_is_skipped(api):
    answer = api.post("/v1/fit", data=b"\xef\xbb\xbf" + orjson.dumps(FIT),
                      content_type="application/json")
    assert answer.status_code == 200, answer.get_json()


def test_invalid_utf8_is_still_called_so(api):
    body = assert_problem(api.post("/v1/fit", data=b'{"x": [1, 2], "y": "\xff"}',
                                   content_type="application/json"), 400, "invalid_json")
    assert "UTF-8" in body["detail"]


CODINGS = {"gzip": gzip.compress, "x-gzip": gzip.compress, "deflate": zlib.compress,
           "br": lambda b: b, "compress": lambda b: b, "zstd": lambda b: b}


@pytest.mark.parametrize("coding", sorted(CODINGS))
@pytest.mark.parametrize("path, media", [("/v1/fit", "application/json"),
                                         ("/v1/batch", "application/x-ndjson")])
def test_a_content_encoding_is_a_415_naming_it(api, coding, path, media):
    raw = orjson.dumps(FIT) + (b"\n" if media.endswith("ndjson") else b"")
    answer = api.post(path, data=CODINGS[coding](raw), content_type=media,
                      headers={"Content-Encoding": coding})
    body = assert_problem(answer, 415, "unsupported_media_type")
    assert coding in body["detail"] and "UTF-8" not in body["detail"]


def test_identity_encoding_is_plain(api):
    answer = api.post("/v1/fit", data=orjson.dumps(FIT), content_type="application/json",
                      headers={"Content-Encoding": "identity"})
    assert answer.status_code == 200


@pytest.mark.parametrize("model, field", [
    ({"degree": 0, "intercept": False}, "model.degree"),
    ({"max_degree": 3, "min_degree": 0, "intercept": False}, "model.min_degree"),
])
def test_degree_ranges_in_messages_are_this_servers(api, model, field):
    body = assert_problem(api.post("/v1/fit", json={**FIT, "model": model}), 422,
                          "invalid_spec", field)
    assert "1 to 6" in body["detail"] and "12" not in body["detail"], body["detail"]


def _requests(document):
    yield "/v1/fit", dict(FIT)
    yield "/v1/predict", {"fitted_model": dict(document), "x": [2.0]}
    yield "/v1/invert", {"fitted_model": dict(document), "y": [2.0]}
    yield "/v1/batch", {"series": [dict(FIT)]}
    yield "/v1/fit", {**FIT, "model": {"family": "expression", "expression": "a*x",
                                       "parameters": {"a": 1.0}}}


@settings(max_examples=60, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(which=st.integers(0, 4), key_index=st.integers(0, 40),
       edit=st.sampled_from(["drop", "null", "number", "string", "object", "list"]),
       nested=st.booleans())
def test_no_answer_carries_marshmallows_stock_texts(api, document, which, key_index, edit,
                                                     nested):
    path, body = copy.deepcopy(list(_requests(document))[which])
    target = body["fitted_model"] if nested and "fitted_model" in body else (
        body["model"] if nested and "model" in body else body)
    key = sorted(target)[key_index % len(target)]
    if edit == "drop":
        del target[key]
    else:
        target[key] = {"null": None, "number": 7, "string": "x", "object": {"a": 1},
                       "list": [1, "a"]}[edit]
    answer = api.post(path, data=orjson.dumps(body), content_type="application/json")
    assert answer.status_code < 500, answer.data[:300]
    if answer.status_code != 200:
        messages = [m for ms in answer.get_json()["errors"].values() for m in ms]
        assert not any(text in m for text in STOCK_TEXTS for m in messages), messages


def test_a_missing_document_says_what_to_do(api):
    body = assert_problem(api.post("/v1/predict", json={"x": [1.0]}), 422, "validation_error",
                          "fitted_model")
    assert body["errors"]["fitted_model"] == ["Missing required field. Add it; see /docs for "
                                              "its meaning."]


def test_the_sigkill_guess_is_replaced_by_what_is_known(caplog):
    logger = logging.getLogger("test.gunicorn.error")
    logger.addFilter(WorkerSignalFilter())
    with caplog.at_level(logging.ERROR, logger="test.gunicorn.error"):
        # gunicorn's arbiter message, word for word
        logger.error("Worker (pid:%s) was sent %s! Perhaps out of memory?", 4242, "SIGKILL")
        logger.error("Worker (pid:%s) exited with code %s.", 4243, 1)
    first, second = caplog.records
    assert "Perhaps out of memory" not in first.getMessage()
    assert "SIGKILL" in first.getMessage() and first.fields["event"] == "worker_killed"
    assert second.getMessage() == "Worker (pid:4243) exited with code 1."


@pytest.mark.live
def test_a_killed_worker_is_logged_without_the_guess(tmp_path):
    from tests.ops.harness import server

    log_path = tmp_path / "server.log"
    with server(workers=2, log_path=log_path) as srv:
        victim = srv.workers()[0]
        os.kill(victim, signal.SIGKILL)
        srv.wait_workers(2, exclude=(victim,))
        time.sleep(0.2)
    text = log_path.read_text(errors="replace")
    killed = [line for line in text.splitlines() if str(victim) in line and "SIGKILL" in line]
    assert killed and all("Perhaps out of memory" not in line for line in killed), killed
    assert all(orjson.loads(line)["event"] == "worker_killed" for line in killed)
