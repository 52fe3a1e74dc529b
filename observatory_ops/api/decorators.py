"""``api_token_required(*methods, purpose=...)``: how an API view declares who may use it.

Control software has no login and no session: it sends ``Authorization: Bearer <token>``, and the token
is bound to one site. A calendar application cannot send a header: a calendar token comes in the link's
``token`` parameter, and is taken from nowhere else (nor a control token from there). The decorated view
takes the site's ``slug`` from the URL and receives the Site itself. Every refusal is JSON (see
``responses.error``), checked in this order:

- no token, an unknown token or a revoked one: 401 (whatever the method, so a caller without a valid
  token learns nothing about the URL);
- a valid token and a site that does not exist: 404;
- a valid token of another site: 403;
- a valid token of another purpose (a calendar token posting nights, say): 403;
- a method not listed: 405 (HEAD is answered wherever GET is, as GET without the body: RFC 9110, section 9.3.2).

The views are exempt from CSRF checks (no cookie is ever read) and keep ``required_role = "api-token"``
so the project's URL walk can tell API views from the pages behind ``access.decorators.requires``.
"""
from __future__ import annotations

import datetime as dt
import json
from functools import wraps

from django.utils import timezone
from django.views.decorators.csrf import csrf_exempt

from observatory_ops.registry.models import Site

from .models import ApiToken
from .responses import error
from .selectors import token_for_secret

API_ACCESS = "api-token"


def _bearer_secret(request) -> str | None:
    scheme, _, secret = request.META.get("HTTP_AUTHORIZATION", "").partition(" ")
    secret = secret.strip()
    return secret if scheme.lower() == "bearer" and secret else None


def _mark_used(token: ApiToken) -> None:
    """Record when the token was last used, at most once a minute (one UPDATE, no history row), so an
    operator rotating tokens sees whether the control software has moved to the new one."""
    now = timezone.now()
    if token.last_used_at is None or now - token.last_used_at >= dt.timedelta(minutes=1):
        ApiToken.objects.filter(pk=token.pk).update(last_used_at=now)


#: Why a valid token of the site is refused where it is used, by the purpose of the token.
WRONG_PURPOSE = {
    ApiToken.Purpose.CALENDAR: "this is a calendar token: it reads the planned-work calendar only",
    ApiToken.Purpose.CONTROL: "this is a control-software token: it is sent in the Authorization header, never in a "
    "link; an administrator creates a calendar token for a calendar subscription (and revokes this one if the link "
    "was shared)",
}


def _calendar_secret(request) -> str | None:
    return request.GET.get("token", "").strip() or None


def api_token_required(*methods: str, purpose: str = ApiToken.Purpose.CONTROL):
    if not methods:
        raise ValueError("name the HTTP methods the view answers, e.g. api_token_required('GET')")
    if "GET" in methods and "HEAD" not in methods:
        methods = (*methods, "HEAD")  # the server sends a HEAD answer's headers only
    calendar = purpose == ApiToken.Purpose.CALENDAR

    def decorate(view):
        @wraps(view)
        def guarded(request, slug, *args, **kwargs):
            secret = _calendar_secret(request) if calendar else _bearer_secret(request)
            if secret is None:
                return _unauthorised(
                    "subscribe with the link given when the calendar token was created (it ends in ?token=...)"
                    if calendar else "send the site's API token as 'Authorization: Bearer <token>'", ""
                )
            token = token_for_secret(secret)
            if token is None:
                return _unauthorised("the API token is not known", "invalid_token")
            if not token.active:
                return _unauthorised(
                    f"the API token {json.dumps(token.name, ensure_ascii=False)} was revoked on "
                    f"{token.revoked_at.astimezone(token.site.zone):%Y-%m-%d} (at the site)", "invalid_token"
                )
            site = Site.objects.filter(slug=slug).first()
            if site is None:
                return error(404, f"no site with slug {json.dumps(slug)}")
            if site.pk != token.site_id:
                return error(403, f"this API token belongs to site {json.dumps(token.site.slug)}, not "
                                  f"{json.dumps(slug)}")
            if token.purpose != purpose:
                return error(403, WRONG_PURPOSE[token.purpose])
            if request.method not in methods:
                response = error(405, f"{request.method} is not allowed here; use {' or '.join(methods)}")
                response["Allow"] = ", ".join(methods)
                return response
            request.api_token = token
            _mark_used(token)
            return view(request, site, *args, **kwargs)

        guarded.required_role = API_ACCESS
        return csrf_exempt(guarded)

    return decorate


def _unauthorised(message: str, code: str):
    response = error(401, message)
    # RFC 6750, section 3: a refused bearer token is answered with its scheme and, if one was sent, why.
    response["WWW-Authenticate"] = f'Bearer error="{code}"' if code else "Bearer"
    return response
