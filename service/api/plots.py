"""Views: figures."""

from flask_smorest import Blueprint

blp = Blueprint("plots", __name__, description="Figures.")
