"""Views: families, the human-readable reference and the error pages."""

from __future__ import annotations

from flask import Response, current_app, request
from flask_smorest import Blueprint, abort

from schemas.common import MISSING_POLICIES, SECTIONS
from schemas.families import MODEL_SCHEMAS, FamiliesResponseSchema, describe_options
from service.core import families as registry
from service.core.models.capabilities import capabilities
from service.http.docs_page import render_openapi, with_base_url
from service.http.examples import BASE_URL
from service.http.problem_pages import render_catalogue, render_problem
from service.http.problems import CATALOGUE

blp = Blueprint("meta", __name__, description="Families and documentation.")

_HTML = {"description": "An HTML page (no scripts, works offline).",
         "content": {"text/html": {"schema": {"type": "string"}}}}


@blp.route("/v1/families", methods=["GET"])
@blp.response(200, FamiliesResponseSchema)
def families():
    """Model families, their options, and this server's limits."""
    settings = current_app.config["CURVEWISE"]
    return {
        "families": [{
            "name": entry.name,
            "description": entry.description,
            "equation": entry.equation,
            "parameters": [p._asdict() for p in entry.parameters],
            "options": describe_options(MODEL_SCHEMAS[entry.name]()),
            "select_methods": list(entry.select_methods),
            "transforms": list(entry.transforms),
            "reading": capabilities(entry)._asdict(),
        } for entry in registry.FAMILIES.values()],
        "missing_policies": list(MISSING_POLICIES),
        "sections": list(SECTIONS),
        "defaults": {"level": 0.95, "missing": "error", "grid": {"count": 200},
                     "grid_spacing": {"default": "linear", "built_in_curve_on_log_x": "log"},
                     "include": list(SECTIONS)},
        "limits": {name: getattr(settings, name) for name in (
            "max_body_bytes", "max_points", "max_degree", "max_grid_points", "max_series",
            "max_full_series", "max_total_points", "request_timeout")},
    }


@blp.route("/docs", methods=["GET"])
@blp.doc(responses={"200": _HTML})
def docs():
    """The API reference as one HTML page, generated from the OpenAPI document; its curl
    lines name the server the page is served from."""
    page = current_app.extensions.get("curvewise-docs-page")
    if page is None:
        page = render_openapi(current_app.extensions["curvewise-api"].spec.to_dict())
        current_app.extensions["curvewise-docs-page"] = page
    return Response(with_base_url(page, BASE_URL, request.url_root), mimetype="text/html")


@blp.route("/problems/", methods=["GET"])
@blp.doc(responses={"200": _HTML})
def problems():
    """The error catalogue: every problem code, when it happens and what to do."""
    kinds = sorted(CATALOGUE.values(), key=lambda k: (k.status, k.code))
    return Response(render_catalogue(kinds), mimetype="text/html")


@blp.route("/problems/<string:code>", methods=["GET"])
@blp.doc(responses={"200": _HTML})
@blp.alt_response(404, response="NOT_FOUND", description="No such problem code.")
def problem_page(code: str):
    """What one problem code means and how to fix it (the target of a problem's type)."""
    kind = CATALOGUE.get(code)
    if kind is None:
        abort(404, message=f"No problem code {code!r}. See /problems/ for the catalogue.")
    return Response(render_problem(kind), mimetype="text/html")
