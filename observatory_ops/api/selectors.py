"""Reads of the API app."""
from __future__ import annotations

from .models import ApiToken
from .services import secret_digest


def token_for_secret(secret: str) -> ApiToken | None:
    """The token (revoked or not) whose secret this is, with its site; None for an unknown secret."""
    return ApiToken.objects.select_related("site").filter(secret_sha256=secret_digest(secret)).first()
