"""The Content-Security-Policy every page carries (W3C Content Security Policy Level 3): the browser runs only the
scripts the tool serves from its own static files and sends forms and requests only to the tool itself, so text a
person typed (a note, a subsystem's name) can never run as a script in another person's browser, even where a
template escaped it wrongly. A security review found no policy at all.

Styles keep ``'unsafe-inline'``: the recoat planner colours each night by its cost in a ``style`` attribute, and the
admin's pages add style blocks; an injected style can restyle a page, not act for its reader. Only HTML answers carry
the policy: a PDF or a CSV is not a page, and a browser's PDF viewer is left as it is. Every script is a file under
static/observatory_ops/ (tests/test_content_policy.py refuses an inline one), and the browser tests fail on any
report of the policy refusing something (tests/browser/conftest.py).
"""
from __future__ import annotations

POLICY = "; ".join((
    "default-src 'self'",
    "script-src 'self'",
    "style-src 'self' 'unsafe-inline'",
    "img-src 'self' data:",
    "object-src 'none'",
    "base-uri 'none'",
    "form-action 'self'",
    "frame-ancestors 'none'",
))


class ContentPolicyMiddleware:
    """Adds ``POLICY`` to each HTML answer that has none of its own."""

    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        response = self.get_response(request)
        if response.get("Content-Type", "").startswith("text/html"):
            response.headers.setdefault("Content-Security-Policy", POLICY)
        return response
