"""Views: predict and invert with a fitted-model document."""

from flask_smorest import Blueprint

blp = Blueprint("models", __name__, description="Predict and invert with a fitted-model document.")
