"""Application factory: defaults -> CURVEWISE_* env -> overrides; blueprints; one error path."""

from __future__ import annotations

from flask import Flask

from schemas.document import DOCUMENT_SCHEMAS
from schemas.model_field import DOCUMENTED_MODELS, component_name
from service import __version__
from service.api import BLUEPRINT_MODULES, doc_examples
from service.config import Settings
from service.http import errors as error_handling
from service.http.examples import ExamplesPlugin
from service.http.jsonio import OrjsonProvider
from service.runtime import guard, observability, security, warming


def create_app(overrides: dict | None = None) -> Flask:
    """Build the WSGI app. ``overrides`` are Settings fields (e.g. ``{"max_degree": 6}``)."""
    settings = Settings.load(overrides)
    app = error_handling.CurvewiseFlask("curvewise")
    app.json = OrjsonProvider(app)
    app.config.update(
        CURVEWISE=settings,
        MAX_CONTENT_LENGTH=settings.max_body_bytes,
        API_TITLE="Curvewise",
        API_VERSION=__version__,
        OPENAPI_VERSION="3.1.0",
        OPENAPI_URL_PREFIX="/",
        OPENAPI_JSON_PATH="openapi.json",
    )
    api = error_handling.CurvewiseApi(app, spec_kwargs={"extra_plugins": [ExamplesPlugin()]})
    error_handling.register(app)
    for module in BLUEPRINT_MODULES:
        api.register_blueprint(module.blp)
    api.register_blueprint(doc_examples.blp)  # the files /docs links (documented beside it)
    for schema in DOCUMENTED_MODELS:  # the model objects that ModelField's oneOf names
        name = component_name(schema)
        if name not in api.spec.components.schemas:
            api.spec.components.schema(name, schema=schema)
    for schema in DOCUMENT_SCHEMAS.values():  # the layouts that FittedModelField's oneOf names
        name = schema.__name__.removesuffix("Schema")
        if name not in api.spec.components.schemas:
            api.spec.components.schema(name, schema=schema)
    app.extensions["curvewise-api"] = api
    observability.install(app)  # first: request id, timing and logs see every answer
    security.install(app)       # then tokens, CORS and headers
    guard.install(app)          # then the early 413 and the compute deadline
    warming.install(app)        # then 503 while this process's kernels warm up
    return app
