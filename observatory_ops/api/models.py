"""API tokens: one per piece of control software or calendar subscription, each bound to one site.

The token itself is shown once, when it is created; only its SHA-256 hash is stored, with its first
characters so an administrator can tell tokens apart. A token is revoked, never deleted, so the list
keeps who created which token and when it stopped working.

A token has one purpose. Control software's token sends nights and reads the due list, in the
``Authorization`` header. A calendar subscription's token reads the site's planned-work calendar only, and
travels in the link a calendar application fetches (it cannot send a header): a link that leaks gives
away the planned dates, never a way to write.
"""
from __future__ import annotations

from django.conf import settings
from django.db import models
from simple_history.models import HistoricalRecords

from observatory_ops.access.roles import ADMINISTRATOR
from observatory_ops.registry.models import Site, validate_one_line


class ApiToken(models.Model):
    class Purpose(models.TextChoices):
        CONTROL = "control", "Control software: sends nights and reads the due list"
        CALENDAR = "calendar", "Calendar subscription: reads the planned-work calendar only"

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    #: Who may read that history on its page (``archive.views.history``): administrators, as in the admin.
    history_read_by = ADMINISTRATOR
    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="api_tokens")
    name = models.CharField(max_length=100, validators=[validate_one_line],
                            help_text="What uses it, e.g. the control computer of the east dome.")
    purpose = models.CharField(max_length=10, choices=Purpose.choices, default=Purpose.CONTROL)
    prefix = models.CharField(max_length=8, editable=False, help_text="The token's first characters.")
    secret_sha256 = models.CharField(max_length=64, unique=True, editable=False)
    created_at = models.DateTimeField(auto_now_add=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+",
        help_text="Empty when created with the api_token command.",
    )
    revoked_at = models.DateTimeField(null=True, blank=True)
    last_used_at = models.DateTimeField(
        null=True, blank=True, editable=False,
        help_text="When a request last came with it (to the minute): shows which token control software uses.",
    )

    class Meta:
        ordering = ["site", "-created_at"]
        verbose_name = "API token"

    def __str__(self) -> str:
        return f"{self.name} ({self.site.slug}, {self.prefix}…)"

    @property
    def active(self) -> bool:
        return self.revoked_at is None
