"""Pages that a screen reader, a keyboard, a phone and low vision can use (WCAG 2.1 level AA, from a tablet and phone
review): form problems tied to their fields and named in the title, a skip link, due-list ticks with names of their
own and the sorted column marked, charts described by the words that carry their figures, the recoat calendar's
figures reachable without a mouse, withdrawn records tinted rather than faded, and colours with enough contrast.

Outside sources: WCAG 2.1 (W3C Recommendation, 2018): SC 1.4.3 (text 4.5:1), SC 1.4.11 (parts of a control 3:1),
SC 2.4.1 (bypass blocks), SC 3.3.1 (error identification); the contrast ratio and relative luminance are WCAG 2.1's
definitions (sRGB, 0.03928 threshold), computed below by hand. WAI-ARIA 1.2 for aria-sort and aria-describedby.
The browser checks of the same pages (layout at 390, 800 and 1280 px, touch targets, print, sending offline) are in
tests/browser/test_e2e_phone_and_offline.py.
"""
from __future__ import annotations

import datetime as dt
import html
import re
from pathlib import Path

import pytest
from conftest import site_in_use
from crew_calendar import mirror_under_a_flat_sky
from django.utils import timezone

import observatory_ops
from observatory_ops.logbook import services as logbook
from observatory_ops.logbook.models import Reading
from observatory_ops.mirrors.models import Mirror, ReflectanceMeasurement
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem, Telescope
from observatory_ops.registry.services import subsystem_create

CSS = Path(observatory_ops.__file__).parent / "static" / "observatory_ops" / "site.css"


# --- WCAG 2.1 contrast ratio, by its definition -------------------------------------------------------------------

def _luminance(colour: str) -> float:
    """Relative luminance of an sRGB colour "#rrggbb" (WCAG 2.1, definition of relative luminance)."""
    channels = [int(colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    linear = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]


def contrast(a: str, b: str) -> float:
    """(L1 + 0.05) / (L2 + 0.05), the lighter over the darker (WCAG 2.1, definition of contrast ratio)."""
    light, dark = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (light + 0.05) / (dark + 0.05)


def over(colour: str, alpha: float, background: str) -> str:
    """``colour`` at ``alpha`` laid over ``background`` (source-over compositing), as the screen shows it."""
    mixed = [round(int(colour[i:i + 2], 16) * alpha + int(background[i:i + 2], 16) * (1 - alpha)) for i in (1, 3, 5)]
    return "#" + "".join(f"{c:02x}" for c in mixed)


def test_the_contrast_formula_gives_the_known_extremes():
    # WCAG 2.1: black on white is 21:1, a colour on itself 1:1.
    assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert contrast("#5b6975", "#5b6975") == pytest.approx(1.0)


def _css_variable(name: str) -> str:
    return re.search(rf"--{name}:\s*(#[0-9a-f]{{6}})", CSS.read_text()).group(1)


def test_the_stylesheets_colours_reach_aa_contrast():
    white = "#ffffff"
    # The "due" badge: white words on --due (was #a86a00, 4.44:1).
    assert contrast(white, _css_variable("due")) >= 4.5
    # The role pill: white words on black at 25 % over the top bar's --accent (was white at 20 %, 4.39:1).
    assert "background:rgba(0,0,0,.25)" in re.search(r"\.role \{([^}]*)\}", CSS.read_text()).group(1)
    assert contrast(white, over("#000000", 0.25, _css_variable("accent"))) >= 4.5
    # The edge of a field on a white panel: a part of a control, 3:1 (was --line #d5dbe0, 1.40:1).
    field_rule = re.search(r"input, select, textarea, button \{([^}]*)\}", CSS.read_text()).group(1)
    assert "border:1px solid var(--field)" in field_rule
    assert contrast(_css_variable("field"), white) >= 3.0
    # The muted words of a withdrawn row's note on its tint: text, 4.5:1.
    tint = re.search(r"tr\.withdrawn > td \{ background:(#[0-9a-f]{6}); \}", CSS.read_text()).group(1)
    assert contrast(_css_variable("muted"), tint) >= 4.5
    assert contrast(_css_variable("accent"), tint) >= 4.5  # its links


# --- Fixtures -----------------------------------------------------------------------------------------------------

@pytest.fixture
def fans(telescope) -> Subsystem:
    return subsystem_create(telescope, "cooling_fans", "Tube fans", counting_from=dt.date(2026, 1, 1))


@pytest.fixture
def due_at_two_telescopes(db):
    """A site in use with the same catalogue plans on two telescopes: the due list shows each plan twice."""
    site = site_in_use("two-scopes", kinds=("cooling_fans",))
    second = Telescope.objects.create(site=site, name="T2", aperture_m=0.4, mount="fork")
    subsystem_create(second, "cooling_fans", "Cooling fans", counting_from=site_today(site) - dt.timedelta(100))
    site_recompute(site)
    return site


def _title(page: str) -> str:
    return html.unescape(re.search(r"<title>(.*?)</title>", page, flags=re.S).group(1)).strip()


# --- Forms: problems by their field, named in the title, listed first -----------------------------------------------

def test_a_reading_beyond_what_is_plausible_is_refused_beside_its_value_field(fans, users, client):
    client.force_login(users["technician"])
    response = client.post(f"/subsystems/{fans.pk}/readings/new/", {
        "quantity": "fan_current_a", "value": "500", "taken_at": timezone.localtime().strftime("%Y-%m-%dT%H:%M"),
    })
    page = response.content.decode()
    assert response.status_code == 200 and not Reading.objects.exists()
    # logbook.quantities.PLAUSIBLE_RANGE: a fan current is at most 50 A.
    assert response.context["form"].errors["value"] == [
        "Fan current cannot be above 50 A (got 500); a larger reading is not plausible."
    ]
    assert not response.context["form"].non_field_errors()
    assert re.search(r'<input type="text" name="value"[^>]*aria-invalid="true"[^>]*aria-describedby="id_value_error"',
                     page)
    assert _title(page).startswith("Error: Log a reading")


def test_a_page_whose_form_has_problems_says_error_first_in_its_title_and_lists_them_first(fans, users, client):
    client.force_login(users["technician"])
    url = f"/subsystems/{fans.pk}/service/new/"
    assert not _title(client.get(url).content.decode()).startswith("Error")
    assert 'id="error-summary"' not in client.get(url).content.decode()

    page = client.post(url, {"performed_on": "2099-01-01", "summary": "Filters changed"}).content.decode()
    assert _title(page) == "Error: Log service: T1 Tube fans · observatory_ops"
    summary = re.search(r'<div class="error-summary" id="error-summary" tabindex="-1"(.*?)</div>', page, flags=re.S)
    assert summary, "the problems are listed in a box the focus can be moved to"
    assert summary.start() < page.index("<h1>"), "the list comes before the page's heading"
    assert '<a href="#id_performed_on">Performed on</a>: The service date cannot be in the future.' in summary.group(1)


def test_the_service_form_opened_from_a_plan_starts_with_the_plan_chosen_and_its_name_as_summary(fans, users, client):
    client.force_login(users["technician"])
    plan = fans.plans.get(name="Replace fan filters")
    form = client.get(f"/subsystems/{fans.pk}/service/new/", {"plan": plan.pk}).context["form"]
    assert form["plan"].value() == plan.pk and form["summary"].value() == "Replace fan filters"
    # Nothing chosen for a plan that is not this subsystem's, or for a word in place of a number.
    other = subsystem_create(fans.telescope, "cooling_fans", "Other fans", counting_from=dt.date(2026, 1, 1))
    for given in (other.plans.first().pk, "filters"):
        form = client.get(f"/subsystems/{fans.pk}/service/new/", {"plan": given}).context["form"]
        assert form["plan"].value() is None and form["summary"].value() is None


def test_the_skip_link_is_the_first_thing_a_keyboard_reaches_and_leads_to_the_page(users, client):
    client.force_login(users["viewer"])
    page = client.get("/due/").content.decode()
    body = page[page.index("<body"):]
    first = re.search(r"<(a|button|input|select|textarea)\b[^>]*>", body).group(0)
    assert first == '<a class="skip-link" href="#main">'
    assert re.search(r'<a class="skip-link" href="#main">Skip to the page</a>', body)
    assert '<main id="main" tabindex="-1">' in body


# --- The due list -------------------------------------------------------------------------------------------------

def test_each_due_list_tick_is_named_by_its_plan_subsystem_telescope_and_site(due_at_two_telescopes, users, client):
    client.force_login(users["technician"])
    page = client.get("/due/").content.decode()
    ticks = re.findall(r'<input type="checkbox" name="plans"[^>]*aria-label="([^"]*)"', page)
    names = [html.unescape(name) for name in ticks]
    assert len(names) == len(set(names)) > 1
    site = due_at_two_telescopes.name
    # site_in_use names each subsystem by its kind: "Cooling fans" on T1, as the second telescope's.
    assert f"tick Replace fan filters: Cooling fans, T2, {site}" in names
    assert f"tick Replace fan filters: Cooling fans, T1, {site}" in names
    # The whole tick cell is the box's label (a bigger target than the 13 px box).
    labelled = re.findall(r'<td role="cell" class="tick"><label><input type="checkbox" name="plans"', page)
    assert len(labelled) == len(names)


def test_the_sorted_due_list_column_says_how_it_is_sorted(due_at_two_telescopes, users, client):
    client.force_login(users["viewer"])
    by_status = client.get("/due/").content.decode()  # planning.tables.DueTable sorts by status unless told
    assert re.findall(r'<th role="columnheader" class="orderable asc" aria-sort="ascending"><a[^>]*>Status</a>',
                      by_status)
    assert by_status.count("aria-sort=") == 1
    by_site = client.get("/due/", {"sort": "-site"}).content.decode()
    assert re.findall(r'aria-sort="descending"><a[^>]*>Site</a>', by_site) and by_site.count("aria-sort=") == 1


def test_each_due_list_cell_carries_its_column_header_for_the_phone_card(due_at_two_telescopes, users, client):
    client.force_login(users["viewer"])
    page = client.get("/due/").content.decode()
    headers = re.findall(r'<th role="columnheader"[^>]*>(?:<a[^>]*>)?([^<]*)', page)
    assert headers == ["", "Status", "Site", "Telescope", "Subsystem", "Service", "Trigger", "Now / limit", "Forecast",
                       "Why"]
    first_row = re.search(r'<tr role="row"><td role="cell" class="tick">(.*?)</tr>', page, flags=re.S).group(1)
    assert re.findall(r'data-label="([^"]*)"', first_row) == headers[2:]


# --- Withdrawn records: tinted and struck, not faded ----------------------------------------------------------------

def test_a_withdrawn_reading_is_struck_through_with_its_note_and_not_faded(fans, users, client):
    reading = logbook.reading_log(fans, "fan_current_a", 0.8, timezone.now() - dt.timedelta(hours=1),
                                  users["technician"])
    logbook.reading_withdraw(reading, users["technician"], "taken on the wrong fan")
    client.force_login(users["viewer"])
    page = client.get(f"/subsystems/{fans.pk}/").content.decode()
    row = re.search(r'<tr class="withdrawn">(.*?)</tr>', page, flags=re.S).group(1)
    assert "<s>0.8 A</s>" in row and "taken on the wrong fan" in row and "withdrawn" in row
    assert "opacity" not in page


def test_a_withdrawn_mirror_measurement_is_struck_through_and_not_faded(telescope, users, client):
    mirror = mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 5)
    measurement = ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=dt.date(2025, 9, 1), value=0.58,
                                                        taken_by=users["technician"])
    client.force_login(users["technician"])
    client.post(f"/measurements/{measurement.pk}/withdraw/", {"reason": "0.58 typed for 0.85"})
    page = client.get(f"/mirrors/{mirror.pk}/").content.decode()
    row = re.search(r'<tr class="withdrawn">(.*?)</tr>', page, flags=re.S).group(1)
    assert "<s>0.5800</s>" in row and "0.58 typed for 0.85" in row
    assert "opacity" not in page


# --- Charts and the recoat calendar, in words -----------------------------------------------------------------------

def _described(page: str) -> list[list[str]]:
    """The ids each chart's aria-describedby names, for every chart on the page."""
    return [ids.split() for ids in re.findall(r'<svg [^>]*role="img"[^>]*aria-describedby="([^"]*)"', page)]


def _text_of(page: str, element_id: str) -> str:
    found = re.search(rf'<(\w+)[^>]* id="{element_id}"[^>]*>(.*?)</\1>', page, flags=re.S)
    assert found, f"aria-describedby names {element_id}, which is not on the page"
    return html.unescape(re.sub(r"<[^>]+>", "", found.group(2)))


def test_each_plans_chart_is_described_by_the_sentence_with_its_figures(users, client):
    site = site_in_use("described", kinds=("cooling_fans",))
    site_recompute(site)
    fans = Subsystem.objects.get(telescope__site=site)
    client.force_login(users["viewer"])
    page = client.get(f"/subsystems/{fans.pk}/").content.decode()
    charts = _described(page)
    assert charts and len(charts) == page.count('role="img"'), "every chart has its words"
    for ids in charts:
        words = " ".join(_text_of(page, element_id) for element_id in ids)
        # The due sentence gives the governing trigger's value now and its limit, in figures.
        assert re.search(r"\d", words) and " of " in words, words


def test_the_mirror_page_lists_the_dust_weighted_hours_of_each_measurement_its_chart_plots(users, client):
    # conftest.site_in_use logs 6 open hours a night at PM10 35 ug/m3; calc/exposure.py weighs an hour by
    # 1 + (35 - 20) / 20 = 1.75 (sensitivity 1), so 10.5 dust-weighted hours a night. By hand: a measurement
    # 12 nights after the coating is at 12 x 10.5 = 126.0 h, one 40 nights after at 420.0 h (30: 315.0 h).
    site = site_in_use("mirror-hours", kinds=("primary_mirror",))
    today = site_today(site)
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    coated_on = today - dt.timedelta(days=50)
    mirror.coatings.create(coated_on=coated_on, metal="al")
    for nights, value in ((12, 0.89), (30, 0.885), (40, 0.88)):
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=coated_on + dt.timedelta(days=nights),
                                              value=value, taken_by=users["technician"])
    ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=coated_on + dt.timedelta(days=20), value=0.9,
                                          wavelength_nm=550, taken_by=users["technician"])
    client.force_login(users["viewer"])
    page = client.get(f"/mirrors/{mirror.pk}/").content.decode()
    table = re.search(r"<h3>Measurements</h3>(.*?)</table>", page, flags=re.S).group(1)
    assert "<th>Dust-weighted open hours since the coating</th>" in table
    rows = {re.search(r"<td>(\d\d \w\w\w \d{4})</td>", row).group(1): row for row in table.split("<tr")[2:]}
    assert "<td>126.0</td>" in rows[f"{coated_on + dt.timedelta(days=12):%d %b %Y}"]
    assert "<td>420.0</td>" in rows[f"{coated_on + dt.timedelta(days=40):%d %b %Y}"]
    assert "not fitted" in rows[f"{coated_on + dt.timedelta(days=20):%d %b %Y}"]  # one wavelength: not a dot
    [ids] = _described(page)
    assert ids == ["decline-words"] and "Least-squares fit" in _text_of(page, "decline-words")


def test_the_recoat_calendar_has_each_nights_figures_in_a_table_as_in_its_tooltip(telescope, users, client,
                                                                                    monkeypatch):
    monkeypatch.setattr("observatory_ops.mirrors.views.site_today", lambda site, now=None: dt.date(2026, 12, 14))
    mirror = mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 62)
    client.force_login(users["engineer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", {"start": "2026-12-14", "horizon_days": "21"}).content.decode()
    titles = [html.unescape(t) for t in re.findall(r'<div class="night[^"]*" style="[^"]*" title="([^"]*)"', page)]
    table = re.search(r'<details class="nights-table">(.*?)</details>', page, flags=re.S).group(1)
    rows = [[html.unescape(re.sub(r"<[^>]+>", "", cell)).strip() for cell in re.findall(r"<td[^>]*>(.*?)</td>",
                                                                                          row, flags=re.S)]
            for row in table.split("<tr>")[2:]]
    assert len(rows) == len(titles) == 21
    for title, (night, cost, moon, crew, made_of) in zip(titles, rows, strict=True):
        assert title.startswith(night.removesuffix("cheapest window") + ": cost " + cost + " h = " + made_of)
        assert f"Moon {moon} lit" in title
        assert crew == ("does not work on Saturdays" if night.startswith("Sat") else
                        "does not work on Sundays" if night.startswith("Sun") else "working day")
    assert sum(row[0].endswith("cheapest window") for row in rows) >= 1


def test_a_technician_sent_to_the_admin_is_told_why_not_shown_a_sign_in_form(users, client):
    """A technician's review: /admin/ sent them to a bare sign-in form while the header still named them."""
    from observatory_ops.access.login import ADMIN_NOT_ALLOWED

    client.force_login(users["technician"])
    response = client.get("/admin/", follow=True)
    assert response.status_code == 403 and ADMIN_NOT_ALLOWED in response.content.decode()
    assert 'name="password"' not in response.content.decode()
    client.logout()
    assert 'name="password"' in client.get("/admin/", follow=True).content.decode()  # signed out: the form
