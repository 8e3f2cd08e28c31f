"""OpenAPI entries for a view's error answers: problem+json, with what each status means
for this view (shown on /docs beside a link to the Problem schema and the error catalogue)."""

from __future__ import annotations

from http import HTTPStatus

from schemas.common import ProblemSchema
from service.http.errors import PROBLEM_MIME


def error_responses(blp, errors: dict[int, str]):
    """A view decorator attaching, per status in ``errors``, its response with what it means."""
    def attach(view):
        for status, description in errors.items():
            view = blp.alt_response(status, schema=ProblemSchema, content_type=PROBLEM_MIME,
                                    description=f"{HTTPStatus(status).phrase}: {description}"
                                    )(view)
        return view
    return attach
