"""Reads of the API app."""
from __future__ import annotations

from urllib.parse import urlencode

from django.urls import reverse

from .models import ApiToken
from .services import secret_digest


def token_for_secret(secret: str) -> ApiToken | None:
    """The token (revoked or not) whose secret this is, with its site; None for an unknown secret."""
    return ApiToken.objects.select_related("site").filter(secret_sha256=secret_digest(secret)).first()


def calendar_link(token: ApiToken, secret: str, base: str) -> str:
    """The link a calendar application subscribes to with a calendar token; ``base`` is the address the pages are
    served at (the request's, or ``settings.SITE_URL``)."""
    path = reverse("api-planned-work", args=[token.site.slug])
    return f"{base.rstrip('/')}{path}?{urlencode({'token': secret})}"
