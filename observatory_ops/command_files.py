"""What the management commands say about a file they are given and cannot reach, which database they use, and a site
they are given by slug."""
from __future__ import annotations

import getpass

from django.conf import settings
from django.core.management.base import CommandError
from django.db import connection


def unreachable(file: str, to: str = "read") -> CommandError:
    """A file behind a folder the user running the command may not enter (a root shell's file given to
    ``runuser -u obsops``): said in a line, where ``Path.exists()`` raised a traceback (an operator review). ``to``:
    what the command does with it ("read", or "write" for a backup's file)."""
    return CommandError(f"{file}: permission denied: the user running this command ({getpass.getuser()}) cannot reach "
                        f"it; put it where that user can {to} it")


def database_in_use() -> str:
    """The database this process reads and writes, in words: "the PostgreSQL database obsops on 127.0.0.1:5432", or
    the SQLite file's path, said to be the embedded default when DATABASE_URL is not set. An IT review ran `backup`
    without loading the environment file: it backed up a new, empty SQLite file beside the code and said only "4 rows
    in 56 tables written"."""
    db = connection.settings_dict
    if db["ENGINE"] == "django.db.backends.sqlite3":
        default = "" if settings.DATABASE_URL_GIVEN else (
            " (the embedded default: DATABASE_URL is not set; load the environment file to use the site's database)")
        return f"the SQLite file {db['NAME']}{default}"
    return f"the PostgreSQL database {db['NAME']} on {db['HOST'] or 'localhost'}:{db['PORT'] or 5432}"


def site_by_slug(slug: str):
    """The site of ``slug``, or a CommandError naming the slugs there are and the database looked in."""
    from observatory_ops.registry.models import Site  # the registry's models load after this module

    site = Site.objects.filter(slug=slug).first()
    if site is None:
        known = ", ".join(Site.objects.values_list("slug", flat=True)) or "none"
        raise CommandError(f"no site with slug {slug!r} (known: {known}) in {database_in_use()}")
    return site
