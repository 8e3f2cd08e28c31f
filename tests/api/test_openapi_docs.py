"""The served contract documents itself: /openapi.json (OpenAPI 3.1), /docs (offline HTML),
/problems/* pages, and the README's error catalogue matches the server's.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
MY_PATHS = ("/v1/fit", "/v1/families", "/healthz", "/readyz", "/docs", "/problems/{code}")


@pytest.fixture(scope="module")
def spec():
    from service.app import create_app

    return create_app({}).test_client().get("/openapi.json").get_json()


def _refs(node, found: set[str]) -> None:
    if isinstance(node, dict):
        ref = node.get("$ref", "")
        if ref.startswith("#/components/schemas/"):
            found.add(ref.rsplit("/", 1)[-1])
        for value in node.values():
            _refs(value, found)
    elif isinstance(node, list):
        for value in node:
            _refs(value, found)


def _reachable(spec, paths) -> set[str]:
    names: set[str] = set()
    for path in paths:
        _refs(spec["paths"][path], names)
    for response in spec["components"]["responses"].values():
        _refs(response, names)
    while True:
        more = set(names)
        for name in names:
            _refs(spec["components"]["schemas"][name], more)
        if more == names:
            return names
        names = more


def test_openapi_is_3_1_and_lists_the_paths(spec):
    assert spec["openapi"].startswith("3.1")
    for path in MY_PATHS:
        assert path in spec["paths"], path


def test_every_path_of_the_readme_endpoint_table_is_in_the_document(spec):
    """The README's "## Endpoints" table and /openapi.json list the same public paths
    (/openapi.json itself is the document, not a path in it)."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    table = text.split("## Endpoints", 1)[1].split("\n\n", 2)[1]
    listed = {path.strip() for row in table.splitlines() if row.startswith(("| GET", "| POST"))
              for path in row.split("|")[2].split(",")}
    assert "/docs/examples/{file}" in listed
    assert listed - {"/openapi.json"} <= set(spec["paths"]), listed - set(spec["paths"])
    operation = spec["paths"]["/docs/examples/{file}"]["get"]
    assert {"200", "404"} <= set(operation["responses"]), operation["responses"]


def test_every_field_of_the_contract_has_a_description(spec):
    schemas = spec["components"]["schemas"]
    missing = [f"{name}.{field}" for name in sorted(_reachable(spec, MY_PATHS))
               for field, prop in schemas[name].get("properties", {}).items()
               if not prop.get("description") and "$ref" not in prop]
    assert not missing, missing


def test_fit_documents_request_response_and_problem_errors(spec):
    operation = spec["paths"]["/v1/fit"]["post"]
    assert operation["summary"]
    assert operation["requestBody"]["content"]["application/json"]["schema"]["$ref"].endswith(
        "/FitRequest")
    for status in ("200", "400", "413", "415", "422"):
        assert status in operation["responses"], status
    for path in ("/v1/fit", "/v1/batch", "/v1/predict", "/v1/invert", "/v1/plot"):
        problem = spec["paths"][path]["post"]["responses"]["422"]
        assert problem["content"]["application/problem+json"]["schema"]["$ref"].endswith(
            "/Problem"), path
        assert problem["description"].startswith("Unprocessable Entity: "), path
    x = spec["components"]["schemas"]["FitRequest"]["properties"]["x"]
    assert x["type"] == "array" and "number" in x["items"]["type"]


def test_docs_page_is_offline_and_covers_every_operation(client, spec):
    page = client.get("/docs")
    assert page.status_code == 200 and page.mimetype == "text/html"
    html = page.get_data(as_text=True)
    assert "<script" not in html.lower()
    assert not re.search(r"""(src|href)\s*=\s*['"]?(https?:)?//""", html), "external resource"
    for path, operations in spec["paths"].items():
        for method in set(operations) & {"get", "post", "put", "patch", "delete"}:
            assert f"{method.upper()}</span> <code>{path}</code>" in html, (method, path)
    for field in spec["components"]["schemas"]["FitRequest"]["properties"]:
        assert f"<code>{field}</code>" in html


@pytest.mark.parametrize("base", ["http://curves.example:9123", "https://10.1.2.3",
                                  "http://[::1]:8771"])
def test_docs_curl_lines_name_the_server_that_serves_the_page(client, base):
    html = client.get("/docs", base_url=base).get_data(as_text=True)
    assert f"curl -s -X POST {base}/v1/fit " in html
    assert f"curl -s {base}/docs/examples/" in html  # the long bodies are fetched from it
    assert "127.0.0.1:8000" not in html


def test_docs_keep_the_placeholder_for_a_host_that_is_not_plain(client):
    """A forged Host header never reaches the page (HTML) or its curl lines (shell)."""
    html = client.get("/docs", headers={"Host": "x.example;rm$IFS-rf"}).get_data(as_text=True)
    assert "curl -s -X POST http://127.0.0.1:8000/v1/fit " in html and "rm$IFS" not in html


def test_readme_error_catalogue_matches_the_server():
    from service.http.problems import CATALOGUE

    readme = (ROOT / "README.md").read_text()
    rows = set(re.findall(r"^\| (\d{3}) \| `([a-z_]+)` \|", readme, flags=re.M))
    server = {(str(kind.status), code) for code, kind in CATALOGUE.items()}
    assert server <= rows, server - rows
    assert rows <= server, rows - server


def test_readme_quickstart_is_exactly_two_commands():
    readme = (ROOT / "README.md").read_text()
    block = readme.split("## Quickstart", 1)[1].split("```sh", 1)[1].split("```", 1)[0]
    commands = [line.split("#")[0].strip() for line in block.strip().splitlines()]
    assert commands == ["make run", "make test"]
    assert "regulat" in readme and "qualified" in readme  # the caution for regulated use


def test_full_fit_answers_validate_against_the_served_schema(client, spec):
    # The response is built directly (not dumped by marshmallow), so check it against the
    # published contract with an independent JSON Schema validator (Draft 2020-12, as
    # OpenAPI 3.1 uses), for a fixed-degree, a selected, a weighted and a dropped fit.
    import jsonschema_rs  # the validator schemathesis itself uses
    import orjson

    from tests.api.helpers import post_json

    validator = jsonschema_rs.Draft202012Validator(
        {"$ref": "#/components/schemas/FitResponse", "components": spec["components"]})
    strict = spec["components"]["schemas"]["FitResponse"]
    x = [0.5 * i for i in range(1, 21)]
    y = [1.0 + 0.3 * v - 0.02 * v * v + (0.1 if i % 3 else -0.1) for i, v in enumerate(x)]
    bodies = [{"x": x, "y": y, "model": {"degree": 2}},
              {"x": x, "y": y, "model": {"max_degree": 4, "select": "bic"}, "grid": None},
              {"x": x, "y": y, "weights": [1.0 + (i % 4) for i in range(20)]},
              {"x": [None] + x[1:], "y": y, "missing": "drop", "include": ["coefficients"]}]
    for body in bodies:
        answer = orjson.loads(post_json(client, "/v1/fit", body).data)
        errors = [str(e)[:300] for e in validator.iter_errors(answer)]
        assert not errors, errors[:5]
        assert set(answer) <= set(strict["properties"])
