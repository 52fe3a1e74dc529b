"""Restore checks every row's values as the product checks them on entry.

The checksum of a backup is no seal: someone who edits its rows can write the checksum again. So a restore checks
each row by its fields' own bounds (not a history row's) and each night by the nights format's rules
(``logbook.nights_csv``, those of the CSV import and the API), names every row it refuses (table, id, place in the
file, field, problem) and restores nothing; an error the checks cannot foresee is said in one sentence naming what
failed, with nothing stored.
"""
from __future__ import annotations

import datetime as dt
import json
import re

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from test_backup import NIGHTS_LOGGED, _backup_of_a_small_record, _edited, _row_counts

pytestmark = pytest.mark.django_db(transaction=True)


def _rows_of(rows: list[dict], model: str = "logbook.nightusage") -> list[dict]:
    """The rows of one table (the nights when none is named), in their order in the file."""
    return [row for row in rows if row["model"] == model]


def _named(rows: list[dict], row: dict) -> str:
    """How a refusal names ``row``: its table, its id and its place among the file's rows."""
    return f"{row['model']} {row['pk']} (row {rows.index(row) + 1:,} of the file)"


def _refusal(path) -> str:
    """The message of the refused restore of ``path``, checked to have stored nothing and to be one line."""
    before = _row_counts()
    with pytest.raises(CommandError) as refusal:
        call_command("restore", str(path))
    assert _row_counts() == before
    assert "\n" not in str(refusal.value)
    return str(refusal.value)


def _edit_and_name(path, edit) -> tuple[object, list[str]]:
    """A copy of the backup at ``path`` with ``edit`` (a function changing rows in place and returning those it
    changed) applied and its checksum written again, and how a refusal names each changed row."""
    named = []

    def changed(rows):
        named.extend(_named(rows, row) for row in edit(rows))
        return rows

    return _edited(path, changed), named


def test_hours_over_24_and_a_huge_slews_count_are_refused_naming_each_row(tmp_path):
    """The nights format's bounds (``nights_csv.COLUMN_SPECS``): a night has 24 hours; 10,000 slews a night is the
    format's plausibility bound (a bound of our own, no published source)."""
    def edit(rows):
        first, second = _rows_of(rows)[:2]
        first["fields"]["open_hours"] = 30
        second["fields"]["slews"] = 99999
        return [first, second]

    edited, (first, second) = _edit_and_name(_backup_of_a_small_record(tmp_path / "record.json"), edit)
    message = _refusal(edited)
    assert message.startswith(f"{edited} holds 2 values that would be refused on entry, so the file was edited or "
                              "damaged, and nothing was restored: ")
    assert f"{first}: open_hours cannot be above 24 (got 30)" in message
    assert f"{second}: slews cannot be above 10,000 (got 99999)" in message


def test_negative_open_hours_are_refused_naming_the_row_not_ending_in_a_traceback(tmp_path):
    """Before the checks, the recompute met the value first and raised a bare ValueError."""
    def edit(rows):
        night = _rows_of(rows)[0]
        night["fields"]["open_hours"] = -5
        return [night]

    edited, (night,) = _edit_and_name(_backup_of_a_small_record(tmp_path / "record.json"), edit)
    assert f"holds 1 value that would be refused on entry, so the file was edited or damaged, and nothing was " \
           f"restored: {night}: open_hours cannot be below 0 (got -5)" in _refusal(edited)


def test_a_night_later_than_the_backup_is_refused(tmp_path):
    """A night is logged once it has begun (the format's rule): none in a backup can be later than the backup."""
    later = (dt.date.today() + dt.timedelta(days=30)).isoformat()

    def edit(rows):
        night = _rows_of(rows)[0]
        night["fields"]["night"] = later
        return [night]

    edited, (night,) = _edit_and_name(_backup_of_a_small_record(tmp_path / "record.json"), edit)
    assert re.search(rf"{re.escape(night)}: night {later} has not begun yet", _refusal(edited))


def test_any_tables_row_is_checked_by_its_fields_bounds_and_no_history_row(tmp_path):
    """Not only the nights: a site's latitude (-90 to 90 degrees). A history row is not checked: history cannot be
    corrected, so a figure kept in it from before a bound was added would make the backup never restorable."""
    def edit(rows):
        (site,) = _rows_of(rows, "registry.site")
        site["fields"]["latitude_deg"] = 123
        history = _rows_of(rows, "logbook.historicalnightusage")[0]
        history["fields"]["open_hours"] = 30
        return [site, history]

    edited, (site, history) = _edit_and_name(_backup_of_a_small_record(tmp_path / "record.json"), edit)
    message = _refusal(edited)
    assert f"{site}: latitude_deg 123: Ensure this value is less than or equal to 90" in message
    assert history not in message and "holds 1 value that would be refused" in message


def test_a_genuine_backup_of_a_name_valid_when_written_restores(tmp_path):
    """A diff review: rules added since a record was written (a name on one line, added for booked runs' titles
    today) refused a genuine backup holding such a record, and its history row kept it refused for good. Only a
    field's bounds are checked: a site's name written over two lines, in its row and its history, restores."""
    from observatory_ops.registry.models import Site

    def edit(rows):
        site = _rows_of(rows, "registry.site")[0]
        site["fields"]["name"] = "Restore Hill\r\n(east)"
        for history in _rows_of(rows, "registry.historicalsite"):
            history["fields"]["name"] = "Restore Hill\r\n(east)"
        return [site]

    edited, _ = _edit_and_name(_backup_of_a_small_record(tmp_path / "record.json"), edit)
    call_command("restore", str(edited))
    assert Site.objects.get().name == "Restore Hill\r\n(east)"


def test_a_file_with_many_refused_values_names_the_first_ten_and_counts_the_rest(tmp_path):
    def edit(rows):
        nights = _rows_of(rows)
        for night in nights:
            night["fields"]["open_hours"] = 25
        return nights

    edited, named = _edit_and_name(_backup_of_a_small_record(tmp_path / "record.json"), edit)
    message = _refusal(edited)
    assert len(named) == NIGHTS_LOGGED + 1
    assert f"holds {len(named)} values that would be refused" in message
    assert all(f"{row}: open_hours cannot be above 24 (got 25)" in message for row in named[:10])
    assert named[10] not in message
    assert message.endswith(f"; and {len(named) - 10} more")


def test_an_error_in_the_recompute_is_said_naming_what_failed_and_stores_nothing(tmp_path, monkeypatch):
    """Whatever fails once the rows are loaded, the restore ends in one sentence and rolls back."""
    from observatory_ops.planning import services

    def recompute_failing(site):
        raise ValueError("per-night values cannot be negative")

    path = _backup_of_a_small_record(tmp_path / "record.json")
    monkeypatch.setattr(services, "site_recompute", recompute_failing)
    assert _refusal(path) == (
        f"{path}: computing the due states of site restore-hill from the restored rows failed (ValueError: "
        "per-night values cannot be negative), so nothing was restored"
    )


def test_a_good_backup_restores_as_before(tmp_path):
    from observatory_ops.logbook.models import NightUsage
    from observatory_ops.planning.models import PlanStatus, ServicePlan

    path = _backup_of_a_small_record(tmp_path / "record.json")
    header, _, body = path.read_text().partition("\n")
    nights = {row["pk"]: row["fields"]["open_hours"] for row in _rows_of(json.loads(body))}
    call_command("restore", str(path))
    restored = _row_counts()
    assert all(restored[label] == count for label, count in json.loads(header)["counts"].items())
    assert dict(NightUsage.objects.values_list("pk", "open_hours")) == nights
    assert PlanStatus.objects.count() == ServicePlan.objects.count() > 0
