"""A clear answer when SQLite stays locked by another writer for longer than its busy timeout.

Writers take the write lock up front and wait up to 20 s for it (settings.py). If it is still held, the
request's transaction has written nothing; this middleware says so with a 503 page instead of a
server error, so the person knows to try again and that nothing was half-saved.
"""
from django.db import OperationalError
from django.shortcuts import render


class DatabaseBusyMiddleware:
    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        return self.get_response(request)

    def process_exception(self, request, exception):
        if isinstance(exception, OperationalError) and "locked" in str(exception).lower():
            response = render(request, "database_busy.html", status=503)
            response["Retry-After"] = "5"
            return response
        return None
