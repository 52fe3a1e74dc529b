"""Whole-database backup to one JSON file, and restore into an empty database.

The file is Django's serialised form of every row of the project's apps, the people and their roles,
and the change histories, preceded by a one-line header: format, creation time, the migrations applied to
the database it was taken from, row counts, and the SHA-256 of the rows after the header. It is created
readable by its owner only (mode 0600): it holds password hashes, API-token hashes and the whole record.

Restore reads and checks the whole file first (the checksum catches an edit that keeps the row counts; it is
no seal: an editor who also rewrites the header's checksum passes it), and refuses a backup taken at other
migrations than the database's: rows written by an older version go into the newer tables without the data
migrations of the upgrade (a hazard a later migration added would be missing), so such a backup is restored
with the version that wrote it and then upgraded with ``migrate``. Since the checksum is no seal, every row's
values are then checked by the rules the product applies on entry (``_value_problems``: each field's own bounds,
and a night's figures by the nights format's), and a file with one refused value is refused whole, its rows named.
Then it loads everything in one transaction: it checks the references between rows, compares the rows restored
per table with the header's counts, moves the database's id sequences past the restored ids (PostgreSQL; as
``loaddata`` does) and recomputes every site's due states (derived rows are not backed up). A refusal or failure
at any point, an unforeseen error included (``_failure_named``), leaves the database as it was and is said in one
sentence naming what failed.
"""
from __future__ import annotations

import datetime as dt
import gzip
import hashlib
import json
import os
import zlib
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from django.apps import apps
from django.conf import settings
from django.core import serializers
from django.core.exceptions import ValidationError
from django.core.management.color import no_style
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import DataError, IntegrityError, connection, transaction
from django.db.migrations.executor import MigrationExecutor
from django.template.defaultfilters import pluralize
from django.utils import timezone

from observatory_ops.calc.night_of import night_of
from observatory_ops.command_files import database_in_use
from observatory_ops.logbook import nights_csv

FORMAT = "observatory_ops-backup/2"
#: Backups that record no migrations: this version cannot tell which data migrations they missed.
_UNCHECKED_FORMATS = {"observatory_ops-backup/1"}
#: Apps whose rows a backup holds, in dependency order. Django's own content types, permissions,
#: sessions and admin log are rebuilt by migrations or are not part of the record.
APPS = ("auth", "registry", "planning", "logbook", "workorders", "mirrors", "api", "archive")
#: Left out of a backup: permissions, which migrations make, and the due states, which are derived rows
#: computed again for every site after a restore.
_SKIP = {"auth.permission", "planning.planstatus"}
#: Tables named in full when restore refuses a database that already holds rows.
_BUSY_NAMED = 8
#: Refused values named in full when restore refuses a file for its values (an edit may touch thousands of rows).
_PROBLEMS_NAMED = 10


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
    """Write every row to ``path`` (gzip-compressed JSON when it ends in .gz), readable by its owner only.

    Never overwrites: a file already at ``path`` raises FileExistsError. Returns the row counts. Raises
    BackupError, writing nothing, when the database is not migrated (its tables would be missing or old).
    """
    pending, applied = _migrations()
    if pending:
        raise BackupError(f"{database_in_use()} is not migrated ({pending} migrations not applied): run "
                          "`python manage.py migrate` first, then back it up")
    objects, counts = [], {}
    # Every table read in one transaction that sees one moment of the database, so a backup taken while the
    # tool is in use holds no row pointing at one written after its table was read. PostgreSQL's default
    # (READ COMMITTED) takes a new snapshot per statement, hence REPEATABLE READ, which can only be set as a
    # transaction begins (a caller's own transaction keeps its level); SQLite's read transaction already
    # sees one state of the file.
    outermost = not connection.in_atomic_block
    with transaction.atomic():
        if connection.vendor == "postgresql" and outermost:
            with connection.cursor() as cursor:
                cursor.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ READ ONLY")
        for model in _models():
            rows = list(model._default_manager.order_by("pk"))
            counts[model._meta.label_lower] = len(rows)
            objects.extend(rows)
    # Natural keys for references to rows the backup does not hold (permissions, content types): their ids
    # differ between databases, their names do not.
    body = serializers.serialize("json", objects, use_natural_foreign_keys=True).encode()
    header = {
        "format": FORMAT, "created_at": dt.datetime.now(dt.UTC).isoformat(), "migrations": applied,
        "counts": counts, "body_sha256": hashlib.sha256(body).hexdigest(), "code": code_version(),
    }
    data = json.dumps(header).encode() + b"\n" + body
    if str(path).endswith(".gz"):
        data = gzip.compress(data)
    # Mode 0600 from creation, before any content: the file holds password and token hashes.
    out = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        with os.fdopen(out, "wb") as file:
            file.write(data)
    except OSError:
        Path(path).unlink(missing_ok=True)  # a part-written file is no backup
        raise
    return counts


def _read(path: Path) -> tuple[dict, list[dict]]:
    """The header and the rows of the backup at ``path``, checked as far as can be without the database."""
    data = Path(path).read_bytes()
    if data[:2] == b"\x1f\x8b":
        try:
            data = gzip.decompress(data)
        except (OSError, EOFError, zlib.error) as exc:
            raise BackupError(f"{path}: the compressed file is damaged or cut short ({exc})") from None
    first, _, body = data.partition(b"\n")
    try:
        header = json.loads(first.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise BackupError(f"{path} is not an observatory_ops backup (no header line)") from None
    if isinstance(header, dict) and header.get("format") in _UNCHECKED_FORMATS:
        raise BackupError(
            f"{path} was written by an earlier version of observatory_ops, whose backups do not record the "
            "migrations they were taken at, so this version cannot tell which upgrade steps its rows missed: "
            "restore it with the version that wrote it, then upgrade with `python manage.py migrate` (and take a "
            "new backup)"
        )
    if not isinstance(header, dict) or header.get("format") != FORMAT:
        raise BackupError(f"{path} is not an observatory_ops backup of format {FORMAT}")
    counts = header.get("counts")
    if not isinstance(counts, dict) or not all(type(n) is int for n in counts.values()):
        raise BackupError(f"{path}: the header of the backup has no row counts, so it was edited or damaged")
    migrations = header.get("migrations")
    if not isinstance(migrations, list) or not all(
        isinstance(pair, list) and len(pair) == 2 and all(isinstance(part, str) for part in pair)
        for pair in migrations
    ):
        raise BackupError(f"{path}: the header of the backup has no list of migrations, so it was edited or "
                          "damaged")
    if not isinstance(header.get("body_sha256"), str):
        raise BackupError(f"{path}: the header of the backup has no checksum, so it was edited or damaged")
    if not body.strip():
        raise BackupError(f"{path} holds a backup header but no rows after it: the file was cut short")
    try:
        rows = json.loads(body.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise BackupError(f"{path}: the rows after its header are not UTF-8 text ({exc.reason} at byte "
                          f"{exc.start}), so the file is damaged") from None
    except json.JSONDecodeError as exc:
        raise BackupError(f"{path}: the rows after its header are not complete JSON ({exc.msg} at line "
                          f"{exc.lineno}, column {exc.colno}), so the file was cut short or damaged") from None
    if hashlib.sha256(body).hexdigest() != header["body_sha256"]:
        raise BackupError(f"{path}: the rows after its header are not those the backup wrote (their SHA-256 "
                          "differs from the header's), so the file was damaged or edited")
    if not isinstance(rows, list) or not all(
        isinstance(row, dict) and isinstance(row.get("model"), str) and isinstance(row.get("fields"), dict)
        for row in rows
    ):
        raise BackupError(f"{path}: the rows after its header are not a list of stored rows, so the file was "
                          "edited or damaged")
    return header, rows


def _migrations() -> tuple[int, list[list[str]]]:
    """How many of this version's migrations the database lacks, and the [app, name] of each it has applied,
    in order (a squashed migration stands for those it replaces, as in the migration graph)."""
    executor = MigrationExecutor(connection)
    graph = executor.loader.graph
    applied = sorted([app, name] for app, name in executor.loader.applied_migrations if (app, name) in graph.nodes)
    return len(executor.migration_plan(graph.leaf_nodes())), applied


def code_version() -> str:
    """The commit the running code was checked out at, read from its git folder (no git program needed); "" for code
    not in a git checkout (an unpacked release). Kept in a backup's header, so a refusal of a backup taken before an
    upgrade names the code to go back to (an IT review found nothing that said which it was)."""
    git = Path(settings.BASE_DIR) / ".git"
    try:
        head = (git / "HEAD").read_text().strip()
        if not head.startswith("ref: "):
            return head  # a detached checkout: the commit itself
        ref = head.removeprefix("ref: ")
        if (git / ref).is_file():
            return (git / ref).read_text().strip()
        for line in (git / "packed-refs").read_text().splitlines():
            if line.endswith(f" {ref}"):
                return line.split()[0]
    except OSError:  # no git folder, a worktree's .git file, an unreadable one
        pass
    return ""


def _check_migrations(path: Path, backup: list[list[str]], database: list[list[str]], code: str = "") -> None:
    """Refuse a backup taken at other migrations than the database's, naming the first difference, and the commit of
    the code that wrote it when its header has one (``code_version``)."""
    theirs, ours = {tuple(pair) for pair in backup}, {tuple(pair) for pair in database}
    differing = sorted(theirs ^ ours)
    if not differing:
        return
    first = ".".join(differing[0])
    which = (f"this database has migration {first} applied, the backup's database had not" if differing[0] in ours
             else f"the backup's database had migration {first} applied, this database has not")
    more = f" (the first of {len(differing)} differences)" if len(differing) > 1 else ""
    raise BackupError(
        f"{path} was written by another version of observatory_ops: {which}{more}. Restore it with the version "
        f"that wrote it{f' (commit {code})' if code else ''}, then upgrade with `python manage.py migrate`"
    )


def tables_holding_rows() -> list[str]:
    """Names of tables that already hold rows (role groups made by the migrations do not count)."""
    busy = []
    for model in _models():
        if model._meta.label_lower == "auth.group":
            continue
        if model._default_manager.exists():
            busy.append(model._meta.label_lower)
    return busy


def _row_counts() -> dict[str, int]:
    return {model._meta.label_lower: model._default_manager.count() for model in _models()}


def _one_line(exc: Exception) -> str:
    return " ".join(str(exc).split())


def _field_problems(model, fields: dict) -> dict[str, str]:
    """Why a figure of a stored row is refused by its field's own bounds, by field name: a number outside its
    ``MinValueValidator`` / ``MaxValueValidator`` (a latitude of 120), a value outside its choices, or a value of a
    shape the field cannot read.

    Only these: a rule added since a row was written (a name on one line, a text's length) would refuse a genuine
    backup of a record kept from before it, and a history row is never checked, since history cannot be corrected (a
    diff review's backup holding a booked run's two-line title, valid when written, could never be restored). Left to
    the database too: relations (the row pointed at may come later in the file) and uniqueness.
    """
    if any(field.name == "history_id" for field in model._meta.fields):  # django-simple-history's rows
        return {}
    found = {}
    for field in model._meta.concrete_fields:
        if field.is_relation or field.primary_key or fields.get(field.name, None) in (None, *field.empty_values):
            continue
        raw = fields[field.name]
        try:
            value = field.to_python(raw)
            for validator in field.validators:
                if isinstance(validator, MinValueValidator | MaxValueValidator):
                    validator(value)
            if field.choices and value not in {key for key, _ in field.flatchoices}:
                raise ValidationError(f"not one of its choices ({', '.join(str(k) for k, _ in field.flatchoices)})")
        except ValidationError as exc:
            found[field.name] = f"{field.name} {nights_csv.shown(raw)}: {' '.join(exc.messages).rstrip('.')}"
        except (TypeError, ValueError) as exc:  # a value of a shape no field reads (a list for a date)
            found[field.name] = f"{field.name}: a value cannot be read ({_one_line(exc)})"
    return found


class _NightRules:
    """The nights format's checks (``logbook.nights_csv``: those of the CSV import and the API) of the nightly usage
    rows of one backup written at ``written_at``, each row's telescope named as the format names it."""

    def __init__(self, rows: list[dict], written_at: dt.datetime):
        telescopes = {row.get("pk"): row["fields"] for row in rows if row["model"] == "registry.telescope"}
        self.telescope_names = {pk: fields.get("name") for pk, fields in telescopes.items()}
        self.names_at_site: dict[object, list[str]] = {}
        for fields in telescopes.values():
            self.names_at_site.setdefault(fields.get("site"), []).append(fields.get("name"))
        # The newest night each site could have logged when the backup was written: no row can be of a later one.
        self.latest_anywhere = written_at.date() + dt.timedelta(days=1)  # no zone's date is a day ahead of UTC's
        self.latest_night = {}
        for row in rows:
            if row["model"] == "registry.site":
                try:
                    self.latest_night[row.get("pk")] = night_of(written_at, row["fields"].get("time_zone"))
                except ValueError:
                    pass  # the site's own row is refused for its zone; its nights are held to latest_anywhere

    def problems(self, fields: dict) -> dict[str, str]:
        """Why the format refuses the figures of one stored night, by field name."""
        record = {name: fields[name] for name in nights_csv.COLUMNS if name in fields}
        telescope = record.pop("telescope", None)
        if telescope is None:
            record["telescope"] = None
        elif telescope in self.telescope_names:  # else the database names the telescope missing
            record["telescope"] = self.telescope_names[telescope]
        latest = self.latest_night.get(fields.get("site"), self.latest_anywhere)
        try:
            night = dt.date.fromisoformat(fields.get("night"))
        except (TypeError, ValueError):
            night = None  # the format says why
        # The format's earliest night lies MAX_YEARS_BACK years before the day a night was logged, which may have been
        # long before the backup: it cannot be checked again, so an older night is checked as if logged that day.
        if night is not None and night < nights_csv.earliest_accepted(latest):
            latest = night
        site_telescopes = self.names_at_site.get(fields.get("site"), ())
        checked = nights_csv.ParsedNights(latest, as_json=True, telescopes=site_telescopes)
        checked.add(0, record)
        return {problem.field or "": problem.reason for problem in checked.errors}


def _written_at(header: dict) -> dt.datetime:
    """When the backup was written, as its header says; now, when the header says no time or a time still to come."""
    now = timezone.now()
    try:
        written = dt.datetime.fromisoformat(header.get("created_at"))
    except (TypeError, ValueError):
        return now
    return min(written, now) if written.utcoffset() is not None else now


def _value_problems(path: Path, header: dict, rows: list[dict]) -> None:
    """Refuse a file holding a value the product would refuse on entry, naming each row, field and problem.

    The checksum catches no edit made by someone who writes it again, so every row is checked as it would be entered:
    each field by its own bounds (``_field_problems``) and a night's figures by the nights format's rules too
    (``_NightRules``: 30 open hours, 99,999 slews). Checked before anything is loaded, so a refusal writes nothing.
    """
    nights = _NightRules(rows, _written_at(header))
    problems = []
    for position, row in enumerate(rows, start=1):
        try:
            model = apps.get_model(row["model"])
        except (LookupError, ValueError):
            continue  # the load names a model this version does not have
        found = nights.problems(row["fields"]) if model._meta.label_lower == "logbook.nightusage" else {}
        for name, reason in _field_problems(model, row["fields"]).items():
            found.setdefault(name, reason)  # a night's field refused by both: the format's words name its limit
        where = f"{row['model']} {row.get('pk')} (row {position:,} of the file)"
        problems.extend(f"{where}: {reason}" for reason in found.values())
    if problems:
        more = f"; and {len(problems) - _PROBLEMS_NAMED:,} more" if len(problems) > _PROBLEMS_NAMED else ""
        raise BackupError(
            f"{path} holds {len(problems):,} value{pluralize(len(problems))} that would be refused on entry, so the "
            f"file was edited or damaged, and nothing was restored: {'; '.join(problems[:_PROBLEMS_NAMED])}{more}"
        )


@contextmanager
def _failure_named(path: Path, what: str) -> Iterator[None]:
    """Any error but a refusal raised within, said as one sentence naming ``what`` failed (the transaction around it
    is rolled back, so nothing is stored): a restore ends in a message, never a traceback."""
    try:
        yield
    except BackupError:
        raise
    except Exception as exc:
        raise BackupError(f"{path}: {what} failed ({type(exc).__name__}: {_one_line(exc)}), so nothing was "
                          "restored") from exc


def _load(path: Path, rows: list[dict]) -> None:
    """Save every row of the backup as it is (ids included), naming the row a database rule refuses."""
    try:
        for item in serializers.deserialize("python", rows):
            try:
                item.save()
            except (IntegrityError, DataError) as exc:
                # The first line names the rule; PostgreSQL's detail after it repeats the whole row.
                reason = str(exc).splitlines()[0]
                raise BackupError(f"{path}: row {item.object._meta.label_lower} {item.object.pk} breaks a rule "
                                  f"of the database ({reason}), so the file was edited or damaged") from None
    except serializers.base.DeserializationError as exc:
        raise BackupError(f"{path}: a row cannot be read ({_one_line(exc)}), so the file was edited or "
                          "damaged") from None
    # References between rows are checked at commit (deferred); check them now, to name the row.
    try:
        connection.check_constraints()
    except IntegrityError as exc:
        raise BackupError(f"{path}: a row points at a row that is not in the file ({_one_line(exc)}), so the "
                          "file was edited or damaged") from None


def _check_counts(path: Path, expected: dict[str, int], restored: dict[str, int]) -> None:
    differing = [
        f"{label}: {expected.get(label, 0):,} in the header, {restored.get(label, 0):,} restored"
        for label in sorted(expected.keys() | restored.keys())
        if expected.get(label, 0) != restored.get(label, 0)
    ]
    if differing:
        raise BackupError(f"{path} does not hold the rows its header counts ({'; '.join(differing)}), so the "
                          "file was cut or edited")


def backup_restore(path: Path) -> dict[str, int]:
    """Load a backup into an empty, migrated database, all or nothing. Returns the rows restored per table.

    Raises BackupError, and leaves the database as it was, when the file is not a whole, unedited backup
    or the database is not migrated or not empty.
    """
    header, rows = _read(path)
    pending, applied = _migrations()
    if pending:
        raise BackupError(f"{database_in_use()} is not migrated ({pending} migrations not applied): run "
                          "`python manage.py migrate` first, then restore into it")
    _check_migrations(path, header["migrations"], applied, header.get("code", ""))
    _value_problems(path, header, rows)
    busy = tables_holding_rows()
    if busy:
        more = f" and {len(busy) - _BUSY_NAMED} more" if len(busy) > _BUSY_NAMED else ""
        raise BackupError(
            "restore needs an empty database, but these tables already hold rows: "
            + ", ".join(busy[:_BUSY_NAMED]) + more
            + ". Create a new database, run `python manage.py migrate`, then restore into it."
        )
    with _failure_named(path, "the restore"), transaction.atomic():
        for model in (m for m in _models() if m._meta.label_lower == "auth.group"):
            model._default_manager.all().delete()  # the migration's role groups come back from the backup
        with _failure_named(path, "loading the rows"):
            _load(path, rows)
        restored = _row_counts()
        _check_counts(path, header["counts"], restored)
        # Rows came with their ids: move the id sequences past them, or the next new row collides.
        with connection.cursor() as cursor:
            for statement in connection.ops.sequence_reset_sql(no_style(), list(_models())):
                cursor.execute(statement)
        from observatory_ops.planning.services import site_recompute  # the due states, computed again
        from observatory_ops.registry.models import Site

        for site in Site.objects.all():
            with _failure_named(path, f"computing the due states of site {site.slug} from the restored rows"):
                site_recompute(site)
    return restored
