"""History as the pages show it: times in the record's site's time zone to the minute, people by full name,
on the subsystem, mirror and history pages alike; the CSV keeps ISO 8601 times in UTC.

The expected local times are worked by hand from the IANA tz database's rules for America/Denver (UTC-7,
MST, in winter; UTC-6, MDT, from 8 Mar to 1 Nov 2026), and checked against Python's zoneinfo, which reads
that database, rather than against the project's own formatting.
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import json
from zoneinfo import ZoneInfo

import pytest
from django.template.loader import render_to_string

from observatory_ops.archive.history import KIND, UTC, Change, changes, site_of, zone_of
from observatory_ops.registry.models import Site, Subsystem, Telescope

DENVER = "America/Denver"
# 2026-12-02 05:17:15.263031 UTC is 2026-12-01 22:17 MST (05:17 - 7 h, the evening before).
WINTER_UTC = dt.datetime(2026, 12, 2, 5, 17, 15, 263031, tzinfo=dt.UTC)
WINTER_SHOWN = "01 Dec 2026 22:17"
# 2026-07-04 18:30:40 UTC is 2026-07-04 12:30 MDT (18:30 - 6 h).
SUMMER_UTC = dt.datetime(2026, 7, 4, 18, 30, 40, tzinfo=dt.UTC)
SUMMER_SHOWN = "04 Jul 2026 12:30"


def test_the_hand_worked_times_agree_with_the_tz_database():
    assert WINTER_UTC.astimezone(ZoneInfo(DENVER)).strftime("%d %b %Y %H:%M") == WINTER_SHOWN
    assert SUMMER_UTC.astimezone(ZoneInfo(DENVER)).strftime("%d %b %Y %H:%M") == SUMMER_SHOWN


@pytest.fixture
def denver(db):
    """An invented site in the Mountain time zone, with one telescope and its drive."""
    site = Site.objects.create(name="Juniper Mesa", slug="juniper-mesa", latitude_deg=38.9, longitude_deg=-106.9,
                               elevation_m=2700, time_zone=DENVER)
    telescope = Telescope.objects.create(site=site, name="J1", aperture_m=0.7, mount="fork")
    return Subsystem.objects.create(telescope=telescope, kind="drive", name="Azimuth drive")


@pytest.fixture
def named(users):
    """The engineer, with a full name (invented)."""
    engineer = users["engineer"]
    engineer.first_name, engineer.last_name = "Marta", "Quillan"
    engineer.save()
    return engineer


# When the records of these tests were created: before every change they date.
CREATED_UTC = dt.datetime(2026, 1, 5, 16, 0, tzinfo=dt.UTC)


def _changed_at(record, when: dt.datetime, by, **values) -> None:
    """Change ``record`` as ``by`` and date the change ``when``, its creation CREATED_UTC (the trail stamps
    the real clock, and lists a history by its dates)."""
    for name, value in values.items():
        setattr(record, name, value)
    record._history_user = by
    record.save()
    rows = record.history.order_by("history_id")
    rows.filter(history_type="+").update(history_date=CREATED_UTC)
    rows.filter(pk=rows.last().pk).update(history_date=when)


def _history_section(page: str) -> str:
    return page.split("<h2>History</h2>")[1]


def test_the_subsystem_page_shows_its_history_in_site_time_and_people_by_name(denver, named, users, client):
    _changed_at(denver, WINTER_UTC, named, name="Azimuth drive, east")
    client.force_login(users["viewer"])
    history = _history_section(client.get(denver.get_absolute_url()).content.decode())
    assert f"When ({DENVER})" in history
    assert f"<td>{WINTER_SHOWN}</td><td>Marta Quillan</td><td>changed</td>" in history
    assert "05:17" not in history and "+00:00" not in history and "UTC" not in history
    assert ">engineer<" not in history


def test_the_history_page_shows_summer_time_in_the_site_zone(denver, named, users, client):
    _changed_at(denver, SUMMER_UTC, named, name="Azimuth drive, west")
    client.force_login(users["viewer"])
    page = client.get(f"/history/registry.subsystem/record/{denver.pk}/").content.decode()
    assert f"<td>{SUMMER_SHOWN}</td><td>Marta Quillan</td>" in page
    assert f"When ({DENVER})" in page and "18:30" not in page


def test_the_mirror_page_shows_its_history_in_site_time(denver, named, users, client):
    from observatory_ops.mirrors.models import CoatingEvent, Mirror

    primary = Subsystem.objects.create(telescope=denver.telescope, kind="primary_mirror", name="Primary")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=700, thickness_mm=60, hole_mm=150,
                                   material="borosilicate", cell_mass_kg=40)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2026, 1, 10), metal="al")
    _changed_at(mirror, WINTER_UTC, named, cell_mass_kg=42)
    client.force_login(users["viewer"])
    history = _history_section(client.get(f"/mirrors/{mirror.pk}/").content.decode())
    assert f"When ({DENVER})" in history
    assert f"<td>{WINTER_SHOWN}</td><td>Marta Quillan</td><td>changed</td>" in history
    assert "<strong>cell mass kg</strong>: 40.0 → 42.0</div>" in history


def test_times_and_people_before_and_after_are_shown_in_site_time_and_by_name(denver, named, users, client):
    from observatory_ops.logbook.models import Reading

    reading = Reading.objects.create(subsystem=denver, quantity="motor_current_a", unit="A", value=1.2,
                                     taken_at=WINTER_UTC, taken_by=users["technician"])
    _changed_at(reading, WINTER_UTC + dt.timedelta(hours=1), named, taken_at=SUMMER_UTC, taken_by=named)
    client.force_login(users["viewer"])
    page = client.get(f"/history/logbook.reading/record/{reading.pk}/").content.decode()
    assert f"<strong>taken at</strong>: {WINTER_SHOWN} → {SUMMER_SHOWN}</div>" in page
    assert "<strong>taken by</strong>: technician → Marta Quillan</div>" in page  # no name given: user name
    assert "+00:00" not in page


def test_the_csv_keeps_iso_times_in_utc_and_says_so(denver, named, users, client):
    from observatory_ops.logbook.models import Reading

    reading = Reading.objects.create(subsystem=denver, quantity="motor_current_a", unit="A", value=1.2,
                                     taken_at=WINTER_UTC, taken_by=users["technician"])
    _changed_at(reading, SUMMER_UTC, named, taken_at=SUMMER_UTC)
    client.force_login(users["viewer"])
    response = client.get(f"/history/logbook.reading/record/{reading.pk}/?export=csv")
    header, *rows = list(csv.reader(io.StringIO(response.content.decode("utf-8-sig"))))
    assert header[0] == "when_utc"
    latest = dict(zip(header, rows[0], strict=True))
    assert latest["when_utc"] == "2026-07-04T18:30:40+00:00"
    assert (latest["who"], latest["field"]) == ("Marta Quillan", "taken_at")
    assert (latest["before"], latest["after"]) == ("2026-12-02T05:17:15.263031+00:00", "2026-07-04T18:30:40+00:00")


def test_a_record_is_placed_at_its_site_through_its_links(denver, users):
    from observatory_ops.planning.models import Trigger
    from observatory_ops.registry.services import subsystem_create

    site = denver.telescope.site
    fans = subsystem_create(denver.telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    trigger = Trigger.objects.filter(plan__subsystem=fans).first()  # plan, subsystem, telescope, site
    assert trigger is not None and site_of(trigger) == site
    assert site_of(site) == site and site_of(fans) == site
    assert zone_of(trigger) == ZoneInfo(DENVER)
    assert site_of(users["viewer"]) is None and zone_of(users["viewer"]) == UTC


def test_a_history_of_no_site_is_shown_in_utc_and_says_so():
    entry = Change(when=WINTER_UTC, who="Marta Quillan", kind="changed", reason="", zone=UTC)
    table = render_to_string("archive/_changes.html", {"entries": [entry]})
    assert "When (UTC)" in table and "<td>02 Dec 2026 05:17</td>" in table


def test_changes_keep_the_moment_in_utc(denver, named):
    _changed_at(denver, WINTER_UTC, named, name="Azimuth drive, east")
    latest = changes(denver)[0]
    assert latest.when == WINTER_UTC and latest.when.utcoffset() == dt.timedelta(0)
    assert latest.when_shown == WINTER_SHOWN and latest.zone_name == DENVER


def test_the_sites_history_writes_the_crew_weekdays_in_words(denver, named, users, client):
    """Stored as ISO weekday digits (ISO 8601: 1 Monday to 7 Sunday), shown as the site's pages write them
    (Site.crew_days_text): 12345 is Monday to Friday, a run of three or more as a range; 1357 is Monday,
    Wednesday, Friday and Sunday. The CSV writes the same words."""
    site = denver.telescope.site
    _changed_at(site, WINTER_UTC, named, crew_weekdays="1357")
    client.force_login(users["viewer"])
    url = f"/history/registry.site/record/{site.pk}/"
    page = client.get(url).content.decode()
    assert "<strong>crew weekdays</strong>: Mon–Fri → Mon, Wed, Fri, Sun</div>" in page
    assert "12345" not in page and "1357" not in page
    assert site.crew_days_text == "Mon, Wed, Fri, Sun"  # one helper for both
    header, *rows = list(csv.reader(io.StringIO(client.get(f"{url}?export=csv").content.decode("utf-8-sig"))))
    latest = dict(zip(header, rows[0], strict=True))
    assert (latest["field"], latest["before"], latest["after"]) == ("crew_weekdays", "Mon–Fri", "Mon, Wed, Fri, Sun")


def test_crew_weekdays_stored_outside_the_code_are_shown_as_stored(denver, named):
    """A value saved without validation (a script, an old row) is not in the code: the history shows it as it is
    rather than failing."""
    site = denver.telescope.site
    _changed_at(site, WINTER_UTC, named, crew_weekdays="19")
    assert changes(site)[0].fields == [("crew weekdays", "Mon–Fri", "19")]


def test_a_plans_history_holds_its_triggers_changes(telescope, users, client):
    """A reviewer changed a plan's dust limit from 500 to 450 h on the plan's admin page (the triggers are edited
    there) and found the change only on the trigger's own history page, which nothing links to. The plan's history
    holds its triggers' changes, each naming its trigger, deleted triggers included; the CSV too."""
    from observatory_ops.planning.models import Trigger
    from observatory_ops.registry.services import subsystem_create

    fans = subsystem_create(telescope, "cooling_fans", "Cell fans", counting_from=dt.date(2026, 1, 1))
    plan = fans.plans.first()
    trigger = Trigger.objects.create(plan=plan, metric="dust_hours", limit=500)
    trigger.limit = 450
    trigger.save()
    extra = Trigger.objects.create(plan=plan, metric="calendar_days", limit=90)
    extra.delete()

    entries = changes(plan)
    changed = next(c for c in entries if c.part and c.kind == "changed")
    assert changed.part.startswith("trigger ") and changed.part.endswith(" 450")
    assert changed.fields == [("limit", "500.0", "450.0")]
    assert [c.kind for c in entries if c.part.startswith("trigger") and "90" in c.part] == ["deleted", "created"]
    assert [c.when for c in entries] == sorted((c.when for c in entries), reverse=True)

    client.force_login(users["viewer"])
    page = client.get(f"/history/planning.serviceplan/record/{plan.pk}/").content.decode()
    assert f"{changed.part}: changed" in page and "450.0" in page
    exported = client.get(f"/history/planning.serviceplan/record/{plan.pk}/?export=csv").content.decode()
    assert any(row["what"] == f"{changed.part}: changed" and row["field"] == "limit"
               for row in csv.DictReader(io.StringIO(exported)))


def test_a_save_that_changed_nothing_is_not_listed_but_a_change_and_a_reasoned_save_are(denver):
    # The admin's Save on an unchanged page stores a historical row with no difference: the list showed it as a change
    # with no fields. The database keeps it; the history lists the changes only, and a save with a reason.
    drive = denver
    drive.save()  # nothing changed
    drive.name = "Azimuth drive (new encoder)"
    drive.save()
    drive.save()  # nothing changed again
    drive._change_reason = "checked after the encoder swap"
    drive.save()
    assert drive.history.count() == 5
    listed = changes(drive)
    assert len(listed) == 3  # the reasoned save, the change of name, the creation
    assert listed[0].reason == "checked after the encoder swap" and listed[0].fields == []
    assert [name for name, _, _ in listed[1].fields] == ["name"]
    assert listed[2].kind == KIND["+"] and listed[2].fields == []
    assert len(changes(drive, limit=2)) == 2


def test_kept_data_and_yes_or_no_read_in_words_and_the_csv_keeps_json():
    """A tablet review read "{'points': [{'id': 1, 'energy': 'ac', ..." and "crew: (empty) -> []" in an order's
    history: a finished order's kept isolation reads as the words its points kept, a list joined ("none" empty)."""
    from observatory_ops.archive.history import _shown
    from observatory_ops.workorders.models import WorkOrder

    kept = {"points": [{"id": 1, "energy": "ac", "telescope": 1, "subsystem": None, "text": "Mount isolator, pier"}],
            "gaps": []}
    utc = ZoneInfo("UTC")
    shown, exported = _shown(WorkOrder, "isolation_at_finish", kept, utc)
    assert shown == "points: Mount isolator, pier; gaps: none"
    assert json.loads(exported) == kept
    assert _shown(WorkOrder, "crew", [], utc) == ("none", "[]")
    assert _shown(WorkOrder, "crew", ["Ana Reyes", "a visitor"], utc)[0] == "Ana Reyes; a visitor"
    assert _shown(WorkOrder, "crew_by_account", True, utc) == ("yes", "True")


def test_a_day_reads_as_the_pages_write_it_and_a_long_records_change_shows_its_changed_parts(
    denver, named, users, client
):
    """A year's review read "planned date: 2027-03-18 -> 2027-04-07" (ISO, where every other date reads "07 Apr 2027")
    and "lift inputs: ... fixture k... -> ... fixture k..." (the working load limit entered cut off the end of both):
    a day reads as the pages write it, and a record kept as data shows the parts that changed. The CSV keeps ISO
    days and the whole records."""
    from observatory_ops.archive.history import _shown, _what_changed

    utc = ZoneInfo("UTC")
    assert _shown(Site, "digest_sent_on", dt.date(2027, 4, 7), utc) == ("07 Apr 2027", "2027-04-07")
    before = {"diameter_mm": 500, "thickness_mm": 80, "material": "borosilicate", "fixture_kg": 25, "legs": 2,
              "angle_deg": 60, "wll_kg": None}
    after = {**before, "wll_kg": 1000}
    assert _what_changed(before, after) == ({"wll_kg": None}, {"wll_kg": 1000})
    assert _what_changed([1], [1, 2]) == ([1], [1, 2])
