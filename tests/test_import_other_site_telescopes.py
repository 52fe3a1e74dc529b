"""Specifications for importing another site's log all the same when its rows are its telescopes' nights.

A bad-input review ticked "import it all the same" for another site's downloaded log with per-telescope rows: every
row was refused on its own line ("unknown telescope R40 ...", 50 lines shown), each advising to leave the telescope
empty (which would make the night the whole site's), and the page then asked whose log it was again. The refusal now
says once whose telescopes the rows name and which this site has; the answer stays with the page for that file. The
sites and telescopes here are invented (tests/test_nights_import_other_site.py has the question itself).
"""
# ruff: noqa: F811  (the fixtures imported from tests/test_nights_import_other_site.py are used by name)
from __future__ import annotations

import datetime as dt

import pytest
from django.urls import reverse
from test_nights_import_other_site import (  # noqa: F401  (recomputes and technician_client are fixtures)
    FIRST_NIGHT,
    NIGHTS,
    downloaded,
    messages_of,
    recomputes,
    technician_client,
    upload,
)

from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.registry.models import Site, Telescope

pytestmark = pytest.mark.django_db


@pytest.fixture
def here(site):
    """Test Hill (conftest) with two telescopes of its own."""
    for name in ("T1", "T2"):
        Telescope.objects.create(site=site, name=name, aperture_m=0.5, mount="fork")
    return site


@pytest.fixture
def other_site(db):
    """Another site with one telescope, R40, and a month of nights: the whole site's and R40's own each night."""
    other = Site.objects.create(
        name="Quill Hollow", slug="quill-hollow", latitude_deg=37.0, longitude_deg=-2.5, elevation_m=1200,
        time_zone="Europe/Madrid",
    )
    r40 = Telescope.objects.create(site=other, name="R40", aperture_m=0.4, mount="fork")
    for i in range(NIGHTS):
        night = FIRST_NIGHT + dt.timedelta(days=i)
        NightUsage.objects.create(site=other, night=night, open_hours=5.0, slews=20 + i)
        NightUsage.objects.create(site=other, night=night, telescope=r40, open_hours=4.0, slews=10 + i)
    return other


def stored(site: Site) -> list[tuple]:
    return list(NightUsage.objects.filter(site=site).order_by("night", "telescope__name")
                .values_list("night", "telescope__name", "open_hours", "slews"))


def answered(client, site: Site, data: bytes, name: str, **fields):
    """The file chosen, the question asked, and the box ticked with the same file chosen again."""
    upload(client, site, data, name)
    return upload(client, site, data, name, asked_file=name, other_site="on", **fields)


#: The rows of R40 in the download: line 1 is the header, then each night's whole-site row and R40's row.
R40_LINES = f"between lines 3 and {2 * NIGHTS + 1}"


def test_another_sites_telescope_rows_are_refused_in_one_sentence_and_nothing_is_stored(
    technician_client, here, other_site, recomputes
):
    name, data = downloaded(technician_client, other_site)
    response = answered(technician_client, here, data, name)
    assert messages_of(response) == [
        f"Import refused: {NIGHTS} bad rows; nothing was stored. The file's {NIGHTS} rows of telescope R40 "
        f"({R40_LINES}) are refused: R40 is Quill Hollow's, and Test Hill's telescopes are T1 and T2. To import them "
        "here, write in the file's telescope column which of Test Hill's telescopes each row is, and import the file "
        "again."
    ]
    page = response.content.decode()
    assert "unknown telescope" not in page and "leave it empty for the whole site" not in page  # no line per row
    assert response.context["report"].refused_rows == []
    # Beside the refusal, where the file may belong instead.
    assert f'href="{reverse("nights-import", args=["quill-hollow"])}"' in page
    assert stored(here) == [] and recomputes == []


def test_the_answer_stays_for_the_same_file_and_its_corrected_copy_imports_without_the_question_again(
    technician_client, here, other_site
):
    name, data = downloaded(technician_client, other_site)
    refused = answered(technician_client, here, data, name)
    form = refused.context["form"]
    assert form["asked_file"].value() == name and form["other_site"].value() is True  # ticked, as answered
    assert form.fields["other_site"].help_text == (
        f"Ticked as you answered for {name}: choose it again (corrected, or as it is) to import it here, without being "
        "asked again."
    )
    # The telescope column corrected to this site's name of the same telescope; the page's fields sent as they are.
    corrected = data.replace(b",R40,", b",T1,")
    response = upload(technician_client, here, corrected, name, asked_file=name, other_site="on")
    assert messages_of(response) == [
        f"Import done: {2 * NIGHTS} new (whole site: {NIGHTS}, T1: {NIGHTS}), 0 updated, 0 unchanged."
    ]
    assert len(stored(here)) == 2 * NIGHTS
    assert 'name="other_site"' in response.content.decode()  # still answered for that file: sent again, unchanged
    again = upload(technician_client, here, corrected, name, asked_file=name, other_site="on")
    assert messages_of(again) == [
        f"Import done: 0 new, 0 updated, {2 * NIGHTS} unchanged (whole site: {NIGHTS}, T1: {NIGHTS}); nothing changed."
    ]


def test_another_file_is_still_asked_about_after_an_answer(technician_client, here, other_site):
    name, data = downloaded(technician_client, other_site)
    answered(technician_client, here, data, name)
    other_name = name.replace(".csv", " (1).csv")  # the browser's second copy: a file of another name
    response = upload(technician_client, here, data, other_name, asked_file=name, other_site="on")
    assert messages_of(response)[0].startswith("Nothing was stored: the file's name")
    assert stored(here) == []


def test_with_the_good_rows_stored_the_telescopes_rows_are_skipped_in_the_same_one_sentence(
    technician_client, here, other_site
):
    name, data = downloaded(technician_client, other_site)
    response = answered(technician_client, here, data, name, skip_bad="on")
    assert messages_of(response) == [
        f"Import done: {NIGHTS} new (whole site: {NIGHTS}), 0 updated, 0 unchanged; {NIGHTS} bad rows skipped. The "
        f"file's {NIGHTS} rows of telescope R40 ({R40_LINES}) are skipped: R40 is Quill Hollow's, and Test Hill's "
        "telescopes are T1 and T2. To import them here, write in the file's telescope column which of Test Hill's "
        "telescopes each row is, and import the file again."
    ]
    assert response.context["report"].skipped_rows == []
    assert [telescope for _, telescope, _, _ in stored(here)] == [None] * NIGHTS


def test_a_site_without_telescopes_is_told_to_register_them_and_other_problems_stay_on_their_lines(site, other_site):
    data = (b"night,telescope,open_hours\n"
            b"2024-01-05,R40,4\n2024-01-06,R40,30\n2024-01-07,,5\n2024-01-08,,x\n")
    report = services.nights_import(site, data)
    assert report.summary == (
        "3 bad rows; nothing was stored. The file's 2 rows of telescope R40 (lines 2 to 3) are refused: R40 is Quill "
        "Hollow's, and Test Hill has no telescope registered. To import them here, register the telescopes at Test "
        "Hill first, and import the file again."
    )
    # Line 3's other problem, and line 5's, each on its own line; the unknown telescope said once above.
    assert report.refused_rows == [(3, "open_hours cannot be above 24 (got 30)"),
                                   (5, 'open_hours must be a number, not "x"')]
    assert stored(site) == []


def test_a_name_no_site_has_is_said_once_when_several_rows_give_it_and_on_its_line_when_one_does(here):
    several = services.nights_import(here, b"night,telescope,open_hours\n2024-01-05,R9,4\n2024-01-06,R9,5\n")
    assert several.summary.endswith(
        "The file's 2 rows of telescope R9 (lines 2 to 3) are refused: R9 is registered at no site here, and Test "
        "Hill's telescopes are T1 and T2. To import them here, write in the file's telescope column which of Test "
        "Hill's telescopes each row is, and import the file again."
    )
    one = services.nights_import(here, b"night,telescope,open_hours\n2024-01-05,T3,4\n")  # a slip: on its line
    assert one.summary == "1 bad row; nothing was stored."
    assert one.refused_rows == [
        (2, 'unknown telescope "T3" (known at this site: T1, T2); leave it empty for the whole site\'s night')]
    assert stored(here) == []


def test_another_sites_telescope_written_in_other_case_is_still_named_as_that_sites(
    technician_client, here, other_site
):
    """A diff review: rows of "r40" were said to be of a telescope "registered at no site here", where this site's
    names are matched case aside (the nights format) and another site has R40."""
    name, data = downloaded(technician_client, other_site)
    response = answered(technician_client, here, data.replace(b",R40,", b",r40,"), name)
    assert "r40 is Quill Hollow's" in messages_of(response)[0]
    assert stored(here) == []
