"""Views: fit many series."""

from flask_smorest import Blueprint

blp = Blueprint("batch", __name__, description="Fit many series.")
