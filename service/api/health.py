"""Views: liveness and readiness."""

from __future__ import annotations

from flask import current_app
from flask_smorest import Blueprint
from marshmallow import Schema, fields

blp = Blueprint("health", __name__, description="Liveness and readiness probes.")


class StatusSchema(Schema):
    """Probe answer."""

    status = fields.String(required=True, metadata={"description": "ok (liveness) or ready."})


@blp.route("/healthz", methods=["GET"])
@blp.response(200, StatusSchema)
def healthz():
    """Liveness: the process answers."""
    return {"status": "ok"}


@blp.route("/readyz", methods=["GET"])
@blp.response(200, StatusSchema)
def readyz():
    """Readiness: the app is built and a tiny fit succeeds (checked once per worker)."""
    if not current_app.extensions.get("curvewise-ready"):
        from service.core import ModelSpec, fit_series

        fit_series([0.0, 1.0, 2.0, 3.0], [1.0, 3.0, 2.0, 5.0], model=ModelSpec(degree=1))
        current_app.extensions["curvewise-ready"] = True
    return {"status": "ready"}
