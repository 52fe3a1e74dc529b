"""System checks of the due digest's mail settings (``python manage.py check``, ``check --deploy``)."""
from __future__ import annotations

from django.conf import settings
from django.core.checks import Error, Warning, register

from .digest import CONSOLE_BACKEND


@register("mail", deploy=True)
def mail_is_sent_in_production(app_configs, **kwargs) -> list[Warning]:
    """The default backend prints mail: in production the digests would quietly go nowhere."""
    if settings.DEBUG or settings.EMAIL_BACKEND != CONSOLE_BACKEND:
        return []
    return [Warning(
        "EMAIL_BACKEND is the console backend while DEBUG is off: the due digests are printed to the log, not "
        "sent.",
        hint="Set the environment variable EMAIL_BACKEND=django.core.mail.backends.smtp.EmailBackend, and "
             "EMAIL_HOST with the SMTP server (README, Deployment).",
        id="planning.W001",
    )]


@register("mail")
def one_kind_of_mail_encryption(app_configs, **kwargs) -> list[Error]:
    """Django's SMTP backend refuses both at once, so every digest would fail."""
    if not (settings.EMAIL_USE_TLS and settings.EMAIL_USE_SSL):
        return []
    return [Error(
        "EMAIL_USE_TLS and EMAIL_USE_SSL are both on; the mail server takes one or the other.",
        hint="Set EMAIL_USE_SSL=1 for a server that speaks TLS from the first byte (usually port 465), or "
             "EMAIL_USE_TLS=1 for one that starts plain and upgrades with STARTTLS (usually port 587), not both.",
        id="planning.E001",
    )]
