"""The examples of /openapi.json and /docs are real and current (no browser needed).

service/http/examples.json is written by scripts/make_api_examples.py from the invented
demo scenarios. Here: the stored requests are still what the script builds; every request,
sent again, gets the stored status and an answer of which the stored one is an exact copy
or an abbreviation (list items or optional members left out, a text cut short); every
example validates against its OpenAPI schema with an independent JSON Schema validator
(Draft 2020-12, as OpenAPI 3.1 uses); every operation carries examples and a curl line,
and every curl line runs as written against a real server (when curl is installed); the
page shows defaults as JSON and no framework leftovers.
"""

from __future__ import annotations

import importlib.util
import json
import math
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def _script():
    spec = importlib.util.spec_from_file_location("make_api_examples",
                                                  ROOT / "scripts" / "make_api_examples.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def api():
    from service.app import create_app

    app = create_app({})
    app.config["TESTING"] = True
    return app.test_client()


@pytest.fixture(scope="module")
def spec(api):
    return api.get("/openapi.json").get_json()


@pytest.fixture(scope="module")
def stored():
    from service.http.examples import load

    return load()


def _same_or_shorter(short, full, path="") -> list[str]:
    """Where ``short`` is not ``full`` with list tails or object members left out."""
    if isinstance(short, dict) and isinstance(full, dict):
        return [f"{path}.{k}: not in the answer" for k in short if k not in full] + [
            d for k in short if k in full for d in _same_or_shorter(short[k], full[k],
                                                                    f"{path}.{k}")]
    if isinstance(short, list) and isinstance(full, list):
        if len(short) > len(full):
            return [f"{path}: {len(short)} items, the answer has {len(full)}"]
        return [d for i, (a, b) in enumerate(zip(short, full, strict=False))
                for d in _same_or_shorter(a, b, f"{path}[{i}]")]
    if isinstance(short, float) or isinstance(full, float):
        if (isinstance(short, (int, float)) and isinstance(full, (int, float))
                and math.isclose(short, full, rel_tol=1e-9, abs_tol=1e-12)):
            return []
    elif short == full and type(short) is type(full):
        return []
    return [f"{path}: stored {short!r}, answered {full!r}"]


def _exact(short, full) -> list[str]:
    differences = _same_or_shorter(short, full)
    if differences:
        return differences
    return _same_or_shorter(full, short)  # and nothing left out


def test_the_stored_requests_are_what_the_script_builds(api, stored):
    built = _script().build_requests(api)
    assert set(built) == set(stored)
    for key, example in built.items():
        for field in ("request", "url", "parameters", "summary", "name"):
            assert example.get(field) == stored[key].get(field), (key, field)


def test_every_stored_answer_is_the_apps_answer(api, stored):
    send = _script().send
    for key, example in stored.items():
        answer = send(api, key, example)
        assert answer.status_code == example["status"], (key, answer.data[:300])
        assert answer.mimetype == example["media_type"], key
        how = example.get("abbreviated")
        if example["media_type"] == "application/json":
            compare = _same_or_shorter if how == "items" else _exact
            differences = compare(example["response"], answer.get_json())
            assert not differences, (key, differences[:5])
        elif example["media_type"].startswith("text/"):
            text = answer.get_data(as_text=True)
            if how == "prefix":
                assert text.startswith(example["response"]), key
            else:
                assert how == "lines", key
                assert set(example["response"].splitlines()) <= set(text.splitlines()), key
        else:  # a figure: served under /docs/examples, the same bytes as the operation's
            assert api.get(example["external"]).data == answer.data, key


def _validator(schema: dict, spec: dict):
    import jsonschema_rs  # the validator schemathesis itself uses

    return jsonschema_rs.Draft202012Validator({**schema, "components": spec["components"]})


def test_every_example_in_the_document_validates_against_its_schema(spec, stored):
    checked = 0
    for path, operations in spec["paths"].items():
        for method, operation in operations.items():
            if method not in ("get", "post"):
                continue
            bodies = [item for item in operation.get("requestBody", {}).get("content",
                                                                           {}).values()]
            bodies += [item for response in operation["responses"].values()
                       for item in (response.get("content") or {}).values()]
            for item in bodies:
                for name, example in item.get("examples", {}).items():
                    if "value" not in example:
                        continue
                    errors = [str(e)[:200] for e in
                              _validator(item["schema"], spec).iter_errors(example["value"])]
                    assert not errors, (method, path, name, errors[:3])
                    checked += 1
    expected = sum(("request" in e) + ("response" in e) for e in stored.values())
    assert checked == expected, (checked, expected)


def test_every_operation_has_examples_and_a_curl_line(spec):
    for path, operations in spec["paths"].items():
        for method, operation in operations.items():
            if method not in ("get", "post"):
                continue
            where = f"{method} {path}"
            assert operation.get("x-codeSamples"), where
            assert operation["x-codeSamples"][0]["source"].startswith("curl -s "), where
            if "requestBody" in operation:
                assert operation["requestBody"]["content"]["application/json"].get(
                    "examples"), where
            assert any(item.get("examples") for response in operation["responses"].values()
                       for item in (response.get("content") or {}).values()), where


def test_the_served_request_files_are_the_examples(api, stored):
    from service.http.examples import EXAMPLES_PREFIX, request_name

    for key, example in stored.items():
        if "request" in example:
            served = api.get(EXAMPLES_PREFIX + request_name(key))
            assert served.status_code == 200 and served.get_json() == example["request"], key
    assert api.get(EXAMPLES_PREFIX + "nothing.json").status_code == 404


def test_the_page_shows_json_defaults_and_no_framework_leftovers(api, spec):
    html = api.get("/docs").get_data(as_text=True)
    assert "PaginationMetadata" not in json.dumps(spec)
    shown_defaults = set(re.findall(r"Default: <code>([^<]*)</code>", html))
    assert shown_defaults and not shown_defaults & {"None", "True", "False"}, shown_defaults
    assert "null" in shown_defaults and "true" in shown_defaults
    assert "<td>any</td>" not in html
    assert re.search(r"<td><code>model</code></td><td><a href='#schema-Model'>", html)


def test_every_curl_line_runs_as_written(stored, tmp_path):
    # each operation's curl line (x-codeSamples), against a real server on a free port
    import shutil
    import subprocess
    import threading

    from werkzeug.serving import make_server

    from service.app import create_app
    from service.http.examples import BASE_URL, curl_line

    if shutil.which("curl") is None:
        pytest.skip("curl not found: the curl lines of /docs are not run")
    httpd = make_server("127.0.0.1", 0, create_app({}), threaded=True)
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    try:
        base = f"http://127.0.0.1:{httpd.server_port}"
        for key, example in stored.items():
            line = curl_line(key, example).replace(BASE_URL, base)
            ran = subprocess.run(["bash", "-c", line + " -w '\\n%{http_code}'"],
                                 capture_output=True, timeout=60, cwd=tmp_path)
            assert ran.returncode == 0, (key, ran.stderr[-300:])
            assert ran.stdout.rsplit(b"\n", 1)[-1] == str(example["status"]).encode(), key
            if example.get("output"):
                assert (tmp_path / example["output"]).read_bytes().startswith(b"\x89PNG")
    finally:
        httpd.shutdown()
        thread.join(5)
