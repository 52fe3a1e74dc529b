"""Attach the signed-in person to every change a page request makes (django-simple-history).

Requests to the ingest API are skipped: they carry no session, and reading ``request.user`` there would
touch the session machinery. Their changes are attributed to the API token in the change reason.
"""
from simple_history.middleware import HistoryRequestMiddleware


def history_middleware(get_response):
    with_history = HistoryRequestMiddleware(get_response)

    def middleware(request):
        if request.path.startswith("/api/"):
            return get_response(request)
        return with_history(request)

    return middleware
