"""The downloads, as a site engineer handing the maintenance record over found them.

A handover review downloaded a year's finished work (header only: the State filter kept its "still to do" default),
opened the files in a spreadsheet program on Windows (names with "—" and "Ø" garbled: no byte-order mark), found
folders of files named alike ("work-orders.csv", "history-registry.subsystem-41.csv"), was told a bad telescope was
a bad period, and had a re-saved nights file refused without a word on what the spreadsheet had done to its dates.
"""
# ruff: noqa: F811  (the fixtures imported by name below are the tests' parameters)
from __future__ import annotations

import codecs
import csv
import datetime as dt
import io

import pytest
from django.urls import reverse
from django.utils import timezone
from test_work_orders_csv import _finished
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.logbook import nights_csv, services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.mirrors import response_csv
from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import services as workorder_services

pytestmark = pytest.mark.django_db

#: A subsystem's name as the review's spreadsheet garbled it: a comma, an em dash and a slashed O.
FAN_NAME = "Fan, east — Ø120 mm"
#: A moment to name downloads by: 13:00 UTC on 15 Jun 2026 is 15:00 the same day at Test Hill (Europe/Madrid, CEST).
MOMENT = dt.datetime(2026, 6, 15, 13, 0, tzinfo=dt.UTC)


def _rows(response) -> list[dict]:
    return list(csv.DictReader(io.StringIO(response.content.decode("utf-8-sig"))))


def _file_name(response) -> str:
    disposition = response["Content-Disposition"]
    assert disposition.startswith('attachment; filename="') and disposition.endswith('"')
    return disposition[len('attachment; filename="'):-1]


@pytest.fixture
def frozen_now(monkeypatch):
    """The present moment set to ``MOMENT`` (``django.utils.timezone.now``, which the views and ``site_today`` read),
    and the due list's recompute of stale sites left out (only its file is looked at)."""
    from observatory_ops.planning import views

    monkeypatch.setattr(views, "sites_bring_up_to_date", lambda sites=None: [])
    monkeypatch.setattr(timezone, "now", lambda: MOMENT)


# --- 1. finished work of a period, with no state chosen ----------------------------------------------------------


def test_done_dates_without_a_state_list_the_finished_work_in_its_csv(order, users, client):
    done = site_today(order.site)
    _finished(order, users, done, 2.5)
    client.force_login(users["viewer"])
    query = {"site": order.site.pk, "done_from": done.replace(month=1, day=1).isoformat(),
             "done_to": done.replace(month=12, day=31).isoformat()}
    page = client.get("/workorders/", query)
    assert order.number in page.content.decode()
    assert page.context["filter"].form.cleaned_data["state"] == "all"  # the form shows "any state" chosen
    assert "in any state unless a state is chosen" in page.content.decode()
    rows = _rows(client.get("/workorders.csv", query))
    assert [(r["number"], r["state"], r["work_done_on"]) for r in rows] == [
        (order.number, "finished, awaiting countersignature", done.isoformat())]
    assert [r["number"] for r in _rows(client.get("/workorders.csv", {"done_to": done.isoformat()}))] == [
        order.number]


def test_a_state_chosen_with_done_dates_is_kept(order, users, client):
    done = site_today(order.site)
    _finished(order, users, done, 2.5)
    client.force_login(users["viewer"])
    period = {"done_from": done.isoformat(), "done_to": done.isoformat()}
    assert _rows(client.get("/workorders.csv", {**period, "state": "open"})) == []
    assert [r["number"] for r in _rows(client.get("/workorders.csv", {**period, "state": "finished"}))] == [
        order.number]
    assert _rows(client.get("/workorders.csv", {**period, "state": "countersigned"})) == []


def test_without_done_dates_the_list_still_shows_the_work_still_to_do(order, users, client):
    _finished(order, users, site_today(order.site), 2.5)
    client.force_login(users["viewer"])
    page = client.get("/workorders/", {"site": order.site.pk})
    assert page.context["filter"].form.cleaned_data["state"] == "open"
    assert _rows(client.get("/workorders.csv", {"site": order.site.pk})) == []


# --- 2. a byte-order mark at the start of every CSV ---------------------------------------------------------------


@pytest.fixture
def fans_on_order(telescope, users):
    fans = subsystem_create(telescope, "cooling_fans", FAN_NAME, counting_from=dt.date(2026, 1, 1))
    return workorder_services.work_order_from_due(list(fans.plans.all()), users["engineer"])


def test_the_work_orders_csv_starts_with_a_byte_order_mark_and_keeps_the_name_as_written(fans_on_order, users,
                                                                                         client):
    client.force_login(users["viewer"])
    response = client.get("/workorders.csv", {"state": "all"})
    assert response.content.startswith(codecs.BOM_UTF8)
    assert not response.content.startswith(codecs.BOM_UTF8 * 2)
    [row] = _rows(response)
    assert (row["number"], row["subsystems"].endswith(FAN_NAME)) == (fans_on_order.number, True)


def test_every_csv_download_starts_with_a_byte_order_mark(fans_on_order, site, users, client, frozen_now):
    NightUsage.objects.create(site=site, night=dt.date(2026, 6, 1), open_hours=5)
    client.force_login(users["viewer"])
    downloads = [
        "/workorders.csv", "/due/?export=csv", f"/history/registry.site/record/{site.pk}/?export=csv",
        f"/sites/{site.slug}/service-records.csv", f"/sites/{site.slug}/readings.csv",
        f"/sites/{site.slug}/parts/used.csv",
    ]
    for url in downloads:
        response = client.get(url)
        assert response.status_code == 200 and response.content.startswith(codecs.BOM_UTF8), url
    nights = client.get(reverse("nights-csv", args=[site.slug]))
    data = b"".join(nights.streaming_content)
    assert data.startswith(codecs.BOM_UTF8)
    assert data.decode("utf-8-sig").splitlines()[0] == ",".join(nights_csv.COLUMNS)


def test_the_importers_read_a_file_with_a_byte_order_mark(site, recomputes_recorded):
    report = services.nights_import(site, codecs.BOM_UTF8 + b"night,open_hours\n2024-01-05,5\n")
    assert report.errors == [] and report.created == 1
    wavelengths, weights = response_csv.parse(codecs.BOM_UTF8 + b"wavelength_nm,weight\n400,1\n1000,1\n")
    assert list(wavelengths) == [400, 1000] and list(weights) == [1, 1]


# --- 3. file names that say the site and the day ------------------------------------------------------------------


def test_the_work_orders_csv_is_named_by_the_site_and_the_day(fans_on_order, site, users, client, frozen_now):
    client.force_login(users["viewer"])
    assert _file_name(client.get("/workorders.csv", {"site": site.pk})) == "work-orders-test-hill-2026-06-15.csv"
    assert _file_name(client.get("/workorders.csv")) == "work-orders-2026-06-15.csv"  # across sites: UTC's day


def test_the_due_list_of_one_site_is_named_by_that_site(site, users, client, frozen_now):
    client.force_login(users["viewer"])
    assert _file_name(client.get(f"/due/?site={site.pk}&export=csv")) == "due-list-test-hill-2026-06-15.csv"
    assert _file_name(client.get("/due/?export=csv")) == "due-list-2026-06-15.csv"


def test_a_history_download_is_named_in_plain_words_and_dated(fans_on_order, users, client, frozen_now):
    fans = fans_on_order.items.first().subsystem
    client.force_login(users["viewer"])
    response = client.get(f"/history/registry.subsystem/record/{fans.pk}/?export=csv")
    assert _file_name(response) == f"history-subsystem-{fans.pk}-2026-06-15.csv"


# --- 4. a telescope refused is said to be the telescope ---------------------------------------------------------


def test_a_telescope_not_of_the_site_is_refused_as_a_telescope_not_a_period(telescope, users, client):
    client.force_login(users["viewer"])
    url = f"/sites/{telescope.site.slug}/service-records.csv"
    refused = client.get(url, {"telescope": "99"})
    page = refused.content.decode()
    assert refused.status_code == 400
    assert "The telescope asked for cannot be used: telescope 99 is not one of Test Hill&#x27;s telescopes." in page
    assert "The period asked for cannot be read" not in page
    bad_period = client.get(url, {"from": "2026-02-30", "telescope": "99"}).content.decode()
    assert "The period asked for cannot be read: from and to are dates as YYYY-MM-DD" in bad_period


# --- 5. dates a spreadsheet program relaid ------------------------------------------------------------------------

RELAID = ("; a spreadsheet program may have changed the dates' layout when the file was saved: keep the night column "
          "as text, or save the dates as YYYY-MM-DD")


@pytest.mark.parametrize("written", ["12/6/2023", "6.12.2023", "2023/12/06", "12/6/2023 0:00", "6-12-2023",
                                     "06-Dec-2023", "6 December 2023", "Dec 6 2023"])
def test_a_night_in_a_spreadsheets_layout_is_refused_with_a_word_on_why(site, written):
    report = services.nights_import(site, f"night,open_hours\n{written},5\n".encode())
    # Refused, never guessed: 12/6/2023 is 12 June in one country and 6 December in another.
    assert report.errors == [(2, f'night must be a date as YYYY-MM-DD, not "{written}"{RELAID}')]
    assert not NightUsage.objects.exists()


@pytest.mark.parametrize("written", ["2024-1-5", "20240105", "next tuesday", "12/2023"])
def test_other_nights_not_as_yyyy_mm_dd_get_no_word_on_spreadsheets(site, written):
    report = services.nights_import(site, f"night,open_hours\n{written},5\n".encode())
    assert report.errors == [(2, f'night must be a date as YYYY-MM-DD, not "{written}"')]


def test_a_night_sent_as_json_gets_no_word_on_spreadsheets():
    parsed = nights_csv.parse_objects([{"night": "12/6/2023", "open_hours": 5}], latest_night=dt.date(2026, 6, 14))
    assert [p.reason for p in parsed.errors] == ['night must be a date as YYYY-MM-DD, not "12/6/2023"']
