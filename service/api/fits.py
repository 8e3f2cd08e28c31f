"""Views: fit one series."""

from flask_smorest import Blueprint

blp = Blueprint("fits", __name__, description="Fit one series.")
