"""System checks of the settings a deployment must get right (``python manage.py check``, ``check --deploy``): the due
digest's mail, the address its links and the work orders' QR codes give (SITE_URL), the hosts served, and the
database. A deployment review found a forgotten DATABASE_URL running the site on a new SQLite file, and SITE_URL or
ALLOWED_HOSTS left at their defaults, all passing ``check --deploy``."""
from __future__ import annotations

from urllib.parse import urlsplit

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


#: SITE_URL when it is not set (settings.py): the development server's address.
DEFAULT_SITE_URL = "http://127.0.0.1:8000"
#: ALLOWED_HOSTS when it is not set (settings.py).
DEFAULT_HOSTS = ["127.0.0.1", "localhost"]


@register("deployment", deploy=True)
def deployment_addresses_and_database(app_configs, **kwargs) -> list[Warning]:
    """With DEBUG off: the database named (not the SQLite file of the embedded default), the hosts served named, and
    SITE_URL an http(s) address on one of them."""
    if settings.DEBUG:
        return []
    found = []
    if not settings.DATABASE_URL_GIVEN:
        found.append(Warning(
            f"DATABASE_URL is not set: the database is the SQLite file {settings.DATABASES['default']['NAME']}, "
            "not the database server.",
            hint="Set DATABASE_URL=postgres://... in the environment file every process reads (README, Deployment); "
                 "a commented-out or misspelt line leaves it unset.",
            id="planning.W002",
        ))
    hosts = [host for host in settings.ALLOWED_HOSTS if host != "testserver"]
    if "*" in hosts:  # any Host header is answered, and the calendar's links are built from it (a security review)
        found.append(Warning(
            "ALLOWED_HOSTS holds '*': a request naming any host is answered, and the links the calendar file gives "
            "are built from the host the request named.",
            hint="Set ALLOWED_HOSTS to the host names the site is reached by: ALLOWED_HOSTS=observatory.example.org",
            id="planning.W006",
        ))
    elif hosts == DEFAULT_HOSTS or any("://" in host or "/" in host for host in hosts):
        found.append(Warning(
            f"ALLOWED_HOSTS is {','.join(hosts)}: requests for the site's own name are answered 400.",
            hint="Set ALLOWED_HOSTS to the host names the site is reached by, without scheme or path: "
                 "ALLOWED_HOSTS=observatory.example.org",
            id="planning.W003",
        ))
    address = urlsplit(settings.SITE_URL)
    if settings.SITE_URL == DEFAULT_SITE_URL or address.scheme not in ("http", "https") or not address.hostname:
        found.append(Warning(
            f"SITE_URL is {settings.SITE_URL!r}: the digest's links, the API's page addresses and the work orders' "
            "QR codes would lead there.",
            hint="Set SITE_URL to the address people open the site at, with its scheme: "
                 "SITE_URL=https://observatory.example.org",
            id="planning.W004",
        ))
    elif not _host_allowed(address.hostname, hosts):
        found.append(Warning(
            f"SITE_URL names {address.hostname}, which is not among ALLOWED_HOSTS ({','.join(hosts)}): its links "
            "would be answered 400.",
            hint="Add the host to ALLOWED_HOSTS, or correct SITE_URL.",
            id="planning.W005",
        ))
    return found


def _host_allowed(host: str, allowed: list[str]) -> bool:
    """Django's rule for ALLOWED_HOSTS: an exact name, ".example.org" for it and its subdomains, or "*"."""
    from django.utils.http import is_same_domain

    return any(pattern == "*" or is_same_domain(host, pattern) for pattern in allowed)
