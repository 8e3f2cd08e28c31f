"""The error catalogue as HTML: ``/problems/`` and one page per code (a problem's ``type``).

Each code's page says when it happens and what to do, and shows a failing request and
the request that fixes it (:mod:`service.http.problem_examples`).
"""

from __future__ import annotations

import json
from html import escape

from service.http.docs_page import page
from service.http.problem_examples import DOCUMENT, EXAMPLES, Request

SETTING_NAMES = {"auth_tokens": "CURVEWISE_AUTH_TOKENS", "cors_origins": "CURVEWISE_CORS_ORIGINS",
                 "max_body_bytes": "CURVEWISE_MAX_BODY_BYTES", "max_points": "CURVEWISE_MAX_POINTS",
                 "max_series": "CURVEWISE_MAX_SERIES"}


def http_text(request: Request) -> str:
    """The request as it goes over the wire (headers that matter, then the body)."""
    lines = [f"{request.method} {request.path} HTTP/1.1"]
    if request.body is not None:
        lines.append(f"Content-Type: {request.content_type}")
    lines += [f"{name}: {value}" for name, value in request.headers.items()]
    if request.body is not None:
        body = request.body
        text = body.decode() if isinstance(body, bytes) else json.dumps(body, ensure_ascii=False)
        lines += ["", text.replace(json.dumps(DOCUMENT),
                                   "{...the fitted_model member of a /v1/fit answer...}")]
    return "\n".join(lines)


def _example(code: str) -> str:
    example = EXAMPLES.get(code)
    if example is None:
        return ""
    parts = ["<h2>Example</h2>"]
    if example.settings:
        shown = ", ".join(f"<code>{SETTING_NAMES.get(k, k)}={escape(_setting(v))}</code>"
                          for k, v in example.settings.items())
        parts.append(f"<p>On a server started with {shown}:</p>")
    if example.failing is not None:
        parts.append(f"<p>This request fails with <code>{escape(code)}</code>:</p>"
                     f"<pre class=failing>{escape(http_text(example.failing))}</pre>")
    elif example.raw:
        parts.append(f"<p>The proxy refuses a request like this with <code>{escape(code)}"
                     f"</code>:</p><pre class=failing>{escape(example.raw)}</pre>")
    parts.append(f"<p><b>Fix:</b> {escape(example.change)}</p>")
    if example.fixed is not None:
        parts.append(f"<pre class=fixed>{escape(http_text(example.fixed))}</pre>")
    return "".join(parts)


def _setting(value) -> str:
    return ",".join(value) if isinstance(value, tuple) else str(value)


def render_problem(kind) -> str:
    """One catalogue entry as a page (the target of a problem's ``type``)."""
    return page(f"Problem: {kind.code}",
                f"<h1>{escape(kind.title)}</h1><p>Code <code>{escape(kind.code)}</code>, "
                f"HTTP status {kind.status}.</p><h2>When</h2><p>{escape(kind.when)}</p>"
                f"<h2>What to do</h2><p>{escape(kind.fix)}</p>{_example(kind.code)}"
                "<p><a href='/problems/'>All problems</a> · <a href='/docs'>API reference</a>"
                "</p>")


def render_catalogue(kinds) -> str:
    """The list of all problem codes."""
    rows = "".join(f"<tr><td>{k.status}</td><td><a href='/problems/{escape(k.code)}'>"
                   f"<code>{escape(k.code)}</code></a></td><td>{escape(k.when)}</td>"
                   f"<td>{escape(k.fix)}</td></tr>" for k in kinds)
    return page("Problems", "<h1>Error catalogue</h1><p>Every error is an RFC 9457 problem "
                "document whose <code>type</code> points here; each code's page shows a "
                "failing request and its fix.</p><table><tr><th>status</th>"
                f"<th>code</th><th>when</th><th>what to do</th></tr>{rows}</table>")
