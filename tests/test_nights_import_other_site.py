"""Specifications for the import page's question about another site's log, and for two messages of the nights format.

A bad-input review downloaded one site's log (``/sites/<slug>/nights.csv``, named ``<slug>-nights-<first>-<last>.csv``)
and imported it on another site's import page: its nights became that site's. A file whose name is the download name
of another site of this installation is now not read until the box the page offers is ticked with the same file chosen
again; any other name imports at once, as before. The site names here are invented.

The same review found a header line repeated mid-file (two files joined) refused with one message per column, and an
unquoted decimal comma ("7,5") refused with a count of fields and no hint.
"""
from __future__ import annotations

import datetime as dt
import re

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.logbook.nights_csv import slug_named
from observatory_ops.registry.models import Site

pytestmark = pytest.mark.django_db

FIRST_NIGHT = dt.date(2024, 1, 5)
NIGHTS = 30


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    """Record due-state recomputes instead of running them (each costs seconds of sky computation)."""
    return recomputes_recorded


@pytest.fixture
def technician_client(client, users):
    client.force_login(users["technician"])
    return client


@pytest.fixture
def other_site(db):
    """Another site of the installation, with a month of nights logged (invented)."""
    other = Site.objects.create(
        name="Quill Hollow", slug="quill-hollow", latitude_deg=37.0, longitude_deg=-2.5, elevation_m=1200,
        time_zone="Europe/Madrid",
    )
    NightUsage.objects.bulk_create(
        NightUsage(site=other, night=FIRST_NIGHT + dt.timedelta(days=i), open_hours=4.0 + i / 10, slews=20 + i,
                   source=NightUsage.Source.IMPORT)
        for i in range(NIGHTS)
    )
    return other


def downloaded(client, site: Site) -> tuple[str, bytes]:
    """The site's log as its download gives it: the file's name and its bytes."""
    response = client.get(reverse("nights-csv", args=[site.slug]))
    name = re.fullmatch(r'attachment; filename="(.+)"', response["Content-Disposition"]).group(1)
    return name, b"".join(response.streaming_content)


def upload(client, site: Site, data: bytes, name: str, **fields):
    payload = {"file": SimpleUploadedFile(name, data, content_type="text/csv"), "confirm": ""} | fields
    return client.post(reverse("nights-import", args=[site.slug]), payload)


def messages_of(response) -> list[str]:
    return [str(m) for m in response.context["messages"]]


def nights_of(site: Site) -> list[tuple]:
    return list(NightUsage.objects.filter(site=site).order_by("night").values_list("night", "open_hours", "slews"))


# --- another site's log --------------------------------------------------------------------------------------------


def test_the_download_name_reads_back_as_the_slug_of_the_site_it_was_downloaded_from(technician_client, other_site):
    name, _ = downloaded(technician_client, other_site)
    assert name == f"quill-hollow-nights-{FIRST_NIGHT}-{FIRST_NIGHT + dt.timedelta(days=NIGHTS - 1)}.csv"
    assert slug_named(name) == "quill-hollow"
    # A browser's second copy of the same download, and a slug that itself holds "-nights-".
    assert slug_named("quill-hollow-nights-2024-01-05-2024-02-03 (1).csv") == "quill-hollow"
    assert slug_named("dark-nights-ridge-nights-2024-01-05-2024-02-03.csv") == "dark-nights-ridge"
    assert slug_named("nights.csv") is None and slug_named("quill-hollow.csv") is None


def test_another_sites_download_is_refused_with_the_question_and_nothing_is_stored(
    technician_client, site, other_site, recomputes
):
    name, data = downloaded(technician_client, other_site)
    others_before = nights_of(other_site)
    response = upload(technician_client, site, data, name)
    assert messages_of(response) == [
        f"Nothing was stored: the file's name, {name}, says it is the log of Quill Hollow, and this is Test Hill's "
        "import page. To import it into Test Hill all the same, tick the box below and choose the same file again."
    ]
    page = response.content.decode()
    assert "Import it into Test Hill all the same" in page and 'name="other_site"' in page
    assert f'href="{reverse("nights-import", args=["quill-hollow"])}"' in page  # where it may belong instead
    assert "Import done" not in page
    assert nights_of(site) == [] and nights_of(other_site) == others_before and recomputes == []


def test_the_box_ticked_with_the_same_file_chosen_again_imports_it(technician_client, site, other_site):
    name, data = downloaded(technician_client, other_site)
    asked = upload(technician_client, site, data, name)
    assert asked.context["form"]["asked_file"].value() == name
    response = upload(technician_client, site, data, name, asked_file=name, other_site="on")
    assert messages_of(response) == [f"Import done: {NIGHTS} new, 0 updated, 0 unchanged."]
    assert nights_of(site) == nights_of(other_site)
    # Imported again: idempotent, and still only with the box ticked.
    again = upload(technician_client, site, data, name, asked_file=name, other_site="on")
    assert messages_of(again) == [f"Import done: 0 new, 0 updated, {NIGHTS} unchanged; nothing changed."]


def test_the_box_answers_only_for_the_file_it_asked_about(technician_client, site, other_site):
    name, data = downloaded(technician_client, other_site)
    upload(technician_client, site, data, name)
    # Ticked with no question asked, or for another file's name: asked again, nothing stored.
    for asked_file in ("", "quill-hollow-nights-2020-01-01-2020-01-02.csv"):
        response = upload(technician_client, site, data, name, asked_file=asked_file, other_site="on")
        assert messages_of(response)[0].startswith("Nothing was stored: the file's name")
    # The question asked but the box left unticked: asked again.
    response = upload(technician_client, site, data, name, asked_file=name)
    assert messages_of(response)[0].startswith("Nothing was stored: the file's name")
    assert nights_of(site) == []


def test_this_sites_own_download_name_imports_at_once(technician_client, site, other_site):
    _, data = downloaded(technician_client, other_site)
    own_name = f"test-hill-nights-{FIRST_NIGHT}-{FIRST_NIGHT + dt.timedelta(days=NIGHTS - 1)}.csv"
    response = upload(technician_client, site, data, own_name)
    assert messages_of(response) == [f"Import done: {NIGHTS} new, 0 updated, 0 unchanged."]
    assert 'name="other_site"' not in response.content.decode()


@pytest.mark.parametrize("name", [
    "nights.csv",
    "quill-hollow.csv",  # names a site, but not as the download does
    "north-mesa-nights-2024-01-05-2024-02-03.csv",  # the download's name of no site of this installation
])
def test_a_name_that_names_no_other_site_imports_at_once(technician_client, site, other_site, name):
    _, data = downloaded(technician_client, other_site)
    response = upload(technician_client, site, data, name)
    assert messages_of(response) == [f"Import done: {NIGHTS} new, 0 updated, 0 unchanged."]
    assert len(nights_of(site)) == NIGHTS


def test_the_question_leaves_the_confirmation_of_changes_working(technician_client, site, other_site, recomputes):
    """The page keeps a file whose changes to stored nights it asks to confirm (``views._PENDING_IMPORT``): another
    site's file ticked in and changing stored nights is asked to confirm like any other, and confirmed with no file
    chosen again, without being asked whose log it is a second time."""
    NightUsage.objects.create(site=site, night=FIRST_NIGHT, open_hours=9.0, slews=3, source=NightUsage.Source.IMPORT)
    name, data = downloaded(technician_client, other_site)
    upload(technician_client, site, data, name)
    asked = upload(technician_client, site, data, name, asked_file=name, other_site="on")
    assert messages_of(asked)[0].startswith("Check the changes below and confirm them.")
    token = asked.context["form"]["confirm"].value()
    assert token and len(nights_of(site)) == 1 and recomputes == []
    url = reverse("nights-import", args=[site.slug])
    stored = technician_client.post(url, {"confirm": token})
    assert messages_of(stored) == [f"Import done: {NIGHTS - 1} new, 1 updated, 0 unchanged."]
    assert nights_of(site) == nights_of(other_site)


def test_another_sites_file_chosen_while_changes_wait_stores_neither(technician_client, site, other_site, recomputes):
    """Choosing another file leaves the changes waiting unstored (the page says so); choosing another site's asks, and
    the changes listed before are not stored by a press with no file either."""
    NightUsage.objects.create(site=site, night=FIRST_NIGHT, open_hours=9.0, source=NightUsage.Source.IMPORT)
    changing = f"night,open_hours\n{FIRST_NIGHT},7.5\n".encode()
    token = upload(technician_client, site, changing, "nights.csv").context["form"]["confirm"].value()
    name, data = downloaded(technician_client, other_site)
    response = upload(technician_client, site, data, name, confirm=token)
    assert messages_of(response)[0].startswith("Nothing was stored: the file's name")
    url = reverse("nights-import", args=[site.slug])
    after = technician_client.post(url, {"confirm": token})
    assert after.context["form"].errors == {"file": ["Choose the CSV file to import."]}
    assert nights_of(site) == [(FIRST_NIGHT, 9.0, 0)] and recomputes == []


# --- messages of the format ----------------------------------------------------------------------------------------


def test_a_header_repeated_mid_file_gets_one_message_naming_its_line(site):
    first = "night,open_hours,slews\n2024-01-05,5,10\n2024-01-06,6,11\n"
    second = "night,open_hours,slews\n2024-01-07,7,12\n"
    report = services.nights_import(site, (first + second).encode())
    assert report.errors == [
        (4, "repeats the header line (line 1), as where two files were joined; remove this line")
    ]
    assert report.summary == "1 bad row; nothing was stored."
    assert nights_of(site) == []


def test_a_repeated_header_skipped_leaves_the_nights_of_both_files(site):
    data = b"night,open_hours\n2024-01-05,5\nNight , Open_Hours,\n2024-01-06,6\n"
    report = services.nights_import(site, data, skip_bad=True)
    assert report.skipped_rows == [(3, "repeats the header line (line 1), as where two files were joined; remove "
                                       "this line")]
    assert [(night, hours) for night, hours, _ in nights_of(site)] == [(FIRST_NIGHT, 5), (dt.date(2024, 1, 6), 6)]


def test_a_second_header_of_other_columns_refuses_the_whole_file(site):
    """Its nights would be read under the first header's columns: slews as open hours here."""
    data = b"night,open_hours,slews\n2024-01-05,5,10\nnight,slews,open_hours\n2024-01-06,12,6\n"
    report = services.nights_import(site, data, skip_bad=True)
    assert report.file_problem == (
        "This file is not a nights CSV: line 3 is a second header line, its columns not those of line 1, as where two "
        "files were joined: the nights after it would be read under the wrong columns; put all the nights under one "
        "header line"
    )
    assert nights_of(site) == []


def test_an_unquoted_decimal_comma_gets_the_hint_that_figures_take_a_point(site):
    report = services.nights_import(site, b"night,open_hours\n2019-01-01,7,5\n")
    assert report.errors == [
        (2, "has 3 fields, the header has 2; a decimal comma may have split a figure in two (7,5 read as 7 and 5): "
            "figures take a point (7.5)")
    ]
    assert nights_of(site) == []


def test_the_hint_is_given_only_where_two_fields_joined_by_a_point_make_a_number(site):
    report = services.nights_import(site, b"night,open_hours\n2019-01-01,7,yes\n2019-01-02,5\n")
    assert report.errors == [(2, "has 3 fields, the header has 2")]
    # One pair of fields that could be a split figure: named.
    report = services.nights_import(site, b"night,open_hours,dew\n2019-01-01,6,25,no\n")
    assert report.errors[0].reason.endswith("(6,25 read as 6 and 25): figures take a point (6.25)")
    # Several: the hint with the example figure, not a guess at which.
    report = services.nights_import(site, b"night,open_hours,slews\n2019-01-01,6,25,40\n")
    assert report.errors[0].reason.endswith("(7,5 read as 7 and 5): figures take a point (7.5)")
    report = services.nights_import(site, b"night,open_hours,pm10_ugm3\n2019-01-01,7,5,38,2\n")
    assert report.errors[0].reason == (
        "has 5 fields, the header has 3; a decimal comma may have split a figure in two (7,5 read as 7 and 5): "
        "figures take a point (7.5)"
    )


def test_the_upload_page_shows_the_repeated_header_on_its_line(technician_client, site):
    response = upload(technician_client, site, b"night,open_hours\n2024-01-05,5\nnight,open_hours\n", "nights.csv")
    page = response.content.decode()
    assert "<td>3</td><td>repeats the header line (line 1), as where two files were joined; remove this line</td>" in (
        page
    )
    assert nights_of(site) == []
