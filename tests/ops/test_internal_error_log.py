"""A 500 (a bug) is logged once: one ERROR record, with the traceback, naming method and path.

Common practice: one log entry per failure, so alert counts and log searches do not double.
"""

from __future__ import annotations

import json
import logging

from service.app import create_app
from service.runtime import logs


class _Records(logging.Handler):
    def __init__(self) -> None:
        super().__init__(level=logging.DEBUG)
        self.records: list[logging.LogRecord] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.records.append(record)


def test_unhandled_exception_gives_one_error_line_with_its_traceback():
    app = create_app({})

    @app.post("/test-only/crash")
    def crash():
        raise RuntimeError("probe crash 5c1e")

    records = _Records()
    logger = logging.getLogger("curvewise")  # the app's logger and its children
    logger.addHandler(records)
    try:
        response = app.test_client().post("/test-only/crash")
    finally:
        logger.removeHandler(records)

    assert response.status_code == 500
    assert response.mimetype == "application/problem+json"
    assert response.get_json()["code"] == "internal_error"
    assert "probe crash" not in response.get_data(as_text=True)  # no internals in the answer
    errors = [r for r in records.records if r.levelno >= logging.ERROR]
    assert len(errors) == 1, [r.getMessage() for r in errors]
    (entry,) = errors
    assert entry.exc_info is not None and isinstance(entry.exc_info[1], RuntimeError)
    assert "POST" in entry.getMessage() and "/test-only/crash" in entry.getMessage()
    line = json.loads(logs.JsonFormatter().format(entry))
    assert line["exception"].count("RuntimeError: probe crash 5c1e") == 1
