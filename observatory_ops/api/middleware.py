"""Every answer under /api/ is JSON, errors included: control software reads one format.

A path that names no endpoint gets a JSON 404 listing the endpoints; a failure inside a view gets a JSON
500 (the error is logged, and the request's transaction has stored nothing) instead of an HTML page.
"""
from __future__ import annotations

import logging

from .responses import error

PREFIX = "/api/"
ENDPOINTS = (
    "POST /api/v1/sites/<slug>/nights, GET /api/v1/sites/<slug>/due and GET /api/v1/sites/<slug>/planned-work.ics "
    "(no trailing slash)"
)
log = logging.getLogger(__name__)


class ApiJsonErrors:
    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        response = self.get_response(request)
        if (
            request.path.startswith(PREFIX)
            and response.status_code == 404
            and not response.get("Content-Type", "").startswith("application/json")
        ):
            return error(404, f"no such endpoint: {request.path}; the endpoints are {ENDPOINTS}")
        return response

    def process_exception(self, request, exception):
        if not request.path.startswith(PREFIX):
            return None
        log.exception("API request %s %s failed", request.method, request.path)
        return error(500, "the server failed on this request and stored nothing; try again, and tell the site's "
                          "administrator if it keeps failing")
