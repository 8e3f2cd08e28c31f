"""Request and response examples of every operation, carried by the OpenAPI document.

The examples live in ``examples.json`` beside this module, written by
``scripts/make_api_examples.py`` from the invented demo scenarios of
``scripts/demo_data.py``: each request was run against the app and its answer
stored (abbreviated only by leaving out list items or optional members, so the
schema still validates it). ``tests/api/test_docs_examples.py`` runs every
request again and checks the stored answer against the fresh one.

:class:`ExamplesPlugin` (an apispec plugin) puts them into each operation as
OpenAPI ``examples`` together with a runnable curl line (``x-codeSamples``), so
``/openapi.json`` and the ``/docs`` page show the same examples.
"""

from __future__ import annotations

import json
from functools import cache
from pathlib import Path
from shlex import quote

from apispec import BasePlugin

EXAMPLES_FILE = Path(__file__).with_name("examples.json")
BASE_URL = "http://127.0.0.1:8000"
EXAMPLES_PREFIX = "/docs/examples/"  # served request bodies (and the plot example's figure)
INLINE_LIMIT = 400  # longer request bodies are fetched from EXAMPLES_PREFIX in the curl line


@cache
def load() -> dict[str, dict]:
    """The stored examples keyed by ``"<method> <path>"`` (e.g. ``"post /v1/fit"``)."""
    return json.loads(EXAMPLES_FILE.read_text(encoding="utf-8"))


def request_name(key: str) -> str:
    """The file name under :data:`EXAMPLES_PREFIX` of an operation's request example."""
    return key.split(" ", 1)[1].strip("/").replace("/", "-").replace("{", "").replace(
        "}", "") + ".json"


def curl_line(key: str, example: dict) -> str:
    """A curl command that sends the example's request to a server on :data:`BASE_URL`."""
    method, path = key.split(" ", 1)
    target = BASE_URL + example.get("url", path)
    if method == "get":
        return f"curl -s {target}"
    body = json.dumps(example["request"], separators=(",", ":"), ensure_ascii=False)
    out = f" -o {example['output']}" if example.get("output") else ""
    head = f"curl -s -X POST {target} -H 'Content-Type: application/json'"
    if len(body) <= INLINE_LIMIT:
        return f"{head} --data {quote(body)}{out}"
    source = BASE_URL + EXAMPLES_PREFIX + request_name(key)
    return f"curl -s {source} | {head} --data-binary @-{out}"


def _example(summary: str, value) -> dict:
    return {"summary": summary, "value": value}


class ExamplesPlugin(BasePlugin):
    """Adds the stored examples and a curl line to every operation that has them."""

    def path_helper(self, path=None, operations=None, parameters=None, **kwargs) -> None:
        """Path parameters (``/problems/{code}``) get the example's value."""
        for method in operations or {}:
            example = load().get(f"{method} {path}", {})
            for parameter in parameters or []:
                value = example.get("parameters", {}).get(parameter.get("name"))
                if isinstance(parameter, dict) and value is not None:
                    parameter["example"] = value

    def operation_helper(self, path=None, operations=None, **kwargs) -> None:
        for method, operation in (operations or {}).items():
            example = load().get(f"{method} {path}")
            if example is None:
                continue
            name = example["name"]
            operation["x-codeSamples"] = [{"lang": "Shell", "label": "curl",
                                           "source": curl_line(f"{method} {path}", example)}]
            body = operation.get("requestBody", {}).get("content", {})
            if "request" in example and "application/json" in body:
                body["application/json"]["examples"] = {
                    name: _example(example["summary"], example["request"])}
            responses = operation.get("responses", {})  # keys: ints from flask-smorest
            answer = responses.get(example["status"]) or responses.get(str(example["status"]))
            content = answer.get("content") or {} if isinstance(answer, dict) else {}
            media = example["media_type"]
            if media in content:
                entry = {"summary": example["response_summary"]}
                if "external" in example:
                    entry["externalValue"] = example["external"]
                else:
                    entry["value"] = example["response"]
                content[media]["examples"] = {name: entry}
