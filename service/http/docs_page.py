"""Human-readable pages rendered on the server, with no script and no CDN.

``/docs`` is the served OpenAPI document rendered as one static HTML page:
each operation with its request body and responses, then every schema as a
table of fields (type, required, description) with links between schemas.
``/problems/<code>`` pages explain one error code.
"""

from __future__ import annotations

from html import escape

STYLE = """body{font:15px/1.5 system-ui,sans-serif;max-width:62rem;margin:2rem auto;padding:0 1rem;
color:#1b1b1b}code,pre{font:13px ui-monospace,monospace;background:#f3f3f3;padding:0 .2rem}
table{border-collapse:collapse;width:100%;margin:.5rem 0 1.5rem}th,td{border:1px solid #ccc;
padding:.25rem .5rem;text-align:left;vertical-align:top}th{background:#f6f6f6}
h2{border-bottom:2px solid #333;margin-top:2.5rem}h3{margin-bottom:.2rem}.m{font-weight:700}"""


def _page(title: str, body: str) -> str:
    return (f"<!doctype html><html lang=en><head><meta charset=utf-8><title>{escape(title)}"
            f"</title><meta name=viewport content='width=device-width'><style>{STYLE}</style>"
            f"</head><body>{body}</body></html>")


def _ref_name(ref: str) -> str:
    return ref.rsplit("/", 1)[-1]


def _type(prop: dict) -> str:
    if "$ref" in prop:
        name = _ref_name(prop["$ref"])
        return f"<a href='#schema-{escape(name)}'>{escape(name)}</a>"
    if "allOf" in prop and prop["allOf"] and "$ref" in prop["allOf"][0]:
        return _type(prop["allOf"][0])
    kind = prop.get("type", "any")
    kind = " | ".join(kind) if isinstance(kind, list) else kind
    if "array" in kind and isinstance(prop.get("items"), dict):
        return f"array of {_type(prop['items'])}"
    if prop.get("enum"):
        return escape(kind) + ": " + ", ".join(f"<code>{escape(str(v))}</code>"
                                                for v in prop["enum"] if v is not None)
    return escape(kind)


def _schema_table(schema: dict) -> str:
    props = schema.get("properties", {})
    if not props:
        return "<p>Free-form object.</p>"
    required = set(schema.get("required", []))
    rows = "".join(
        f"<tr><td><code>{escape(name)}</code></td><td>{_type(prop)}</td>"
        f"<td>{'yes' if name in required else ''}</td>"
        f"<td>{escape(str(prop.get('description', '')))}"
        f"{_default(prop)}</td></tr>" for name, prop in props.items())
    return ("<table><tr><th>field</th><th>type</th><th>required</th><th>description</th></tr>"
            f"{rows}</table>")


def _default(prop: dict) -> str:
    if "default" in prop:
        return f" Default: <code>{escape(str(prop['default']))}</code>."
    return ""


def _content_schema(content: dict) -> str:
    out = []
    for media, item in (content or {}).items():
        schema = item.get("schema", {})
        out.append(f"<code>{escape(media)}</code> {_type(schema)}")
    return "; ".join(out)


def render_openapi(spec: dict) -> str:
    """The whole OpenAPI document as one HTML page."""
    info = spec.get("info", {})
    parts = [f"<h1>{escape(info.get('title', 'API'))} {escape(str(info.get('version', '')))}</h1>",
             "<p>This page is generated from <a href='/openapi.json'>/openapi.json</a> "
             "(OpenAPI 3.1). Errors are RFC 9457 problem documents; see "
             "<a href='/problems/'>the error catalogue</a>.</p>", "<h2>Operations</h2>"]
    for path, operations in spec.get("paths", {}).items():
        for method, op in operations.items():
            if method not in ("get", "post", "put", "patch", "delete"):
                continue
            parts.append(f"<h3><span class=m>{method.upper()}</span> <code>{escape(path)}"
                         f"</code></h3><p>{escape(op.get('summary', ''))}</p>")
            if op.get("description"):
                parts.append(f"<p>{escape(op['description'])}</p>")
            body = op.get("requestBody")
            if body:
                parts.append(f"<p>Request body: {_content_schema(body.get('content'))}</p>")
            rows = "".join(
                f"<tr><td>{escape(str(code))}</td><td>{escape(_resolve_response(spec, r))}"
                f"</td></tr>" for code, r in sorted(op.get("responses", {}).items()))
            parts.append(f"<table><tr><th>status</th><th>meaning</th></tr>{rows}</table>")
    parts.append("<h2>Schemas</h2>")
    for name, schema in spec.get("components", {}).get("schemas", {}).items():
        parts.append(f"<h3 id='schema-{escape(name)}'>{escape(name)}</h3>"
                     f"<p>{escape(schema.get('description', ''))}</p>{_schema_table(schema)}")
    return _page(f"{info.get('title', 'API')} reference", "".join(parts))


def _resolve_response(spec: dict, response: dict) -> str:
    if "$ref" in response:
        target = spec.get("components", {}).get("responses", {}).get(_ref_name(response["$ref"]))
        return (target or {}).get("description", _ref_name(response["$ref"]))
    return response.get("description", "")


def render_problem(kind) -> str:
    """One catalogue entry as a page (the target of a problem's ``type``)."""
    return _page(f"Problem: {kind.code}",
                 f"<h1>{escape(kind.title)}</h1><p>Code <code>{escape(kind.code)}</code>, "
                 f"HTTP status {kind.status}.</p><h2>When</h2><p>{escape(kind.when)}</p>"
                 f"<h2>What to do</h2><p>{escape(kind.fix)}</p>"
                 "<p><a href='/problems/'>All problems</a> · <a href='/docs'>API reference</a>"
                 "</p>")


def render_catalogue(kinds) -> str:
    """The list of all problem codes."""
    rows = "".join(f"<tr><td>{k.status}</td><td><a href='/problems/{escape(k.code)}'>"
                   f"<code>{escape(k.code)}</code></a></td><td>{escape(k.when)}</td>"
                   f"<td>{escape(k.fix)}</td></tr>" for k in kinds)
    return _page("Problems", "<h1>Error catalogue</h1><p>Every error is an RFC 9457 problem "
                 "document whose <code>type</code> points here.</p><table><tr><th>status</th>"
                 f"<th>code</th><th>when</th><th>what to do</th></tr>{rows}</table>")
