"""Thin views: load with a schema, call the core, dump. One module per resource."""

from service.api import batch, fits, health, meta, models, plots

BLUEPRINT_MODULES = (health, meta, fits, batch, models, plots)
