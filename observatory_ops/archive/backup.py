"""Whole-database backup to one JSON file, and restore into an empty database.

The file is Django's serialised form of every row of the project's apps, the people and their roles,
and the change histories, preceded by a small header (format, creation time, row counts) so a restore
can check it is reading a backup and report what it holds. Restore loads everything in one
transaction and then recomputes every site's due states (derived rows are not backed up): a failure
part-way leaves the database as it was.
"""
from __future__ import annotations

import datetime as dt
import gzip
import io
import json
from pathlib import Path

from django.apps import apps
from django.core import serializers
from django.db import transaction

FORMAT = "observatory_ops-backup/1"
#: Apps whose rows a backup holds, in dependency order. Django's own content types, permissions,
#: sessions and admin log are rebuilt by migrations or are not part of the record.
APPS = ("auth", "registry", "planning", "logbook", "workorders", "mirrors", "api", "archive")
#: Derived rows: left out of a backup, skipped in an older backup that holds them, and computed again
#: for every site after a restore (so a restore into a newer version never carries an old layout).
_DERIVED = {"planning.planstatus"}
_SKIP = {"auth.permission"} | _DERIVED


def _models():
    for label in APPS:
        try:
            config = apps.get_app_config(label)
        except LookupError:
            continue
        for model in config.get_models():
            if model._meta.label_lower not in _SKIP and not model._meta.proxy:
                yield model


class BackupError(ValueError):
    pass


def backup_write(path: Path) -> dict[str, int]:
    """Write every row to ``path`` (gzip-compressed JSON when it ends in .gz). Returns row counts."""
    objects, counts = [], {}
    for model in _models():
        rows = list(model._default_manager.order_by("pk"))
        counts[model._meta.label_lower] = len(rows)
        objects.extend(rows)
    # Natural keys for references to rows the backup does not hold (permissions, content types): their ids
    # differ between databases, their names do not.
    body = serializers.serialize("json", objects, use_natural_foreign_keys=True)
    header = {"format": FORMAT, "created_at": dt.datetime.now(dt.UTC).isoformat(), "counts": counts}
    text = json.dumps(header) + "\n" + body
    data = gzip.compress(text.encode()) if str(path).endswith(".gz") else text.encode()
    Path(path).write_bytes(data)
    return counts


def _read(path: Path) -> tuple[dict, str]:
    data = Path(path).read_bytes()
    if data[:2] == b"\x1f\x8b":
        try:
            data = gzip.decompress(data)
        except OSError as exc:
            raise BackupError(f"{path}: damaged gzip file ({exc})") from None
    try:
        first, _, body = data.decode("utf-8").partition("\n")
        header = json.loads(first)
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise BackupError(f"{path} is not an observatory_ops backup (no header line)") from None
    if not isinstance(header, dict) or header.get("format") != FORMAT:
        raise BackupError(f"{path} is not an observatory_ops backup of format {FORMAT}")
    return header, body


def database_is_empty() -> list[str]:
    """Names of tables that already hold rows (role groups made by the migrations do not count)."""
    busy = []
    for model in _models():
        if model._meta.label_lower == "auth.group":
            continue
        if model._default_manager.exists():
            busy.append(model._meta.label_lower)
    return busy


def backup_restore(path: Path) -> dict[str, int]:
    """Load a backup into an empty database, all or nothing. Returns the row counts from its header."""
    header, body = _read(path)
    busy = database_is_empty()
    if busy:
        raise BackupError(
            "restore needs an empty database, but these tables already hold rows: "
            + ", ".join(busy[:8]) + ("..." if len(busy) > 8 else "")
            + ". Create a new database, run `python manage.py migrate`, then restore into it."
        )
    with transaction.atomic():
        for model in (m for m in _models() if m._meta.label_lower == "auth.group"):
            model._default_manager.all().delete()  # the migration's role groups come back from the backup
        try:
            for item in serializers.deserialize("json", io.StringIO(body)):
                if item.object._meta.label_lower not in _DERIVED:
                    item.save()
        except serializers.base.DeserializationError as exc:
            raise BackupError(f"{path}: damaged backup ({exc})") from None
        from observatory_ops.planning.services import site_recompute  # the due states, computed again
        from observatory_ops.registry.models import Site

        for site in Site.objects.all():
            site_recompute(site)
    return header["counts"]
