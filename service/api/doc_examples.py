"""The files the /docs page's curl lines fetch: each operation's request example, and the
figure of the /v1/plot example (drawn by the plot view itself, once per process).

Documented in /openapi.json beside /docs (the published curl lines and the plot example's
``externalValue`` point here), and public whenever /docs is.
"""

from __future__ import annotations

from flask import Response, current_app
from flask_smorest import Blueprint, abort

from service.api.error_docs import error_responses
from service.http.examples import EXAMPLES_PREFIX, load, request_name
from service.http.jsonio import dumps_bytes

blp = Blueprint("doc_examples", __name__, description="The example files /docs links.")

_FILE = {"description": "A request example (JSON), or the /v1/plot example's figure.",
         "content": {"application/json": {"schema": {"type": "object"}},
                     "image/png": {"schema": {"type": "string", "format": "binary"}}}}


@blp.route(EXAMPLES_PREFIX + "<string:file>", methods=["GET"])
@blp.doc(responses={"200": _FILE})
@error_responses(blp, {404: "No example file of that name (the curl lines of /docs name "
                            "each one)."})
def example_file(file: str):
    """A request example that a /docs curl line fetches, or the plot example's figure."""
    for key, example in load().items():
        if "request" in example and file == request_name(key):
            return Response(dumps_bytes(example["request"]), mimetype="application/json")
        if example.get("external") == EXAMPLES_PREFIX + file:
            return _drawn(key, example)
    abort(404, message=f"No example {file!r}. The /docs page links every example file.")


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
