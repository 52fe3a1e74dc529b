"""JSON answers of the API. Every error has the same shape, so a client reads one format:

``{"errors": [{"index": <list index or null>, "field": <key or null>, "message": "..."}]}``
"""
from __future__ import annotations

from django.http import JsonResponse


def error(status: int, message: str) -> JsonResponse:
    return errors(status, [(None, None, message)])


def errors(status: int, problems: list[tuple[int | None, str | None, str]]) -> JsonResponse:
    """``problems``: (index, field, message) each."""
    return JsonResponse(
        {"errors": [{"index": index, "field": field, "message": message} for index, field, message in problems]},
        status=status,
    )
