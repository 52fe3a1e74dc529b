"""Specifications for nights coming in per telescope: the CSV import, the API, the typed-in form, the log page and
the admin all carry the telescope.

A record with no telescope (an empty cell, JSON null, the column or key left out) is the whole site's night; one
that names a telescope of the site (as registered, case and surrounding spaces aside) is that telescope's own
night. Stored nights are keyed by (site, telescope, night): the same record twice changes nothing, a changed
figure is reported with its telescope, and one bad record stores nothing. A counter or PM10 that a telescope's record
leaves out (or leaves empty) is stored as unknown, the site's figure of that night; the whole site's record stores 0
as before. The usage each telescope's plans count from these rows is specified in tests/test_usage_per_telescope.py.
"""
from __future__ import annotations

import datetime as dt
import json
import re
from io import StringIO

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import call_command
from django.urls import reverse

from observatory_ops.api import services as api_services
from observatory_ops.logbook import nights_csv, services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.registry.models import Site, Telescope

pytestmark = pytest.mark.django_db

NIGHT = dt.date(2024, 1, 5)
LATEST = dt.date(2026, 6, 14)
#: Two nights of the whole site, and the same two of each of two telescopes with their own figures. The names are
#: written as people type them: another case, spaces around.
MIXED_FILE = (
    b"night,telescope,open_hours,slews\n"
    b"2024-01-05,,7.5,0\n"
    b"2024-01-05,North,7.5,41\n"
    b"2024-01-05, south ,3.25,12\n"
    b"2024-01-06,,6,0\n"
    b"2024-01-06,NORTH,6,30\n"
    b"2024-01-06,South,0,0\n"
)


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    """Record due-state recomputes instead of running them (each costs seconds of sky computation)."""
    return recomputes_recorded


@pytest.fixture
def north(site):
    return Telescope.objects.create(site=site, name="North", aperture_m=0.6, mount="fork")


@pytest.fixture
def south(site):
    return Telescope.objects.create(site=site, name="South", aperture_m=0.4, mount="altaz")


@pytest.fixture
def other_site(db):
    """Another site, with a telescope of its own."""
    other = Site.objects.create(name="Other Mesa", slug="other-mesa", latitude_deg=-30.0, longitude_deg=20.0,
                                time_zone="Africa/Johannesburg")
    Telescope.objects.create(site=other, name="Mesa 1", aperture_m=1.0, mount="altaz")
    return other


def snapshot() -> list[dict]:
    """Every NightUsage row of every site, every field (recorded_at too)."""
    return list(NightUsage.objects.order_by("site_id", "night", "telescope_id").values())


def logged(site) -> list[tuple]:
    """(night, telescope name or None, open hours, slews) of each stored night of ``site``."""
    return sorted(
        NightUsage.objects.filter(site=site).values_list("night", "telescope__name", "open_hours", "slews"),
        key=lambda row: (row[0], row[1] or ""),
    )


# --- the format (no database) -------------------------------------------------------------------------


def test_a_telescope_is_matched_as_registered_else_ignoring_case_and_never_minding_surrounding_spaces():
    def read(written: str, telescopes: tuple[str, ...]) -> nights_csv.ParsedNights:
        """A one-row nights CSV naming ``written``, read by the importer's own ``nights_csv.parse``."""
        return nights_csv.parse(f"night,open_hours,telescope\n2024-01-05,5,{written}\n", LATEST, telescopes)

    def telescope(written: str, telescopes: tuple[str, ...]) -> str | None:
        [(_line, values)] = read(written, telescopes).rows
        return values["telescope"]

    assert telescope(" north ", ("North", "South")) == "North"
    assert telescope("", ("North",)) is None  # the whole site's night
    # Names that differ only in case are each reached by writing them as registered.
    assert telescope("t1", ("T1", "t1")) == "t1" and telescope("T1 ", ("T1", "t1")) == "T1"
    [refused] = read("ab", ("Ab", "AB")).errors
    assert (refused.position, refused.field) == (2, "telescope")
    assert re.search('telescope "ab" could be any of Ab, AB', refused.reason)


def test_a_night_without_the_telescope_key_or_with_null_is_the_whole_sites():
    left_out = {"night": "2024-01-05", "open_hours": 5}
    for record in (left_out, left_out | {"telescope": None}):
        [(_index, values)] = nights_csv.parse_objects([record], LATEST, ("North",)).rows
        assert values.get("telescope") is None


def test_a_telescope_that_is_not_text_is_refused_naming_the_field():
    parsed = nights_csv.parse_objects([{"night": "2024-01-05", "open_hours": 5, "telescope": 70}], LATEST, ("T70",))
    assert [(p.position, p.field, p.reason) for p in parsed.errors] == [
        (0, "telescope", "telescope must be a telescope's name, not 70")
    ]


def test_the_same_night_of_one_telescope_twice_is_refused_naming_both_rows_and_the_sites_night_beside_it_is_not():
    parsed = nights_csv.parse(
        "night,telescope,open_hours\n2024-01-05,North,5\n2024-01-05,,5\n2024-01-05, north,6\n2024-01-05,,4\n",
        LATEST, ("North",),
    )
    assert [(p.position, p.field, p.reason) for p in parsed.errors] == [
        (4, "night", "night 2024-01-05 of telescope North already appears on line 2"),
        (5, "night", "night 2024-01-05 already appears on line 3"),
    ]
    assert [position for position, _ in parsed.rows] == [2, 3]


def test_the_import_pages_example_with_the_sites_telescopes_is_a_good_file():
    parsed = nights_csv.parse(nights_csv.example_csv(("North", "South")), LATEST, ("North", "South"))
    assert parsed.errors == []
    assert [values["telescope"] for _, values in parsed.rows] == [None, "North", "South"]


# --- the CSV import -------------------------------------------------------------------------------------


def test_a_file_of_the_sites_nights_and_two_telescopes_nights_stores_each_as_its_own(site, north, south, recomputes):
    report = services.nights_import(site, MIXED_FILE)
    assert (report.created, report.updated, report.unchanged, report.errors) == (6, 0, 0, [])
    assert logged(site) == [
        (NIGHT, None, 7.5, 0), (NIGHT, "North", 7.5, 41), (NIGHT, "South", 3.25, 12),
        (NIGHT + dt.timedelta(days=1), None, 6.0, 0), (NIGHT + dt.timedelta(days=1), "North", 6.0, 30),
        (NIGHT + dt.timedelta(days=1), "South", 0.0, 0),
    ]
    assert recomputes == [site.pk]


def test_an_unknown_telescope_names_the_line_and_the_sites_telescopes_and_stores_nothing(site, north, south):
    services.nights_import(site, b"night,open_hours\n2024-01-01,4\n")
    before = snapshot()
    report = services.nights_import(site, MIXED_FILE.replace(b"2024-01-06,South,0,0", b"2024-01-06,West,0,0"))
    assert [(p.position, p.field, p.reason) for p in report.errors] == [(7, "telescope", (
        "unknown telescope \"West\" (known at this site: North, South); leave it empty for the whole site's night"
    ))]
    assert report.summary == "1 bad row; nothing was stored."
    assert snapshot() == before


def test_a_site_without_telescopes_says_so_when_a_row_names_one(site):
    report = services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,North,5\n")
    assert report.errors == [(2, "unknown telescope \"North\" (this site has no telescope registered); leave it empty "
                                 "for the whole site's night")]
    assert not NightUsage.objects.exists()


def test_every_problem_of_a_row_is_listed_the_unknown_telescope_among_them(site, north):
    report = services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,Nort,25\n")
    assert report.refused_rows == [(2, "unknown telescope \"Nort\" (known at this site: North); leave it empty for the "
                                       "whole site's night; open_hours cannot be above 24 (got 25)")]


def test_skip_bad_stores_the_good_rows_and_skips_the_unknown_telescope(site, north):
    report = services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,North,5\n2024-01-05,Nort,6\n",
                                    skip_bad=True)
    assert (report.created, [p.position for p in report.skipped]) == (1, [3])
    assert logged(site) == [(NIGHT, "North", 5.0, None)]


def test_the_same_file_twice_changes_nothing(site, north, south, recomputes):
    services.nights_import(site, MIXED_FILE)
    stored_once = snapshot()
    report = services.nights_import(site, MIXED_FILE)
    assert (report.created, report.updated, report.unchanged) == (0, 0, 6)
    assert report.summary.startswith("0 new, 0 updated, 6 unchanged (whole site: 2, North: 2, South: 2); nothing "
                                     "changed.")
    assert snapshot() == stored_once
    assert recomputes == [site.pk]  # the first import only


def test_a_changed_figure_of_one_telescopes_night_is_reported_with_its_telescope_and_changes_that_row_alone(
    site, north, south
):
    services.nights_import(site, MIXED_FILE)
    before = {row["id"]: row for row in snapshot()}
    report = services.nights_import(site, MIXED_FILE.replace(b"2024-01-05, south ,3.25,12", b"2024-01-05,South,4,12"))
    assert (report.created, report.updated, report.unchanged) == (0, 1, 5)
    assert report.changes == [services.NightChange(NIGHT, "open_hours", 3.25, 4.0, "South")]
    assert report.changes[0].whose == "South"
    changed = [row for row in snapshot() if row != before[row["id"]]]
    assert [(row["telescope_id"], row["night"], row["open_hours"]) for row in changed] == [(south.pk, NIGHT, 4.0)]


def test_the_command_names_the_telescope_of_each_night_it_updates(site, north, tmp_path):
    path = tmp_path / "nights.csv"
    path.write_bytes(b"night,telescope,open_hours\n2024-01-05,,5\n2024-01-05,North,5\n")
    call_command("import_nights", str(path), "--site", site.slug, stdout=StringIO(), stderr=StringIO())
    path.write_bytes(b"night,telescope,open_hours\n2024-01-05,,6\n2024-01-05,North,7\n")
    out = StringIO()
    call_command("import_nights", str(path), "--site", site.slug, stdout=out, stderr=StringIO())
    assert out.getvalue().splitlines() == [
        "updated night 2024-01-05: open_hours 5 -> 6",
        "updated night 2024-01-05 (North): open_hours 5 -> 7",
        f"{path}: 0 new, 2 updated (whole site: 1, North: 1), 0 unchanged.",
        "Changed 2 stored nights.",
    ]


def test_a_telescopes_night_inserted_by_a_concurrent_writer_is_counted_once(site, north, monkeypatch):
    """The insert that hits the unique (site, night, telescope) constraint starts again and finds the night stored."""
    record = {"night": "2024-01-05", "telescope": "North", "open_hours": 5}
    services.nights_ingest(site, [record])
    real, reads = services._stored_nights, []

    def first_read_misses_it(*args):
        reads.append(args)
        return {} if len(reads) == 1 else real(*args)

    monkeypatch.setattr(services, "_stored_nights", first_read_misses_it)
    report = services.nights_ingest(site, [record])
    assert (report.created, report.updated, report.unchanged, len(reads)) == (0, 0, 1, 2)
    assert logged(site) == [(NIGHT, "North", 5.0, None)]


# --- figures a telescope's record leaves out -------------------------------------------------------------------
#
# A telescope's night takes each figure its record leaves out (a counter or PM10) from the site's row of that night
# (planning.services.UsageLog, tests/test_usage_per_telescope.py), so such a figure is stored as unknown (None), not
# as 0: a left-out column or key, an empty cell and a JSON null alike. The whole site's night stores 0 as before.


def counters(site, telescope=None) -> tuple:
    """(slews, axis 1 travel, axis 2 travel, brake cycles, PM10, humidity, dew) of the stored night NIGHT."""
    night = NightUsage.objects.get(site=site, night=NIGHT, telescope=telescope)
    return (night.slews, night.axis1_travel_deg, night.axis2_travel_deg, night.brake_cycles, night.pm10_ugm3,
            night.humidity_pct, night.dew)


def test_a_new_telescopes_night_stores_the_counters_and_dust_it_leaves_out_as_unknown_the_sites_night_0(site, north):
    services.nights_import(site, b"night,telescope,open_hours,slews\n2024-01-05,,7,0\n2024-01-05,North,5,41\n")
    assert counters(site) == (0, 0.0, 0.0, 0, None, None, False)
    assert counters(site, north) == (41, None, None, None, None, None, False)


def test_an_empty_cell_or_null_on_a_telescopes_new_night_is_unknown_and_a_0_given_is_0(site, north, south):
    services.nights_import(site, b"night,telescope,brake_cycles,open_hours,pm10_ugm3,slews\n"
                                 b"2024-01-05,North,,5,,\n2024-01-05,,,7,,\n")
    services.nights_ingest(site, [{"night": "2024-01-05", "telescope": "South", "open_hours": 3, "slews": None,
                                   "brake_cycles": 0, "axis1_travel_deg": 0, "pm10_ugm3": None}])
    assert counters(site, north) == (None, None, None, None, None, None, False)
    assert counters(site, south) == (None, 0.0, None, 0, None, None, False)
    assert counters(site) == (0, 0.0, 0.0, 0, None, None, False)  # the whole site's: 0 as before


def test_a_stored_telescopes_night_keeps_the_figures_a_record_leaves_out(site, north):
    services.nights_import(site, b"night,telescope,open_hours,slews,brake_cycles,pm10_ugm3\n"
                                 b"2024-01-05,North,5,41,43,38\n")
    report = services.nights_ingest(site, [{"night": "2024-01-05", "telescope": "North", "open_hours": 5.5}])
    assert (report.created, report.updated) == (0, 1)
    assert counters(site, north) == (41, None, None, 43, 38.0, None, False)


def test_a_file_of_telescopes_nights_with_left_out_figures_imported_twice_changes_nothing(site, north, recomputes):
    data = b"night,telescope,open_hours,slews,brake_cycles\n2024-01-05,North,5,41,\n2024-01-06,North,4,30,\n"
    services.nights_import(site, data)
    stored_once = snapshot()
    report = services.nights_import(site, data)
    assert (report.created, report.updated, report.unchanged) == (0, 0, 2)
    assert snapshot() == stored_once and recomputes == [site.pk]


def test_emptying_a_stored_telescopes_figure_lists_the_change_as_the_sites(client, technician, site, north):
    services.nights_import(site, b"night,telescope,open_hours,slews,brake_cycles\n2024-01-05,North,5,0,43\n")
    report = services.nights_import(site, b"night,telescope,open_hours,brake_cycles\n2024-01-05,North,5,\n")
    assert [(c.column, c.old_text, c.new_text) for c in report.changes] == [("brake_cycles", "43", "site's")]
    page = upload(client, site, b"night,telescope,open_hours,slews\n2024-01-05,North,5,\n").content.decode()
    assert "<td>North</td><td><code>slews</code></td><td>0</td><td>site&#x27;s</td>" in page


def test_the_import_says_whose_nights_it_stored(site, north, south):
    """The import's summary names each telescope's share of the nights stored, and the whole site's when the site has
    several telescopes (a file without the telescope column is then seen to be the whole site's)."""
    rows = b"".join(b"2024-01-%02d,North,5,40\n" % day for day in range(1, 29))
    report = services.nights_import(site, b"night,telescope,open_hours,slews\n" + rows)
    assert report.summary == "28 new (North: 28), 0 updated, 0 unchanged."
    report = services.nights_import(site, b"night,open_hours\n2024-01-05,7\n")
    assert report.summary == "1 new (whole site: 1), 0 updated, 0 unchanged."


def test_a_site_with_one_telescope_names_only_the_telescopes_nights(site, north):
    assert services.nights_import(site, b"night,open_hours\n2024-01-05,7\n").summary == (
        "1 new, 0 updated, 0 unchanged.")
    report = services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,North,5\n2024-01-05,,7\n")
    assert report.summary == "1 new (North: 1), 0 updated, 1 unchanged."


# --- the upload page ------------------------------------------------------------------------------------


@pytest.fixture
def technician(client, users):
    client.force_login(users["technician"])
    return users["technician"]


def upload(client, site, data: bytes, confirm: str = ""):
    payload = {"file": SimpleUploadedFile("nights.csv", data, content_type="text/csv"), "confirm": confirm}
    return client.post(reverse("nights-import", args=[site.slug]), payload)


def test_the_upload_page_lists_a_change_of_a_telescopes_night_with_the_telescope(client, technician, site, north):
    upload(client, site, b"night,telescope,open_hours\n2024-01-05,North,5\n")
    page = upload(client, site, b"night,telescope,open_hours\n2024-01-05,North,5.5\n").content.decode()
    assert "<th>Night</th><th>Telescope</th><th>Column</th>" in page
    assert "<td>2024-01-05</td><td>North</td><td><code>open_hours</code></td><td>5</td><td>5.5</td>" in page
    assert logged(site) == [(NIGHT, "North", 5.0, None)]  # not stored until confirmed


def test_the_upload_page_shows_the_unknown_telescope_on_its_line(client, technician, site, north):
    page = upload(client, site, b"night,telescope,open_hours\n2024-01-05,West,5\n").content.decode()
    assert ("<td>2</td><td>unknown telescope &quot;West&quot; (known at this site: North); leave it empty for the "
            "whole site&#x27;s night</td>") in page
    assert not NightUsage.objects.exists()


def test_the_upload_pages_help_has_the_telescope_column_and_an_example_with_the_sites_telescopes(
    client, technician, site, north, south
):
    page = client.get(reverse("nights-import", args=[site.slug])).content.decode()
    assert "<td><code>telescope</code></td><td>no</td>" in page and "<td>the whole site&#x27;s night</td>" in page
    assert "\n2026-03-14,North,7.5," in page and "\n2026-03-14,South,7.5," in page
    assert "A telescope&#x27;s log is its own nights, and the whole site&#x27;s nights on which it has none" in page


# --- the API ----------------------------------------------------------------------------------------------


def post(client, site, body, secret: str):
    return client.post(reverse("api-nights", args=[site.slug]), data=json.dumps(body), content_type="application/json",
                       HTTP_AUTHORIZATION=f"Bearer {secret}")


def test_the_api_stores_each_telescopes_night_and_the_same_request_again_changes_nothing(client, site, north, south):
    secret = api_services.api_token_create(site, "dome computer")[1]
    body = [
        {"night": "2024-01-05", "telescope": "North", "open_hours": 7.5, "slews": 41},
        {"night": "2024-01-05", "telescope": "south", "open_hours": 3.25, "slews": 12},
        {"night": "2024-01-05", "telescope": None, "open_hours": 7.5},
    ]
    one = {"created": 1, "updated": 0, "unchanged": 0}
    assert post(client, site, body, secret).json() == {"created": 3, "updated": 0, "unchanged": 0, "by_telescope": {
        "North": one, "South": one, "": one}, "changes": [], "check": []}
    again = {"created": 0, "updated": 0, "unchanged": 1}
    assert post(client, site, body, secret).json() == {"created": 0, "updated": 0, "unchanged": 3, "by_telescope": {
        "North": again, "South": again, "": again}, "changes": [], "check": []}
    assert logged(site) == [(NIGHT, None, 7.5, 0), (NIGHT, "North", 7.5, 41), (NIGHT, "South", 3.25, 12)]
    body[1]["open_hours"] = 4
    assert post(client, site, body, secret).json() == {"created": 0, "updated": 1, "unchanged": 2, "by_telescope": {
        "North": again, "South": {"created": 0, "updated": 1, "unchanged": 0}, "": again}, "changes": [
        {"night": "2024-01-05", "telescope": "South", "field": "open_hours", "old": 3.25, "new": 4.0}], "check": []}
    assert logged(site)[2] == (NIGHT, "South", 4.0, 12)


def test_a_token_of_one_site_naming_another_sites_telescope_is_refused_as_unknown(client, site, north, other_site):
    secret = api_services.api_token_create(site, "dome computer")[1]
    before = snapshot()
    response = post(client, site, [{"night": "2024-01-05", "open_hours": 5},
                                   {"night": "2024-01-05", "telescope": "Mesa 1", "open_hours": 5}], secret)
    assert response.status_code == 400
    assert response.json() == {"errors": [{"index": 1, "field": "telescope", "message": (
        "unknown telescope \"Mesa 1\" (known at this site: North); leave it empty for the whole site's night"
    )}]}
    assert snapshot() == before


def test_the_api_refuses_one_telescopes_night_sent_twice_naming_both_indexes(client, site, north):
    secret = api_services.api_token_create(site, "dome computer")[1]
    response = post(client, site, [{"night": "2024-01-05", "telescope": "North", "open_hours": 5},
                                   {"night": "2024-01-05", "telescope": "north", "open_hours": 6}], secret)
    assert response.json()["errors"] == [
        {"index": 1, "field": "night", "message": "night 2024-01-05 of telescope North already appears at index 0"}
    ]
    assert not NightUsage.objects.exists()


# --- the log page and the typed-in night ------------------------------------------------------------------


def test_the_log_lists_whose_each_night_is_the_sites_first(client, technician, site, north, south):
    services.nights_import(site, MIXED_FILE)
    page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    assert "<th>Night of</th><th>Telescope</th>" in page
    cells = [line.split("</td><td>")[1] for line in page.splitlines() if line.startswith("<tr><td>Fri 05 Jan 2024")]
    assert cells == ["whole site", "North", "South"]
    assert '?night=2024-01-05&amp;telescope=North">correct</a>' in page


def test_the_form_offers_the_sites_telescopes_and_stores_a_telescopes_night(client, technician, site, north, south):
    form = client.get(reverse("night-log", args=[site.slug])).context["form"]
    assert [value for value, _ in form.fields["telescope"].choices] == ["", "North", "South"]
    response = client.post(reverse("night-log", args=[site.slug]),
                           {"night": "2024-01-05", "telescope": "South", "open_hours": "3.5"})
    assert response.status_code == 302
    assert logged(site) == [(NIGHT, "South", 3.5, None)]  # slews left empty: the site's figure of that night
    messages = [str(m) for m in client.get(reverse("nights-list", args=[site.slug])).context["messages"]]
    assert messages == ["Night 2024-01-05: 1 new (South: 1), 0 updated, 0 unchanged."]


def test_with_several_telescopes_the_form_chooses_none_beforehand_and_asks_whose_night_it_is(
    client, technician, site, north, south
):
    """A technician who forgets to choose cannot overwrite the whole site's night: nothing is stored, and the
    telescope field says what to choose."""
    services.nights_import(site, b"night,open_hours\n2024-01-05,7\n")
    before = snapshot()
    page = client.get(reverse("night-log", args=[site.slug])).content.decode()
    assert '<input type="radio" name="telescope" value="" id="id_telescope_0">' in page  # not checked
    assert "whole site (every telescope without a night of its own)" in page and " checked" not in page
    response = client.post(reverse("night-log", args=[site.slug]), {"night": "2024-01-05", "open_hours": "3.5"})
    assert response.context["form"].errors["telescope"] == [
        "Choose whose night this is: one telescope's, or the whole site's (every telescope without a night of its "
        "own)."
    ]
    assert "<li>Choose whose night this is" in response.content.decode() and " checked" not in (
        response.content.decode())
    assert snapshot() == before
    # The whole site's night chosen: stored already, with an open-hours figure this blank form did not show, so it is
    # shown first (nothing stored), and the second save stores it.
    shown = client.post(reverse("night-log", args=[site.slug]), {"night": "2024-01-05", "telescope": "",
                                                                 "open_hours": "6"})
    assert "was changed since this page was loaded, or was logged already" in shown.content.decode()
    assert snapshot() == before
    client.post(reverse("night-log", args=[site.slug]), {"night": "2024-01-05", "telescope": "", "open_hours": "6",
                                                         "loaded_as": shown.context["form"]["loaded_as"].value()})
    assert logged(site) == [(NIGHT, None, 6.0, 0)]
    messages = [str(m) for m in client.get(reverse("nights-list", args=[site.slug])).context["messages"]]
    assert messages == ["Night 2024-01-05: 0 new, 1 updated (whole site: 1), 0 unchanged."]


def test_correcting_the_sites_night_of_a_site_with_several_telescopes_has_the_whole_site_chosen(
    client, technician, site, north, south
):
    services.nights_import(site, b"night,open_hours\n2024-01-05,7\n")
    page = client.get(reverse("night-log", args=[site.slug]) + "?night=2024-01-05").content.decode()
    assert '<input type="radio" name="telescope" value="" id="id_telescope_0" checked>' in page


def test_with_one_telescope_the_form_keeps_the_whole_sites_night_as_its_default(client, technician, site, north):
    form = client.get(reverse("night-log", args=[site.slug])).context["form"]
    assert form["telescope"].value() is None and "<select" in str(form["telescope"])
    client.post(reverse("night-log", args=[site.slug]), {"night": "2024-01-05", "open_hours": "6"})
    assert logged(site) == [(NIGHT, None, 6.0, 0)]


def test_correcting_a_telescopes_night_finds_it_by_telescope_and_night_and_leaves_the_sites_alone(
    client, technician, site, north
):
    services.nights_import(site, b"night,telescope,open_hours,slews\n2024-01-05,,7,0\n2024-01-05,North,5,41\n")
    response = client.get(reverse("night-log", args=[site.slug]) + "?night=2024-01-05&telescope=North")
    initial = response.context["form"].initial
    assert (initial["telescope"], initial["open_hours"], initial["slews"]) == ("North", "5", "41")
    assert "Correct the night of Fri 05 Jan 2024 (North)" in response.content.decode()
    site_form = client.get(reverse("night-log", args=[site.slug]) + "?night=2024-01-05").context["form"]
    assert (site_form.initial["telescope"], site_form.initial["open_hours"]) == ("", "7")
    client.post(reverse("night-log", args=[site.slug]), {"night": "2024-01-05", "telescope": "North",
                                                         "open_hours": "5.5", "loaded_as": initial["loaded_as"]})
    assert logged(site) == [(NIGHT, None, 7.0, 0), (NIGHT, "North", 5.5, 41)]


def test_a_stored_night_sent_back_as_the_form_shows_it_changes_nothing(client, technician, site, north):
    """The cells the form is filled with (``nights_csv.cells_of``) read back as the stored night."""
    services.nights_import(site, b"night,telescope,open_hours,slews,pm10_ugm3,dew\n2024-01-05,North,5,41,,yes\n")
    before = snapshot()
    initial = client.get(reverse("night-log", args=[site.slug]) + "?night=2024-01-05&telescope=North"
                         ).context["form"].initial
    client.post(reverse("night-log", args=[site.slug]), initial)
    assert snapshot() == before


# --- the admin -----------------------------------------------------------------------------------------------


def test_the_admin_shows_whose_each_night_is_and_filters_by_telescope(client, users, site, north):
    services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,,7\n2024-01-06,North,5\n")
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    listing = client.get("/admin/logbook/nightusage/")
    assert [str(row.telescope or "") for row in listing.context["cl"].result_list] == ["", "North (0.6 m)"]
    page = listing.content.decode()
    assert '<td class="field-whose">whole site</td>' in page and '<td class="field-whose">North</td>' in page
    only_north = client.get(f"/admin/logbook/nightusage/?telescope__id__exact={north.pk}").context["cl"]
    assert [row.night for row in only_north.result_list] == [NIGHT + dt.timedelta(days=1)]


def test_the_log_page_and_the_admin_show_a_telescopes_left_out_figures_as_the_sites(client, users, site, north):
    services.nights_import(site, b"night,telescope,open_hours,slews\n2024-01-05,,7,0\n2024-01-05,North,5,41\n")
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    rows = {line.split("</td><td>")[1]: line.split("</td><td>")[2:9] for line in page.splitlines()
            if line.startswith("<tr><td>Fri 05 Jan 2024")}
    assert rows == {  # open hours, slews, axis 1 and 2 travel, brake cycles, PM10, humidity
        "whole site": ["7.00", "0", "0.0", "0.0", "0", "–", "–"],
        "North": ["5.00", "41", "site&#x27;s", "site&#x27;s", "site&#x27;s", "site&#x27;s", "–"],
    }
    listing = client.get("/admin/logbook/nightusage/").content.decode()
    assert '<td class="field-shown">site&#x27;s</td>' in listing
    record = client.get(f"/admin/logbook/nightusage/{NightUsage.objects.get(telescope=north).pk}/change/")
    shown = re.findall(r'<label>([^<]+):</label>\s*<div class="readonly">([^<]*)</div>', record.content.decode())
    assert dict(shown)["Slews"] == "41" and dict(shown)["Brake cycles"] == "site&#x27;s"


def _remove_in_admin(client, nights, reason: str | None):
    """The admin's "remove" action on ``nights``: the confirmation page, or (with a reason) the removal."""
    data = {"action": "remove", "_selected_action": [n.pk for n in nights]}
    if reason is not None:
        data["reason"] = reason
    return client.post("/admin/logbook/nightusage/", data)


def test_an_engineer_removes_a_night_sent_under_the_wrong_telescope_with_a_reason(
    client, users, site, north, recomputes
):
    services.nights_import(site, b"night,telescope,open_hours,slews\n2024-01-05,,7,0\n2024-01-05,North,5,41\n")
    wrong = NightUsage.objects.get(telescope=north)
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    recomputes.clear()

    asked = _remove_in_admin(client, [wrong], reason=None)
    page = asked.content.decode()
    assert asked.status_code == 200 and "Remove 1 night" in page
    assert "<td>2024-01-05</td>\n<td>North</td>" in page
    assert "counts the whole site's row again" in page
    assert NightUsage.objects.count() == 2 and recomputes == []  # nothing happens before the reason is given

    blank = _remove_in_admin(client, [wrong], reason="  ")
    assert "This field is required" in blank.content.decode() and NightUsage.objects.count() == 2

    done = _remove_in_admin(client, [wrong], reason="was South's night")
    assert done.status_code == 302
    assert logged(site) == [(NIGHT, None, 7.0, 0)]  # North counts the site's row of that night again
    assert recomputes == [site.pk]
    gone = NightUsage.history.filter(id=wrong.pk).latest("history_date")
    assert (gone.history_type, gone.history_user, gone.history_change_reason) == (
        "-", users["engineer"], "was South's night"
    )
    assert "1 night removed (Test Hill: 1); its site&#x27;s due states are recomputed." in client.get(
        "/admin/logbook/nightusage/").content.decode()
    log_page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    assert "<h2>Nights removed</h2>" in log_page
    assert "<td>Fri 05 Jan 2024</td><td>North</td><td>5.00</td>" in log_page
    assert "<td>engineer</td><td>was South&#x27;s night</td>" in log_page


def test_removing_a_test_telescopes_nights_lets_it_be_deleted(client, users, site, north):
    services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,North,5\n2024-01-06,North,4\n")
    client.force_login(users["engineer"])
    users["engineer"].is_staff = True
    users["engineer"].save()
    _remove_in_admin(client, NightUsage.objects.filter(telescope=north), reason="test telescope")
    north.delete()  # PROTECT kept it while it had nights
    assert not NightUsage.objects.exists()
    log_page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    assert log_page.count("<td>a telescope since deleted</td>") == 2 and "<td>test telescope</td>" in log_page


def test_only_an_engineer_or_above_may_remove_nights(client, users, site):
    services.nights_import(site, b"night,open_hours\n2024-01-05,7\n")
    assert users["engineer"].has_perm("logbook.delete_nightusage")
    assert users["administrator"].has_perm("logbook.delete_nightusage")
    assert not users["technician"].has_perm("logbook.delete_nightusage")
    users["technician"].is_staff = True
    users["technician"].save()
    client.force_login(users["technician"])
    listing = client.get("/admin/logbook/nightusage/").content.decode()
    assert "Remove the selected nights" not in listing
    _remove_in_admin(client, list(NightUsage.objects.all()), reason="not mine to remove")
    assert NightUsage.objects.count() == 1


def test_the_format_help_says_an_empty_figure_of_a_telescopes_row_is_the_sites(client, technician, site):
    page = client.get(reverse("nights-import", args=[site.slug])).content.decode()
    assert "<td><code>slews</code></td><td>no</td><td>–</td><td>0 to 10,000 (whole number)</td><td>0; on a " \
           "telescope&#x27;s row: the site&#x27;s figure of that night (0 when the row&#x27;s open hours are 0)</td>" \
           in page
    assert "<td>not measured; on a telescope&#x27;s row: the site&#x27;s figure of that night (0 when the row&#x27;s " \
           "open hours are 0)</td><td>mean PM10" in page
    assert "<td>not measured</td><td>mean relative humidity while open</td>" in page  # nothing counts humidity
    assert "hours the dome was open (on a telescope&#x27;s row: the hours that telescope was open and in use)" in page
