"""Thin views: load with a schema, call the core, dump. One module per resource."""

from service.api import parsing

parsing.install()  # before any view module: every @blp.arguments body is strict JSON (orjson)

from service.api import batch, fits, health, meta, models, plots  # noqa: E402

BLUEPRINT_MODULES = (health, meta, fits, batch, models, plots)
