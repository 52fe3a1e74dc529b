"""Writes of the API app: creating and revoking tokens."""
from __future__ import annotations

import hashlib
import secrets

from django.core.exceptions import ValidationError
from django.utils import timezone

from observatory_ops.registry.models import Site, validate_one_line

from .models import ApiToken

PREFIX_LENGTH = 8


def secret_digest(secret: str) -> str:
    """The SHA-256 hex digest under which a token is stored and looked up."""
    return hashlib.sha256(secret.encode()).hexdigest()


def api_token_create(site: Site, name: str, by=None, purpose: str = ApiToken.Purpose.CONTROL) -> tuple[ApiToken, str]:
    """Create a token for ``site`` and ``purpose``; returns it with its secret, which is stored nowhere and shown
    once."""
    name = name.strip()
    if not name:
        raise ValueError("a token needs a name saying what uses it")
    try:
        validate_one_line(name)  # the command's list prints one token a line
    except ValidationError as exc:
        raise ValueError(f"the token's name: {exc.messages[0]}") from None
    secret = secrets.token_urlsafe(32)  # 256 random bits
    token = ApiToken.objects.create(
        site=site, name=name, purpose=purpose, prefix=secret[:PREFIX_LENGTH], secret_sha256=secret_digest(secret),
        created_by=by,
    )
    return token, secret


def api_token_revoke(token: ApiToken) -> ApiToken:
    """Revoke a token from now on; a revoked token is refused and cannot be revived."""
    if token.revoked_at is not None:
        when = f"{token.revoked_at.astimezone(token.site.zone):%Y-%m-%d %H:%M} (at the site, {token.site.time_zone})"
        raise ValueError(f"token {token.pk} ({token.name}) was already revoked on {when}")
    token.revoked_at = timezone.now()
    token.save(update_fields=["revoked_at"])
    return token
