"""OpenAPI entries for a view's error answers (problem+json, by registered response name)."""

from __future__ import annotations

from http import HTTPStatus


def error_responses(blp, errors: dict[int, str]):
    """A view decorator attaching, per status in ``errors``, its response with what it means."""
    def attach(view):
        for status, description in errors.items():
            view = blp.alt_response(status, description=description,
                                    response=HTTPStatus(status).name)(view)
        return view
    return attach
