"""Views: families and documentation."""

from flask_smorest import Blueprint

blp = Blueprint("meta", __name__, description="Families and documentation.")
