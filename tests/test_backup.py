"""Backup and restore: a restored database takes new rows, a backup file is private to its owner, and a
bad file or database is refused in one sentence that names the problem, leaving every table as it was.

Each test restores and commits as in use (a transactional test), so keys that the database checks at
commit are checked here too. The suite runs on SQLite and, in CI, on PostgreSQL (DATABASE_URL).
"""
from __future__ import annotations

import datetime as dt
import gzip
import hashlib
import io
import json
import os
import re
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import ROLES, site_in_use
from django.apps import apps
from django.core.management import call_command
from django.core.management.base import CommandError

pytestmark = pytest.mark.django_db(transaction=True)

NIGHTS_LOGGED = 20
PROJECT = Path(__file__).resolve().parent.parent


def _row_counts() -> dict[str, int]:
    """Rows in every table, Django's own and the many-to-many links included."""
    return {m._meta.label_lower: m._default_manager.count() for m in apps.get_models(include_auto_created=True)}


def _fresh_database() -> None:
    """What `migrate` leaves in a new database: no rows but the role groups (flush runs the same
    post-migrate step that makes them). Flush also restarts PostgreSQL's id sequences, so the record
    written next starts at id 1 as in a new database."""
    call_command("flush", "--no-input")


def _backup_of_a_small_record(path: Path) -> Path:
    """People in each role, a site in use (plans, nights, histories), a night sent by control software and
    an API token, written to ``path``; the database is then emptied to what `migrate` leaves."""
    from django.contrib.auth.models import Group, User

    from observatory_ops.api.services import api_token_create
    from observatory_ops.logbook.services import nights_ingest

    _fresh_database()
    people = {}
    for role in ROLES:
        people[role] = User.objects.create_user(role, password=f"pw-{role}-123456")
        people[role].groups.add(Group.objects.get(name=role))
    site = site_in_use("restore-hill", nights=NIGHTS_LOGGED)
    # A night before the log's first (every night after it up to yesterday is logged), with its history row.
    sent = site.nights.order_by("night").first().night - dt.timedelta(days=1)
    assert nights_ingest(site, [{"night": sent.isoformat(), "open_hours": 6.5}], by=people["technician"]).stored
    api_token_create(site, "east dome control computer", by=people["administrator"])
    call_command("backup", str(path))
    _fresh_database()
    return path


def _header_and_rows(path: Path) -> tuple[str, list[dict]]:
    header, _, body = path.read_text().partition("\n")
    return header, json.loads(body)


def _edited(path: Path, edit) -> Path:
    """A copy of the backup at ``path`` whose rows went through ``edit`` (a function of the row list), with the
    header's checksum written again to match, as a deliberate editor could: so the checks behind the checksum
    are tried too."""
    header, rows = _header_and_rows(path)
    body = json.dumps(edit(rows))
    fields = {**json.loads(header), "body_sha256": hashlib.sha256(body.encode()).hexdigest()}
    edited = path.with_name("edited-" + path.name)
    edited.write_text(json.dumps(fields) + "\n" + body)
    return edited


def _header_changed(path: Path, change) -> Path:
    """A copy of the backup at ``path`` with the same rows under a header that went through ``change``."""
    header, _, body = path.read_text().partition("\n")
    changed = path.with_name("header-changed-" + path.name)
    changed.write_text(json.dumps(change(json.loads(header))) + "\n" + body)
    return changed


def _first_night(rows: list[dict]) -> dict:
    return next(row for row in rows if row["model"] == "logbook.nightusage")


def test_a_restored_database_takes_new_rows(tmp_path):
    """Restore loads rows with their ids; the id sequences (PostgreSQL) must move past them, or the next
    night, person, token or history row collides with a restored one."""
    from django.contrib.auth.models import User
    from django.db.models import Max

    from observatory_ops.api.models import ApiToken
    from observatory_ops.api.services import api_token_create
    from observatory_ops.logbook.models import NightUsage
    from observatory_ops.logbook.services import nights_ingest
    from observatory_ops.registry.models import Site

    path = _backup_of_a_small_record(tmp_path / "record.json.gz")
    out = io.StringIO()
    call_command("restore", str(path), stdout=out)
    restored = _row_counts()
    assert restored["logbook.nightusage"] == NIGHTS_LOGGED + 1
    assert f"{sum(json.loads(gzip.open(path).readline())['counts'].values()):,} rows" in out.getvalue()

    def highest(model) -> int:
        return model._default_manager.aggregate(top=Max("pk"))["top"]

    before = {model: highest(model) for model in (User, ApiToken, NightUsage, NightUsage.history.model)}
    site = Site.objects.get(slug="restore-hill")
    person = User.objects.create_user("night-assistant", password="pw-night-assistant-123456")
    token, _ = api_token_create(site, "west dome control computer", by=person)
    earlier = site.nights.order_by("night").first().night - dt.timedelta(days=1)  # a night not yet logged
    report = nights_ingest(site, [{"night": earlier.isoformat(), "open_hours": 5.0}], by=person)
    assert report.created == 1
    night = NightUsage.objects.get(site=site, night=earlier)
    history = night.history.get()
    assert person.pk > before[User]
    assert token.pk > before[ApiToken]
    assert night.pk > before[NightUsage]
    assert history.pk > before[NightUsage.history.model]
    assert history.history_user == person


@pytest.mark.parametrize("name", ["record.json", "record.json.gz"])
def test_a_backup_file_is_readable_by_its_owner_only(tmp_path, name):
    """It holds password hashes, API-token hashes and the whole record."""
    path = tmp_path / name
    call_command("backup", str(path))
    assert path.stat().st_mode & 0o777 == 0o600


def _cut_in_half(path: Path) -> Path:
    cut = path.with_name("cut-" + path.name)
    cut.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
    return cut


def _header_only(path: Path) -> Path:
    header, _ = _header_and_rows(path)
    cut = path.with_name("header-only-" + path.name)
    cut.write_text(header + "\n")
    return cut


def _night_at_a_missing_site(path: Path) -> Path:
    def edit(rows):
        _first_night(rows)["fields"]["site"] = 999
        return rows

    return _edited(path, edit)


def _negative_slews(path: Path) -> Path:
    def edit(rows):
        _first_night(rows)["fields"]["slews"] = -3
        return rows

    return _edited(path, edit)


def _night_twice(path: Path) -> Path:
    """The second night of the file given the first one's date and owner: each row's values pass, the two break the
    one-night-per-site rule of the database."""
    def edit(rows):
        first, second = [row for row in rows if row["model"] == "logbook.nightusage"][:2]
        for name in ("night", "telescope"):
            second["fields"][name] = first["fields"][name]
        return rows

    return _edited(path, edit)


def _nights_deleted(path: Path) -> Path:
    return _edited(path, lambda rows: [row for row in rows if row["model"] != "logbook.nightusage"])


def _open_hours_changed_in_place(path: Path) -> Path:
    """One night's dome-open hours changed by hand in a text editor, the rest of the file byte for byte as
    written: the same rows, each still valid, under the same header."""
    header, _, body = path.read_text().partition("\n")
    changed = re.sub(r'"open_hours": (\d+\.\d+)', lambda m: f'"open_hours": {float(m[1]) + 1.0}', body, count=1)
    assert changed != body and len(json.loads(changed)) == len(json.loads(body))
    edited = path.with_name("edited-" + path.name)
    edited.write_text(header + "\n" + changed)
    return edited


@pytest.mark.parametrize(("name", "damage", "message"), [
    ("record.json.gz", _cut_in_half, r"record\.json\.gz: the compressed file is damaged or cut short"),
    ("record.json", _cut_in_half, r"record\.json: the rows after its header are not complete JSON \(.+\)"),
    ("record.json", _header_only, r"record\.json holds a backup header but no rows after it"),
    ("record.json", _night_at_a_missing_site,
     r"record\.json: a row points at a row that is not in the file \(.*logbook_nightusage.*\)"),
    ("record.json", _negative_slews,
     r"record\.json holds 1 value that would be refused on entry, .+: logbook\.nightusage 1 \(row [\d,]+ of the "
     r"file\): slews cannot be below 0 \(got -3\)"),
    ("record.json", _night_twice, r"record\.json: row logbook\.nightusage \d+ breaks a rule of the database"),
    ("record.json", _nights_deleted,
     rf"record\.json does not hold the rows its header counts \(logbook\.nightusage: {NIGHTS_LOGGED + 1} in the "
     r"header, 0 restored\)"),
    ("record.json", _open_hours_changed_in_place,
     r"record\.json: the rows after its header are not those the backup wrote \(their SHA-256 differs from the "
     r"header's\), so the file was damaged or edited"),
])
def test_a_damaged_or_edited_backup_is_refused_and_changes_nothing(tmp_path, name, damage, message):
    bad = damage(_backup_of_a_small_record(tmp_path / name))
    before = _row_counts()
    assert before["auth.group"] == len(ROLES)  # restore replaces these: a refusal must bring them back
    with pytest.raises(CommandError, match=message) as refusal:
        call_command("restore", str(bad))
    assert "\n" not in str(refusal.value)
    assert _row_counts() == before


def _latest_migration(app: str) -> str:
    from django.db.migrations.loader import MigrationLoader

    (leaf,) = MigrationLoader(None, ignore_no_migrations=True).graph.leaf_nodes(app)
    return leaf[1]


def test_a_backup_records_the_migrations_it_was_taken_at_and_a_checksum_of_its_rows(tmp_path):
    """The header lists every applied migration as [app, name], so a restore can tell the version that wrote
    it, and the SHA-256 of the bytes after the header line (FIPS 180-4, as Python's hashlib computes it)."""
    path = tmp_path / "record.json"
    call_command("backup", str(path))
    header, _, body = path.read_bytes().partition(b"\n")
    fields = json.loads(header)
    assert fields["format"] == "observatory_ops-backup/2"
    for app in ("auth", "access", "registry", "planning", "logbook", "workorders", "mirrors", "api"):
        assert [app, _latest_migration(app)] in fields["migrations"]
    assert fields["body_sha256"] == hashlib.sha256(body).hexdigest()


def test_a_backup_from_an_older_version_is_refused_naming_the_first_migration_it_lacks(tmp_path):
    """Restoring it here would skip the upgrade's data migrations (a hazard a later migration adds to a kind
    would be missing), so it is restored with the version that wrote it and then upgraded with `migrate`."""
    path = _backup_of_a_small_record(tmp_path / "record.json")
    planning, workorders = _latest_migration("planning"), _latest_migration("workorders")

    def before_the_latest_planning_and_workorders_migrations(header):
        later = (["planning", planning], ["workorders", workorders])
        return {**header, "migrations": [pair for pair in header["migrations"] if pair not in later], "code": ""}

    older = _header_changed(path, before_the_latest_planning_and_workorders_migrations)
    before = _row_counts()
    with pytest.raises(CommandError) as refusal:
        call_command("restore", str(older))
    assert str(refusal.value) == (
        f"{older} was written by another version of observatory_ops: this database has migration "
        f"planning.{planning} applied, the backup's database had not (the first of 2 differences). Restore it "
        "with the version that wrote it, then upgrade with `python manage.py migrate`"
    )
    assert _row_counts() == before


def test_a_backup_names_the_commit_of_the_code_that_wrote_it_and_its_refusal_says_it(tmp_path):
    """An IT review restored a backup taken before an upgrade with the new code: refused, rightly, with nothing that
    said which code to go back to. The header keeps the commit (read from the checkout's git folder); a checkout the
    tests run in has one, an unpacked release none ("")."""
    import gzip
    import json

    from observatory_ops.archive.backup import code_version

    path = _backup_of_a_small_record(tmp_path / "record.json")
    data = path.read_bytes()
    header = json.loads((gzip.decompress(data) if data[:2] == b"\x1f\x8b" else data).split(b"\n", 1)[0])
    assert header["code"] == code_version()
    if (PROJECT / ".git").is_dir():
        assert len(header["code"]) == 40 and all(c in "0123456789abcdef" for c in header["code"])
    older = _header_changed(path, lambda h: {**h, "migrations": h["migrations"][:-1], "code": "0" * 40})
    with pytest.raises(CommandError, match=f"Restore it with the version that wrote it \\(commit {'0' * 40}\\)"):
        call_command("restore", str(older))


def test_a_backup_from_a_newer_version_is_refused_naming_the_migration_this_one_lacks(tmp_path):
    path = _backup_of_a_small_record(tmp_path / "record.json")
    newer = _header_changed(path, lambda header: {
        **header, "migrations": [*header["migrations"], ["registry", "9999_from_a_later_version"]],
    })
    before = _row_counts()
    with pytest.raises(CommandError, match=(
        r"the backup's database had migration registry\.9999_from_a_later_version applied, this database has "
        r"not\. Restore it with the version that wrote it"
    )):
        call_command("restore", str(newer))
    assert _row_counts() == before


def test_a_backup_from_before_migrations_were_recorded_is_refused_with_what_to_do(tmp_path):
    """Refused rather than restored with a warning: nothing in such a file says which data migrations its rows
    missed, and a warning scrolls by while the missing hazards stay."""
    path = _backup_of_a_small_record(tmp_path / "record.json")
    old = _header_changed(path, lambda header: {
        "format": "observatory_ops-backup/1", "created_at": header["created_at"], "counts": header["counts"],
    })
    before = _row_counts()
    with pytest.raises(CommandError, match=(
        r"record\.json was written by an earlier version of observatory_ops, whose backups do not record the "
        r"migrations they were taken at, .+: restore it with the version that wrote it, then upgrade with "
        r"`python manage\.py migrate` \(and take a new backup\)"
    )):
        call_command("restore", str(old))
    assert _row_counts() == before


def test_a_folder_is_not_taken_for_a_missing_file(tmp_path):
    with pytest.raises(CommandError, match=r"is a folder, not a backup file"):
        call_command("restore", str(tmp_path))


def test_restore_into_a_database_in_use_lists_its_tables_plainly(tmp_path):
    path = _backup_of_a_small_record(tmp_path / "record.json")
    call_command("restore", str(path))
    before = _row_counts()
    with pytest.raises(CommandError, match=r"already hold rows: auth\.user, .+ and \d+ more\. Create ") as refusal:
        call_command("restore", str(path))
    assert ".." not in str(refusal.value)
    assert _row_counts() == before


def test_restore_into_a_database_never_migrated_says_to_migrate_first(tmp_path):
    """Run as an operator would, against a new SQLite file: one sentence, no traceback, no table made."""
    path = tmp_path / "record.json"
    call_command("backup", str(path))
    database = tmp_path / "never-migrated.sqlite3"
    run = subprocess.run(
        [sys.executable, "manage.py", "restore", str(path)], cwd=PROJECT, capture_output=True, text=True,
        env={**os.environ, "DATABASE_URL": f"sqlite:///{database}"}, check=False,
    )
    assert run.returncode == 1
    assert "Traceback" not in run.stderr
    assert f"the SQLite file {database} is not migrated" in run.stderr  # which database it is (an IT review)
    assert "run `python manage.py migrate` first" in run.stderr
    with sqlite3.connect(database) as tables:
        assert tables.execute("SELECT name FROM sqlite_master").fetchall() == []


def test_backup_of_a_database_never_migrated_says_to_migrate_first(tmp_path):
    """Run as an operator would: one sentence, no traceback, no file written."""
    database, path = tmp_path / "never-migrated.sqlite3", tmp_path / "record.json"
    run = subprocess.run(
        [sys.executable, "manage.py", "backup", str(path)], cwd=PROJECT, capture_output=True, text=True,
        env={**os.environ, "DATABASE_URL": f"sqlite:///{database}"}, check=False,
    )
    assert run.returncode == 1
    assert "Traceback" not in run.stderr
    assert f"the SQLite file {database} is not migrated" in run.stderr and "then back it up" in run.stderr
    assert not path.exists()


def test_without_database_url_the_commands_say_they_use_the_embedded_default(tmp_path):
    """An IT review ran `backup` without loading the environment file: it backed up a new, empty SQLite file beside
    the code and said only "4 rows in 56 tables written". The SQLite default is named as such."""
    env = {k: v for k, v in os.environ.items() if k != "DATABASE_URL"}
    env["OBSOPS_DATA_DIR"] = str(tmp_path)
    run = subprocess.run([sys.executable, "manage.py", "backup", str(tmp_path / "record.json")], cwd=PROJECT,
                         capture_output=True, text=True, env=env, check=False)
    assert run.returncode == 1
    assert (f"the SQLite file {tmp_path / 'observatory_ops.sqlite3'} (the embedded default: DATABASE_URL is not set; "
            "load the environment file to use the site's database) is not migrated") in run.stderr


def test_a_backup_reads_every_table_in_one_snapshot(tmp_path):
    """A backup taken while the tool is in use must not hold a row pointing at one written after its table
    was read: on PostgreSQL every table is read in one REPEATABLE READ transaction (PostgreSQL manual,
    "Transaction Isolation": one snapshot for the whole transaction)."""
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    if connection.vendor != "postgresql":
        pytest.skip("SQLite's read transaction already sees one state of the file")
    with CaptureQueriesContext(connection) as captured:
        call_command("backup", str(tmp_path / "record.json"))
    statements = [q["sql"] for q in captured.captured_queries]
    first_read = next(i for i, sql in enumerate(statements) if sql.startswith("SELECT") and "auth_group" in sql)
    assert any("REPEATABLE READ" in sql for sql in statements[:first_read])
