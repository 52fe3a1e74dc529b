"""Controls and pages named for someone who cannot see the page around them (an accessibility review: keyboard,
screen reader): a subsystem page names its telescope, a choice of radio buttons is a fieldset with a legend and its
help, a link repeated on every row names its row, and every field has a label.

Outside sources: WCAG 2.1 (W3C Recommendation, 2018): SC 1.3.1 (info and relationships: a group of radio buttons
in a fieldset with a legend), SC 2.4.2 (page titled), SC 2.4.4 (link purpose in context), SC 2.4.6 (headings and
labels), SC 2.5.3 (label in name: the accessible name starts with the visible words), SC 3.3.2 (labels or
instructions); HTML Living Standard for fieldset, legend and label ``for``; WAI-ARIA 1.2 for aria-label and
aria-describedby.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from conftest import site_in_use

from observatory_ops.logbook.models import NightUsage
from observatory_ops.registry.models import Subsystem, Telescope

pytestmark = pytest.mark.django_db


@pytest.fixture
def in_use(db):
    return site_in_use("labels", kinds=("cooling_fans",), nights=3)


def _title(page: str) -> str:
    return html.unescape(re.search(r"<title>(.*?)</title>", page, flags=re.S).group(1)).strip()


def _h1(page: str) -> str:
    return html.unescape(re.sub(r"<[^>]+>", "", re.search(r"<h1>(.*?)</h1>", page, flags=re.S).group(1))).strip()


def test_a_subsystem_page_and_its_forms_name_its_telescope(in_use, users, client):
    # Two telescopes with a subsystem of the same name: each page says which telescope it is on.
    second = Telescope.objects.create(site=in_use, name="T2", aperture_m=0.4, mount="fork")
    first = Subsystem.objects.get(telescope__site=in_use)
    twin = Subsystem.objects.create(telescope=second, kind=first.kind, name=first.name)
    client.force_login(users["technician"])
    for subsystem, telescope in ((first, "T1"), (twin, "T2")):
        page = client.get(f"/subsystems/{subsystem.pk}/").content.decode()
        assert _title(page) == f"{telescope}: {subsystem.name} · observatory_ops"
        assert _h1(page).startswith(f"{telescope}: {subsystem.name}")
        service = client.get(f"/subsystems/{subsystem.pk}/service/new/").content.decode()
        assert _title(service) == f"Log service: {telescope} {subsystem.name} · observatory_ops"
        assert _h1(service) == f"Log service work: {telescope} {subsystem.name}"
        reading = client.get(f"/subsystems/{subsystem.pk}/readings/new/").content.decode()
        assert _title(reading) == f"Log a reading: {telescope} {subsystem.name} · observatory_ops"
        assert _h1(reading) == f"Log a reading: {telescope} {subsystem.name}"


def test_the_night_forms_telescope_radios_are_a_fieldset_with_a_legend_and_their_help(in_use, users, client):
    Telescope.objects.create(site=in_use, name="T2", aperture_m=0.4, mount="fork")  # two telescopes: radios
    client.force_login(users["technician"])
    page = client.get(f"/sites/{in_use.slug}/nights/new/").content.decode()
    assert 'for=""' not in page, "no label points at nothing"
    fieldset = re.search(r"<fieldset([^>]*)>\s*<legend>([^<]*)</legend>(.*?)</fieldset>", page, flags=re.S)
    assert fieldset, "the telescope's radio buttons are grouped under a legend"
    attributes, legend, inside = fieldset.groups()
    assert html.unescape(legend) == "Telescope: whose night is this?"
    radios = re.findall(r'<input type="radio" name="telescope"', inside)
    assert len(radios) == 3  # the whole site, T1, T2
    assert 'aria-describedby="id_telescope_helptext"' in attributes
    assert 'id="id_telescope_helptext"' in inside
    # A choice left out: its problem describes the group too.
    refused = client.post(f"/sites/{in_use.slug}/nights/new/", {"night": "2026-01-01", "open_hours": "5"})
    attributes = re.search(r"<fieldset([^>]*)>", refused.content.decode()).group(1)
    assert 'aria-describedby="id_telescope_helptext id_telescope_error"' in attributes


def test_each_correct_link_of_the_nightly_log_names_its_night(in_use, users, client):
    telescope = in_use.telescopes.get()
    night = NightUsage.objects.filter(site=in_use).order_by("-night").first().night
    NightUsage.objects.create(site=in_use, telescope=telescope, night=night, open_hours=5)
    client.force_login(users["technician"])
    page = client.get(f"/sites/{in_use.slug}/nights/").content.decode()
    names = [html.unescape(n) for n in re.findall(r'<a aria-label="([^"]*)" href="[^"]*">correct</a>', page)]
    assert len(names) == page.count(">correct</a>") == 4  # three nights of the whole site, one of T1
    assert f"correct the night of {night:%a %d %b %Y} (T1)" in names
    assert f"correct the night of {night:%a %d %b %Y} (whole site)" in names
    assert f"correct the night of {night - dt.timedelta(days=1):%a %d %b %Y} (whole site)" in names
    assert all(name.startswith("correct ") for name in names), "the visible word begins the name (SC 2.5.3)"


def test_the_parts_pages_csv_dates_have_labels(in_use, users, client):
    client.force_login(users["viewer"])
    page = client.get(f"/sites/{in_use.slug}/parts/").content.decode()
    form = re.search(r'<form[^>]*id="parts-used-csv">(.*?)</form>', page, flags=re.S).group(1)
    dates = re.findall(r'<input type="date"[^>]*>', form)
    assert len(dates) == 2
    for date in dates:
        field_id = re.search(r'id="([^"]+)"', date).group(1)
        label = re.search(rf'<label for="{field_id}">(.*?)</label>', form, flags=re.S)
        assert label, f"the date field {field_id} has a label"
        assert re.sub(r"<[^>]+>", "", label.group(1)).startswith("Parts used, ")
