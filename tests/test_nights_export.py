"""The nightly log's CSV download, and the figures of the log page.

The download is a nights CSV in the import's own format (``logbook.nights_csv``): imported again into the same site
it changes nothing (0 new, 0 updated), and into an empty copy of the site (the same telescope names) it stores the
same rows, the telescopes' own nights and the figures they leave to the site's row included. Numbers are written as
Python's shortest round-trip repr (``nights_csv.cell``), which reads back as the same float (Python documentation,
``repr`` of float; IEEE 754 round trip), so the check is exact equality. The page writes each figure with at least the
decimals the demo stores it to and every decimal it holds, so a sum recomputed from the page is the stored one.
"""
from __future__ import annotations

import csv
import datetime as dt
import io
import random

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from observatory_ops.logbook import nights_csv, services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.registry.models import Site, Telescope

pytestmark = pytest.mark.django_db

FIRST = dt.date(2024, 1, 5)
NIGHTS = 40
#: Every stored figure of a night, besides whose and which night it is.
FIGURES = ("open_hours", "slews", "axis1_travel_deg", "axis2_travel_deg", "brake_cycles", "pm10_ugm3", "humidity_pct",
           "dew", "rain")


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    """Storing nights asks for a recompute; recorded instead of run (each costs seconds of sky computation)."""
    return recomputes_recorded


def _telescopes(site: Site) -> None:
    # A name with a comma and quotes: the CSV quotes it, and it must read back as written.
    for name, aperture in (("North", 0.6), ('South, the "old" one', 0.4)):
        Telescope.objects.create(site=site, name=name, aperture_m=aperture, mount="fork")


def _log_file() -> bytes:
    """A seeded log of ``NIGHTS`` nights: the whole site's row each night, North's own on most, South's on some (it
    leaves its counters and dust to the site's row, or is idle), figures with many decimals and blanks among them."""
    rng = random.Random(20260615)
    lines = [",".join(nights_csv.COLUMNS)]
    for i in range(NIGHTS):
        night = (FIRST + dt.timedelta(days=i)).isoformat()
        hours = rng.choice([0, 7.5, 26940 / 3600, 0.1 + 0.2, round(rng.uniform(1, 11), 2)])
        pm10 = rng.choice(["", 38.25, round(rng.lognormvariate(3.5, 0.45), 1)]) if hours else ""
        humidity = rng.choice(["", 31, 64.5])
        flags = rng.choice([("yes", "no"), ("no", "no"), ("no", "yes")])
        lines.append(f"{night},,{hours},{rng.randint(0, 60)},{rng.uniform(0, 2000)},{round(rng.uniform(0, 900), 1)},"
                     f"{rng.randint(0, 60)},{pm10},{humidity},{flags[0]},{flags[1]}")
        if i % 4:
            lines.append(f"{night},North,{min(hours, 6.25)},{rng.randint(0, 60)},{rng.uniform(0, 2000)},0,"
                         f"{rng.randint(0, 60)},{pm10},{humidity},no,no")
        if i % 3 == 0:  # South's open hours alone: its counters and dust are the site's figures (blank)
            lines.append(f'{night},"South, the ""old"" one",{rng.choice([0, 2.5])},,,,,,,no,no')
    return "\n".join(lines).encode()


@pytest.fixture
def logged(site):
    _telescopes(site)
    report = services.nights_import(site, _log_file())
    assert report.errors == [] and report.created > NIGHTS
    return site


def _stored(site: Site) -> list[tuple]:
    """Every night of ``site`` as (night, telescope's name or None, every figure), in order."""
    return list(NightUsage.objects.filter(site=site).order_by("night", "telescope__name").values_list(
        "night", "telescope__name", *FIGURES))


def _snapshot(site: Site) -> list[dict]:
    """Every field of every night of ``site``, its id, source and time recorded included."""
    return list(NightUsage.objects.filter(site=site).order_by("pk").values())


def _download(client, site: Site):
    response = client.get(reverse("nights-csv", args=[site.slug]))
    assert response.status_code == 200
    return response, b"".join(response.streaming_content)


def test_the_download_is_named_by_the_first_and_last_night_and_holds_every_row_in_the_imports_columns(
    client, users, logged
):
    client.force_login(users["viewer"])  # anyone who may see the log
    response, data = _download(client, logged)
    last = FIRST + dt.timedelta(days=NIGHTS - 1)
    assert response.streaming  # read a chunk of nights at a time, never the whole log at once
    assert response["Content-Type"] == "text/csv; charset=utf-8"
    assert response["Content-Disposition"] == f'attachment; filename="test-hill-nights-{FIRST}-{last}.csv"'
    rows = list(csv.reader(io.StringIO(data.decode("utf-8-sig"))))
    assert tuple(rows[0]) == nights_csv.COLUMNS
    assert len(rows) - 1 == NightUsage.objects.filter(site=logged).count()
    # Each night the whole site's row first, then the telescopes' own by name, as the log page lists them.
    assert [row[:2] for row in rows[1:4]] == [[str(FIRST), ""], [str(FIRST), 'South, the "old" one'],
                                              [str(FIRST + dt.timedelta(days=1)), ""]]
    assert rows[2][nights_csv.COLUMNS.index("slews")] == ""  # South's figure left to the site's row stays blank


def test_the_download_imported_into_the_same_site_changes_nothing(client, users, logged, recomputes):
    client.force_login(users["viewer"])
    _, data = _download(client, logged)
    before = _snapshot(logged)
    recomputes.clear()  # the fixture's own import asked for one
    report = services.nights_import(logged, data, confirmed="")  # as the upload page imports it
    assert report.errors == [] and report.skipped == [] and not report.confirm_token
    assert (report.created, report.updated, report.unchanged) == (0, 0, len(before))
    assert report.changes == [] and _snapshot(logged) == before and recomputes == []


def test_the_download_uploaded_on_the_import_page_reports_0_new_0_updated(client, users, logged):
    client.force_login(users["technician"])
    _, data = _download(client, logged)
    response = client.post(reverse("nights-import", args=[logged.slug]), {
        "file": SimpleUploadedFile(f"{logged.slug}-nights.csv", data, content_type="text/csv"), "confirm": "",
    })
    said = [str(m) for m in response.context["messages"]]
    assert said == ["Import done: 0 new, 0 updated, 84 unchanged "
                    '(whole site: 40, South, the "old" one: 14, North: 30); nothing changed.']
    assert NightUsage.objects.filter(site=logged).count() == 84


def test_the_download_imported_into_an_empty_copy_of_the_site_stores_the_same_rows(client, users, logged):
    client.force_login(users["viewer"])
    _, data = _download(client, logged)
    copy = Site.objects.create(name="Test Hill copy", slug="test-hill-copy", latitude_deg=logged.latitude_deg,
                               longitude_deg=logged.longitude_deg, elevation_m=logged.elevation_m,
                               time_zone=logged.time_zone)
    _telescopes(copy)
    report = services.nights_import(copy, data)
    assert report.errors == [] and (report.created, report.updated, report.unchanged) == (len(_stored(logged)), 0, 0)
    assert _stored(copy) == _stored(logged)
    assert NightUsage.objects.filter(site=copy, telescope__isnull=False, slews__isnull=True).exists()
    # And the copy's own download is the same file but for its name.
    _, again = _download(client, copy)
    assert again == data


def test_a_site_with_no_night_logged_offers_no_download(client, users, site):
    client.force_login(users["viewer"])
    page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    assert reverse("nights-csv", args=[site.slug]) not in page
    response = client.get(reverse("nights-csv", args=[site.slug]), follow=True)
    assert [str(m) for m in response.context["messages"]] == [
        "No night is logged at Test Hill yet: there is no log to download."]


def test_the_log_page_links_the_download_for_a_viewer_and_signed_out_people_are_sent_to_sign_in(client, users, logged):
    url = reverse("nights-csv", args=[logged.slug])
    assert client.get(url).status_code == 302  # signed out: to the sign-in page
    client.force_login(users["viewer"])
    page = client.get(reverse("nights-list", args=[logged.slug])).content.decode()
    assert f'<a class="button" href="{url}">Download the log (CSV)</a>' in page
    assert "Log a night" not in page  # the viewer logs nothing, and still downloads


def test_a_telescope_name_a_spreadsheet_would_take_for_a_formula_is_written_with_an_apostrophe(client, users, site):
    """OWASP's CSV-injection advice (``observatory_ops.exports``): such a name is neutralised in every download; the
    import reads the apostrophe before such a name as ours (``nights_csv._telescope``), so the rows import back."""
    Telescope.objects.create(site=site, name="=T1", aperture_m=0.5, mount="fork")
    services.nights_import(site, b"night,telescope,open_hours\n2024-01-05,=T1,5\n")
    client.force_login(users["viewer"])
    _, data = _download(client, site)
    assert data.decode().splitlines()[1].startswith("2024-01-05,'=T1,5,")
    report = services.nights_import(site, data)
    assert not report.errors and (report.created, report.updated, report.unchanged) == (0, 0, 1)


# --- the log page's figures -----------------------------------------------------------------------------------


def test_the_log_page_shows_each_figure_as_stored_so_sums_from_the_page_are_the_stored_ones(client, users, site):
    """The reviewer's case: PM10 stored to 0.1 was shown whole, so dust-weighted hours recomputed from the page
    (sum of open hours x PM10) came out 615.06 h against 614.36 h stored."""
    nights = [(7.5, 38.2, 1030.5, 31.0), (26940 / 3600, 38.25, 610.0, 64.5), (5.25, 40.0, 0.0, None)]
    for i, (hours, pm10, travel, humidity) in enumerate(nights):
        NightUsage.objects.create(site=site, night=FIRST + dt.timedelta(days=i), open_hours=hours, pm10_ugm3=pm10,
                                  axis1_travel_deg=travel, humidity_pct=humidity)
    client.force_login(users["viewer"])
    page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    cells = {line.split("</td><td>")[0][len("<tr><td>"):]: line.split("</td><td>")[2:9] for line in page.splitlines()
             if line.startswith("<tr><td>") and "whole site" in line}
    # open hours, slews, axis 1 and 2 travel, brake cycles, PM10, humidity
    assert cells["Fri 05 Jan 2024"] == ["7.50", "0", "1030.5", "0.0", "0", "38.2", "31"]
    assert cells["Sat 06 Jan 2024"] == ["7.483333333333333", "0", "610.0", "0.0", "0", "38.25", "64.5"]
    assert cells["Sun 07 Jan 2024"] == ["5.25", "0", "0.0", "0.0", "0", "40.0", "–"]
    from_page = sum(float(row[0]) * float(row[5]) for row in cells.values())
    assert from_page == sum(hours * pm10 for hours, pm10, _travel, _humidity in nights)


def test_a_name_that_begins_with_an_apostrophe_is_read_as_written_first():
    """Only a name not registered as written loses the apostrophe our downloads add ("'=T1" for "=T1")."""
    from observatory_ops.logbook.nights_csv import _telescope

    assert _telescope("'=X", ["'=X", "=X"]) == "'=X"
    assert _telescope("'=T1", ["=T1"]) == "=T1"
