"""Views: liveness and readiness."""

from flask_smorest import Blueprint

blp = Blueprint("health", __name__, description="Liveness and readiness probes.")


@blp.route("/healthz", methods=["GET"])
def healthz():
    """Liveness: the process answers."""
    return {"status": "ok"}


@blp.route("/readyz", methods=["GET"])
def readyz():
    """Readiness: the app is built and can fit."""
    return {"status": "ready"}
