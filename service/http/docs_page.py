"""Human-readable pages rendered on the server, with no script and no CDN.

``/docs`` is the served OpenAPI document rendered as one static HTML page: a
table of contents, then each operation (in the order a user needs them: fit,
batch, predict, invert, plot, then the GET endpoints) with its request body,
responses, curl line and examples, then every schema as a table of fields
(type, required, description, default as JSON) with links between schemas.
Every heading has an anchor the table of contents links to.
``/problems/<code>`` pages explain one error code (:mod:`service.http.problem_pages`).
"""

from __future__ import annotations

import json
import re
from html import escape

STYLE = """body{font:15px/1.5 system-ui,sans-serif;max-width:62rem;margin:2rem auto;padding:0 1rem;
color:#1b1b1b}code,pre{font:13px ui-monospace,monospace;background:#f3f3f3;padding:0 .2rem}
pre{padding:.5rem;overflow-x:auto;white-space:pre-wrap;word-break:break-word}
table{border-collapse:collapse;width:100%;margin:.5rem 0 1.5rem}th,td{border:1px solid #ccc;
padding:.25rem .5rem;text-align:left;vertical-align:top}th{background:#f6f6f6}
h2{border-bottom:2px solid #333;margin-top:2.5rem}h3{margin-bottom:.2rem}.m{font-weight:700}
nav ol{columns:2}nav li{margin:.1rem 0}details{margin:.3rem 0}summary{cursor:pointer}
img{max-width:100%;border:1px solid #ccc}"""
FIRST_OPERATIONS = ("/v1/fit", "/v1/batch", "/v1/predict", "/v1/invert", "/v1/plot")
METHODS = ("post", "get", "put", "patch", "delete")
OPEN_LINES = 30  # examples up to this many lines are shown unfolded
PLAIN_BASE_URL = re.compile(r"https?://(?:[A-Za-z0-9.-]+|\[[0-9A-Fa-f:.]+\])(?::[0-9]{1,5})?"
                            r"(?:/[A-Za-z0-9._~-]+)*")
"""A base URL safe to write into a curl line and into HTML as it is (no quote, space or
shell character); any other (a forged Host header) keeps the examples' placeholder."""


def with_base_url(page: str, placeholder: str, base_url: str) -> str:
    """The page with the examples' ``placeholder`` server (``http://127.0.0.1:8000``)
    replaced by ``base_url``, the URL the page is served from, so its curl lines run as
    shown; unchanged when ``base_url`` is not a plain http(s) URL."""
    base_url = base_url.rstrip("/")
    if not PLAIN_BASE_URL.fullmatch(base_url):
        return page
    return page.replace(placeholder, base_url)


def page(title: str, body: str) -> str:
    """A whole HTML page with the shared style."""
    return (f"<!doctype html><html lang=en><head><meta charset=utf-8><title>{escape(title)}"
            f"</title><meta name=viewport content='width=device-width'><style>{STYLE}</style>"
            f"</head><body>{body}</body></html>")


def operation_anchor(method: str, path: str) -> str:
    """The id of an operation's section, e.g. ``op-post-v1-fit``."""
    return "op-" + method + "-" + re.sub(r"[^a-z0-9]+", "-", path.lower()).strip("-")


def _ref_name(ref: str) -> str:
    return ref.rsplit("/", 1)[-1]


def _type(prop: dict) -> str:
    """A field's type as HTML, linking named schemas; never a bare "any"."""
    if "$ref" in prop:
        name = _ref_name(prop["$ref"])
        return f"<a href='#schema-{escape(name)}'>{escape(name)}</a>"
    for key in ("oneOf", "anyOf", "allOf"):
        if prop.get(key):
            joiner = " and " if key == "allOf" else " | "
            return joiner.join(_type(p) for p in prop[key])
    kind = prop.get("type")
    if kind is None:
        return "any JSON value"
    kinds = kind if isinstance(kind, list) else [kind]
    shown = []
    for one in kinds:
        if one == "array" and isinstance(prop.get("items"), dict):
            shown.append(f"array of {_type(prop['items'])}")
        elif one == "object" and isinstance(prop.get("additionalProperties"), dict):
            shown.append(f"object of {_type(prop['additionalProperties'])}")
        else:
            shown.append(escape(one))
    text = " | ".join(shown)
    if prop.get("enum"):
        text += ": " + ", ".join(f"<code>{escape(json.dumps(v))}</code>" for v in prop["enum"]
                                 if v is not None)
    return text


def _default(prop: dict) -> str:
    if "default" in prop:
        return f" Default: <code>{escape(json.dumps(prop['default'], ensure_ascii=False))}</code>."
    return ""


def _schema_table(schema: dict) -> str:
    props = schema.get("properties", {})
    if not props:
        return f"<p>Type: {_type(schema)}.</p>" if schema.get("type") else (
            "<p>Free-form object.</p>")
    required = set(schema.get("required", []))
    rows = "".join(
        f"<tr><td><code>{escape(name)}</code></td><td>{_type(prop)}</td>"
        f"<td>{'yes' if name in required else ''}</td>"
        f"<td>{escape(str(prop.get('description', '')))}"
        f"{_default(prop)}</td></tr>" for name, prop in props.items())
    return ("<table><tr><th>field</th><th>type</th><th>required</th><th>description</th></tr>"
            f"{rows}</table>")


def _content_schema(content: dict) -> str:
    return "; ".join(f"<code>{escape(media)}</code> {_type(item.get('schema', {}))}"
                     for media, item in (content or {}).items())


def pretty(value) -> str:
    """JSON with one member per line and arrays of plain values kept on one line."""
    if isinstance(value, list) and all(not isinstance(v, (dict, list)) for v in value):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, dict) and value:
        inner = ",\n".join(f"{json.dumps(k)}: {pretty(v)}" for k, v in value.items())
        return "{\n" + _indent(inner) + "\n}"
    if isinstance(value, list) and value:
        return "[\n" + _indent(",\n".join(pretty(v) for v in value)) + "\n]"
    return json.dumps(value, ensure_ascii=False)


def _indent(text: str) -> str:
    return "\n".join("  " + line for line in text.splitlines())


def _block(title: str, text: str, data: str) -> str:
    shown = " open" if text.count("\n") < OPEN_LINES else ""
    return (f"<details{shown}><summary>{escape(title)}</summary><pre class=example {data}>"
            f"{escape(text)}</pre></details>")


def _examples(op: dict, key: str) -> str:
    """curl line, request and response examples; each example's <pre> says what it is
    (``data-op``, ``data-kind``, ``data-status``, ``data-media``) for tests to check."""
    parts = []
    for sample in op.get("x-codeSamples", []):
        parts.append(f"<p>Try it ({escape(sample.get('label', ''))}):</p>"
                     f"<pre class=curl>{escape(sample['source'])}</pre>")
    body = op.get("requestBody", {}).get("content", {})
    for media, item in body.items():
        for example in item.get("examples", {}).values():
            parts.append(f"<p>Example: {escape(example.get('summary', ''))}</p>")
            data = f"data-op='{key}' data-kind=request data-media='{escape(media)}'"
            parts.append(_block(f"Request body ({media})", pretty(example["value"]), data))
    for status, response in op.get("responses", {}).items():
        for media, item in (response.get("content") or {}).items():
            for example in item.get("examples", {}).values():
                title = f"Response {status} ({media})"
                data = (f"data-op='{key}' data-kind=response data-status={escape(status)} "
                        f"data-media='{escape(media)}'")
                if "externalValue" in example:
                    src = escape(example["externalValue"])
                    parts.append(f"<p>{escape(title)}: <a href='{src}'>{src}</a></p>"
                                 f"<img class=example {data} src='{src}' width=640 "
                                 f"alt='{escape(example.get('summary', ''))}'>")
                elif isinstance(example.get("value"), str):
                    parts.append(_block(title, example["value"], data))
                else:
                    parts.append(_block(title, pretty(example.get("value")), data))
    return "".join(parts)


def ordered_operations(spec: dict) -> list[tuple[str, str, dict]]:
    """(method, path, operation) in reading order: the POSTs a user starts with, then GETs."""
    found = [(method, path, op) for path, ops in spec.get("paths", {}).items()
             for method, op in ops.items() if method in METHODS]

    def rank(item):
        method, path, _ = item
        first = FIRST_OPERATIONS.index(path) if path in FIRST_OPERATIONS else len(
            FIRST_OPERATIONS)
        return (first, METHODS.index(method), not path.startswith("/v1/"))

    return sorted(found, key=rank)  # stable: registration order within a rank


def _operation(spec: dict, method: str, path: str, op: dict) -> str:
    parts = [f"<section id='{operation_anchor(method, path)}'><h3><span class=m>"
             f"{method.upper()}</span> <code>{escape(path)}</code></h3>"
             f"<p>{escape(op.get('summary', ''))}</p>"]
    if op.get("description"):
        parts.append(f"<p>{escape(op['description'])}</p>")
    params = spec["paths"][path].get("parameters", []) + op.get("parameters", [])
    for param in params:
        example = (f", e.g. <code>{escape(str(param['example']))}</code>"
                   if "example" in param else "")
        parts.append(f"<p>Path parameter <code>{escape(param['name'])}</code>: "
                     f"{_type(param.get('schema', {}))}{example}.</p>")
    body = op.get("requestBody")
    if body:
        parts.append(f"<p>Request body: {_content_schema(body.get('content'))}</p>")
    rows = "".join(
        f"<tr><td>{escape(str(code))}</td><td>{escape(_response(spec, r).get('description', ''))}"
        f"</td><td>{_content_schema(_response(spec, r).get('content'))}</td></tr>"
        for code, r in sorted(op.get("responses", {}).items()))
    parts.append("<table><tr><th>status</th><th>meaning</th><th>body</th></tr>"
                 f"{rows}</table>{_examples(op, f'{method} {escape(path)}')}</section>")
    return "".join(parts)


def render_openapi(spec: dict) -> str:
    """The whole OpenAPI document as one HTML page."""
    info = spec.get("info", {})
    operations = ordered_operations(spec)
    schemas = spec.get("components", {}).get("schemas", {})
    toc = "".join(f"<li><a href='#{operation_anchor(m, p)}'><b>{m.upper()}</b> {escape(p)}"
                  f"</a></li>" for m, p, _ in operations)
    schema_toc = ", ".join(f"<a href='#schema-{escape(n)}'>{escape(n)}</a>" for n in schemas)
    parts = [f"<h1>{escape(info.get('title', 'API'))} {escape(str(info.get('version', '')))}</h1>",
             "<p>This page is generated from <a href='/openapi.json'>/openapi.json</a> "
             "(OpenAPI 3.1), which carries the same examples. Errors are RFC 9457 problem "
             "documents; see <a href='/problems/'>the error catalogue</a>. The examples use "
             "invented demo data and were answered by this service.</p>",
             f"<nav id=contents><h2>Contents</h2><ol>{toc}</ol><p><a href='#schemas'>Schemas"
             f"</a>: {schema_toc}</p></nav>", "<h2 id=operations>Operations</h2>"]
    parts += [_operation(spec, m, p, op) for m, p, op in operations]
    parts.append("<h2 id=schemas>Schemas</h2>")
    for name, schema in schemas.items():
        parts.append(f"<h3 id='schema-{escape(name)}'>{escape(name)}</h3>"
                     f"<p>{escape(schema.get('description', ''))}</p>{_schema_table(schema)}")
    return page(f"{info.get('title', 'API')} reference", "".join(parts))


def _response(spec: dict, response: dict) -> dict:
    if "$ref" in response:
        target = spec.get("components", {}).get("responses", {}).get(_ref_name(response["$ref"]))
        return target or {"description": _ref_name(response["$ref"])}
    return response
