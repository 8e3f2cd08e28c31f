"""The files the /docs page's curl lines fetch: each operation's request example, and the
figure of the /v1/plot example (drawn by the plot view itself, once per process).

Plain Flask routes under /docs (public whenever /docs is), not API operations: like
/openapi.json, they are part of the documentation, not of the contract.
"""

from __future__ import annotations

from flask import Blueprint, Response, current_app
from flask_smorest import abort

from service.http.examples import EXAMPLES_PREFIX, load, request_name
from service.http.jsonio import dumps_bytes

bp = Blueprint("doc_examples", __name__)


@bp.get(EXAMPLES_PREFIX + "<string:name>")
def example_file(name: str):
    """A request example as JSON, or the plot example's figure."""
    for key, example in load().items():
        if "request" in example and name == request_name(key):
            return Response(dumps_bytes(example["request"]), mimetype="application/json")
        if example.get("external") == EXAMPLES_PREFIX + name:
            return _drawn(key, example)
    abort(404, message=f"No example {name!r}. The /docs page links every example file.")


def _drawn(key: str, example: dict) -> Response:
    """The answer of the example's own view to its request (cached: same body, same bytes)."""
    cache = current_app.extensions.setdefault("curvewise-doc-examples", {})
    if key not in cache:
        method, path = key.split(" ", 1)
        with current_app.test_request_context(path, method=method.upper(),
                                              json=example["request"]):
            adapter = current_app.url_map.bind("localhost")
            endpoint, _ = adapter.match(path, method=method.upper())
            answer = current_app.ensure_sync(current_app.view_functions[endpoint])()
            cache[key] = (answer.get_data(), answer.mimetype)
    data, mimetype = cache[key]
    return Response(data, mimetype=mimetype)
