"""A booked observing run falling on nights of a recoat already planned: the recoat planner keeps a new recoat off
booked nights, but a run booked (or moved) afterwards over a planned recoat's days was flagged nowhere. It is now named
on the dashboard's "Downtime planned", on the mirror's pages and in the admin when the run is saved. And the mirror
page's "Estimate now" says why it has none. Then a tablet review of the mirror pages (the end of this file): the
recoat in hand said on the planner's first visit, the no-estimate words only where a recoat line exists and with what
to do, the run-over-recoat sentences without repeated dates, the planner's booked runs each once by date, and the
measurement message when there is no fit yet. The site, runs and people are invented."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook.models import NightUsage
from observatory_ops.logbook.quantities import reflectance_text
from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning.models import BookedRun
from observatory_ops.planning.services import HORIZON_DAYS, site_recompute
from observatory_ops.registry.models import Site, Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import State
from tests.conftest import constant_sky

TODAY = dt.date(2026, 6, 15)
COATED = TODAY - dt.timedelta(days=60)


@pytest.fixture
def on_today(monkeypatch):
    """Every page and service touched here reads the site's "today" as TODAY."""
    for where in ("observatory_ops.mirrors.services", "observatory_ops.mirrors.views", "observatory_ops.registry.views",
                  "observatory_ops.planning.admin", "observatory_ops.planning.services"):
        monkeypatch.setattr(f"{where}.site_today", lambda site, now=None: TODAY)


@pytest.fixture
def mirror(telescope, users, on_today):
    """A bare-aluminium primary coated 60 days ago, 4 h open every night since, nothing measured yet; the crew works
    every day, so a recoat from a day runs the plain sum of its phases' days (12) from it."""
    site = telescope.site
    site.crew_weekdays = "1234567"
    site.save()
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=COATED + dt.timedelta(days=i), open_hours=4, pm10_ugm3=40) for i in range(60)
    )
    constant_sky(site, TODAY - dt.timedelta(days=366), TODAY + dt.timedelta(days=HORIZON_DAYS + 1))
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=COATED)
    m = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                              material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=m, coated_on=COATED, metal="al")
    return m


@pytest.fixture
def recoat(mirror, users):
    """The primary's recoat planned from 05 Jul 2026: 12 nights, to 16 Jul 2026."""
    plan = services.recoat_plan_create(mirror, dt.date(2026, 7, 5), list(RECOAT_PHASES), 3.5, users["engineer"])
    assert (plan.starts_on, plan.ends_on) == (dt.date(2026, 7, 5), dt.date(2026, 7, 16))
    return plan


@pytest.fixture
def runs(recoat):
    """Runs booked after the recoat was planned: one blocked over its first two nights, one not blocked over its last,
    one just after it, and one at another site on the same nights."""
    site = recoat.mirror.subsystem.telescope.site
    elsewhere = Site.objects.create(name="Other Ridge", slug="other-ridge", latitude_deg=38.0, longitude_deg=-2.0,
                                    elevation_m=900, time_zone="Europe/Madrid")
    return {
        "spectra": BookedRun.objects.create(site=site, title="Spectra campaign", starts_on=dt.date(2026, 7, 3),
                                            ends_on=dt.date(2026, 7, 6)),
        "fill_in": BookedRun.objects.create(site=site, title="Survey fill-in", starts_on=dt.date(2026, 7, 16),
                                            ends_on=dt.date(2026, 7, 20), blocked=False),
        "after": BookedRun.objects.create(site=site, title="Later run", starts_on=dt.date(2026, 7, 17),
                                          ends_on=dt.date(2026, 7, 25)),
        "elsewhere": BookedRun.objects.create(site=elsewhere, title="Ridge run", starts_on=dt.date(2026, 7, 5),
                                              ends_on=dt.date(2026, 7, 16)),
    }


def _nights(first: dt.date, last: dt.date) -> set[dt.date]:
    return {first + dt.timedelta(days=i) for i in range((last - first).days + 1)}


def _shared(plan, run, today) -> list[dt.date]:
    """The nights of both from today on, counted night by night (both ends of each range counted)."""
    return sorted(n for n in _nights(plan.starts_on, plan.ends_on) & _nights(run.starts_on, run.ends_on) if n >= today)


# --- the function ----------------------------------------------------------------------------------------------------


def test_the_runs_falling_on_a_planned_recoat_are_found_with_the_nights_they_share(recoat, runs):
    site = recoat.mirror.subsystem.telescope.site
    found = services.runs_over_recoats(site, TODAY)
    assert [(o.plan, o.run) for o in found] == [(recoat, runs["spectra"]), (recoat, runs["fill_in"])]
    for over in found:  # each against the nights of both counted one by one
        shared = _shared(recoat, over.run, TODAY)
        assert (over.first, over.last, over.nights) == (shared[0], shared[-1], len(shared))
    assert [(o.first, o.last, o.nights) for o in found] == [
        (dt.date(2026, 7, 5), dt.date(2026, 7, 6), 2), (dt.date(2026, 7, 16), dt.date(2026, 7, 16), 1),
    ]


def test_nights_already_past_are_not_held_against_a_recoat_under_way(recoat, runs):
    site = recoat.mirror.subsystem.telescope.site
    on_the_6th = services.runs_over_recoats(site, dt.date(2026, 7, 6))
    assert [(o.run.title, o.first, o.nights) for o in on_the_6th] == [
        ("Spectra campaign", dt.date(2026, 7, 6), 1), ("Survey fill-in", dt.date(2026, 7, 16), 1),
    ]
    assert [o.run.title for o in services.runs_over_recoats(site, dt.date(2026, 7, 7))] == ["Survey fill-in"]
    assert services.runs_over_recoats(site, dt.date(2026, 7, 17)) == []  # the recoat is over


def test_a_stopped_recoat_has_no_run_over_it(recoat, runs):
    recoat.work_orders.update(state=State.WITHDRAWN)
    assert services.runs_over_recoats(recoat.mirror.subsystem.telescope.site, TODAY) == []


def test_four_queries_whatever_the_numbers_of_recoats_and_runs(recoat, runs, users, telescope,
                                                               django_assert_num_queries):
    secondary = Subsystem.objects.create(telescope=telescope, kind="secondary_mirror", name="Secondary")
    other = Mirror.objects.create(subsystem=secondary, diameter_mm=150, thickness_mm=25, material="borosilicate",
                                  cell_mass_kg=3)
    CoatingEvent.objects.create(mirror=other, coated_on=COATED, metal="al")
    second = services.recoat_plan_create(other, dt.date(2026, 7, 18), list(RECOAT_PHASES), 2.0, users["engineer"])
    site = telescope.site
    # The recoats' order states (planning.services.recoats_in_hand), the recoats, their work orders (their nights:
    # recoat_downtime), the runs.
    with django_assert_num_queries(4):
        found = services.runs_over_recoats(site, TODAY)
        words = [o.text for o in found] + [o.plan.mirror.subsystem.telescope.name for o in found]
    assert [(o.plan, o.run.title) for o in found] == [
        (recoat, "Spectra campaign"), (recoat, "Survey fill-in"), (second, "Survey fill-in"), (second, "Later run"),
    ]
    assert len(words) == 8


def test_the_wording_names_the_run_its_dates_and_the_nights_blocked_or_not(recoat, runs):
    spectra, fill_in = services.runs_over_recoats(recoat.mirror.subsystem.telescope.site, TODAY)
    assert spectra.text == (
        "Booked run 'Spectra campaign' (03 Jul 2026 to 06 Jul 2026) falls on 2 nights, 05 Jul 2026 to 06 Jul 2026, of "
        "this recoat: the run is marked as blocking downtime on its nights, so move the run or re-plan the recoat."
    )
    # A run added after the recoat was planned was never priced by the planner: it simply loses the nights.
    assert fill_in.text == (
        "Booked run 'Survey fill-in' (16 Jul 2026 to 20 Jul 2026) falls on 1 night, 16 Jul 2026, of this recoat: the "
        "run is not marked as blocking downtime, so it loses those nights; move the run or re-plan the recoat, unless "
        "losing them is accepted."
    )


# --- the pages -------------------------------------------------------------------------------------------------------


def _cautions(page: str) -> list[str]:
    return [html.unescape(c) for c in re.findall(r'<p class="caution run-over-recoat">(.*?)</p>', page)]


def test_the_dashboard_names_each_run_under_its_recoat(recoat, runs, users, client):
    client.force_login(users["viewer"])
    page = client.get(recoat.mirror.subsystem.telescope.site.get_absolute_url()).content.decode()
    downtime = page[page.index('id="downtime"'):page.index("Spare parts to reorder")]
    assert _cautions(downtime) == [o.text for o in services.runs_over_recoats(recoat.mirror.subsystem.telescope.site,
                                                                               TODAY)]
    assert "Booked run &#x27;Spectra campaign&#x27; (03 Jul 2026 to 06 Jul 2026) falls on 2 nights" in downtime
    BookedRun.objects.filter(pk__in=[runs["spectra"].pk, runs["fill_in"].pk]).delete()
    page = client.get(recoat.mirror.subsystem.telescope.site.get_absolute_url()).content.decode()
    assert _cautions(page) == [] and "out of service 05 Jul 2026 to 16 Jul 2026" in page


def test_the_mirror_page_and_the_recoat_page_name_the_runs_over_the_recoat_in_hand(recoat, runs, users, client):
    client.force_login(users["viewer"])
    mirror = recoat.mirror
    expected = [o.text for o in services.runs_over_recoats(mirror.subsystem.telescope.site, TODAY)]
    detail = client.get(mirror.get_absolute_url()).content.decode()
    plans = detail[detail.index("<h2>Recoat plans</h2>"):detail.index("<h2>Coatings, cleanings")]
    assert _cautions(plans) == expected
    planner = client.get(f"/mirrors/{mirror.pk}/recoat/?start=2026-06-15&horizon_days=40").content.decode()
    in_hand = planner[planner.index('id="recoat-in-hand"'):]
    assert _cautions(in_hand) == expected


def test_saving_a_run_over_a_planned_recoat_in_the_admin_warns_and_saves(recoat, engineer_in_admin):
    site = recoat.mirror.subsystem.telescope.site
    numbers = ", ".join(f"{o.number} (draft)" for o in recoat.work_orders.order_by("pk"))
    response = engineer_in_admin.post("/admin/planning/bookedrun/add/", {
        "site": site.pk, "title": "Comet watch", "starts_on": "2026-07-10", "ends_on": "2026-07-11", "blocked": "on",
    }, follow=True)
    run = BookedRun.objects.get(title="Comet watch")  # saved all the same
    warnings = [str(m) for m in response.context["messages"] if m.level_tag == "warning"]
    # Wholly inside the recoat, so its dates are said once; the subsystem named as its own __str__ names it.
    assert warnings == [
        "Booked run 'Comet watch' (10 Jul 2026 to 11 Jul 2026, 2 nights) falls wholly within the recoat of T1: Primary "
        f"planned 05 Jul 2026 to 16 Jul 2026 with work orders {numbers}: the run is marked as blocking downtime on its "
        "nights, so move the run or re-plan the recoat. The run is saved; to re-plan the recoat, withdraw its work "
        "orders (which stops it) and plan it again on the mirror's recoat page."
    ]
    assert len(numbers.split(", ")) == 4  # removal, strip and coat, reinstall, realignment
    # Moved off the recoat: saved without a word of it.
    response = engineer_in_admin.post(f"/admin/planning/bookedrun/{run.pk}/change/", {
        "site": site.pk, "title": "Comet watch", "starts_on": "2026-07-20", "ends_on": "2026-07-21", "blocked": "on",
    }, follow=True)
    assert [m for m in response.context["messages"] if m.level_tag == "warning"] == []
    run.refresh_from_db()
    assert run.starts_on == dt.date(2026, 7, 20)


# --- the estimate now, or why there is none --------------------------------------------------------------------------


def _estimate_panel(client, mirror) -> str:
    page = client.get(mirror.get_absolute_url()).content.decode()
    return page[page.index("Estimate now"):page.index("Recoat line</div>")]


def test_no_estimate_before_any_measurement_says_why_and_names_the_figure_the_recoat_line_uses(mirror, users,
                                                                                               client):
    state = services.mirror_forecast(mirror, TODAY)
    fresh = reflectance_text(state.fresh_band)
    assert services.no_estimate_text(state) == (
        f"No estimate: no band reflectance measured since the coating of {COATED:%d %b %Y} (no fit yet: need at least "
        "3 readings to fit a decline with uncertainties; got 0). Until a decline is fitted, the recoat-line trigger "
        f"(the subsystem page) uses the computed fresh value, {fresh}. Log a band reflectance measurement after some "
        "observing nights; take each on a different night from the last, with observing (dust exposure) between them."
    )
    client.force_login(users["viewer"])
    panel = _estimate_panel(client, mirror)
    assert "<strong>–</strong>" in panel and 'id="no-estimate"' in panel and "no band reflectance measured" in panel
    # The same figure as the subsystem page's recoat line (planning.services._recoat_line_state), once the site is
    # recomputed with the mirror's record (as the admin that records it does).
    site_recompute(mirror.subsystem.telescope.site)
    assert fresh in client.get(mirror.subsystem.get_absolute_url()).content.decode()


def test_no_estimate_with_too_few_measurements_names_the_last_one(mirror, users, client):
    for days, value in ((10, 0.905), (40, 0.9)):
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=COATED + dt.timedelta(days=days), value=value,
                                              taken_by=users["technician"])
    text = services.no_estimate_text(services.mirror_forecast(mirror, TODAY))
    assert text == (
        f"No estimate: 2 band measurements since the coating of {COATED:%d %b %Y} (no fit yet: need at least 3 "
        "readings to fit a decline with uncertainties; got 2). Until a decline is fitted, the recoat-line trigger (the "
        f"subsystem page) uses the last measurement, 0.9000 on {COATED + dt.timedelta(days=40):%d %b %Y}. Log a band "
        "reflectance measurement after some observing nights; take each on a different night from the last, with "
        "observing (dust exposure) between them."
    )


def test_an_estimate_needs_no_words_and_no_coating_is_said(mirror, users, telescope, client):
    for days, value in ((10, 0.905), (30, 0.902), (50, 0.899)):
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=COATED + dt.timedelta(days=days), value=value,
                                              taken_by=users["technician"])
    state = services.mirror_forecast(mirror, TODAY)
    assert state.current is not None and services.no_estimate_text(state) == ""
    client.force_login(users["viewer"])
    assert 'id="no-estimate"' not in _estimate_panel(client, mirror)
    bare = Mirror.objects.create(subsystem=Subsystem.objects.create(telescope=telescope, kind="secondary_mirror",
                                                                    name="Secondary"),
                                 diameter_mm=150, thickness_mm=25, material="borosilicate")
    assert services.no_estimate_text(services.mirror_forecast(bare, TODAY)).startswith(
        "No estimate: no coating recorded, so there is no fresh value")


# --- the tablet review of the mirror pages ---------------------------------------------------------------------------


def test_the_planner_names_the_recoat_in_hand_and_the_runs_over_it_on_its_first_visit(recoat, runs, users, client):
    """Before "Find windows" is sent (no query string), as after: the notice and each run's caution."""
    client.force_login(users["viewer"])
    mirror = recoat.mirror
    expected = [o.text for o in services.runs_over_recoats(mirror.subsystem.telescope.site, TODAY)]
    first = client.get(f"/mirrors/{mirror.pk}/recoat/").content.decode()
    assert 'id="recoat-in-hand"' in first and "Cheapest windows" not in first
    assert _cautions(first[first.index('id="recoat-in-hand"'):]) == expected and len(expected) == 2
    assert "the windows below are for reading only" not in first  # none listed yet
    sent = client.get(f"/mirrors/{mirror.pk}/recoat/?start=2026-06-15&horizon_days=40").content.decode()
    assert "the windows below are for reading only" in sent and _cautions(sent) == expected


def test_the_planners_first_visit_says_no_recoat_in_hand_when_there_is_none(mirror, users, client):
    client.force_login(users["viewer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/").content.decode()
    assert 'id="recoat-in-hand"' not in page and _cautions(page) == []


def _coated_secondary(telescope) -> Mirror:
    """A secondary registered by hand: no service plan, so no recoat-line trigger."""
    secondary = Subsystem.objects.create(telescope=telescope, kind="secondary_mirror", name="Secondary")
    m = Mirror.objects.create(subsystem=secondary, diameter_mm=150, thickness_mm=25, material="borosilicate")
    CoatingEvent.objects.create(mirror=m, coated_on=COATED, metal="al")
    return m


def test_no_estimate_names_a_recoat_line_trigger_only_where_the_mirror_has_one(mirror, telescope,
                                                                                django_assert_num_queries):
    state = services.mirror_forecast(mirror, TODAY)
    with django_assert_num_queries(1):  # whether the subsystem has an active plan with a recoat-line trigger
        text = services.no_estimate_text(state)
    assert "the recoat-line trigger (the subsystem page) uses the computed fresh value" in text
    assert " counts " not in text
    secondary = services.no_estimate_text(services.mirror_forecast(_coated_secondary(telescope), TODAY))
    assert secondary.startswith("No estimate: no band reflectance measured since the coating")
    assert "recoat-line" not in secondary and "trigger" not in secondary
    # A plan switched off watches nothing either.
    mirror.subsystem.plans.update(active=False)
    assert "recoat-line" not in services.no_estimate_text(services.mirror_forecast(mirror, TODAY))


def test_no_estimate_says_what_to_measure_next_in_plain_words(mirror, users):
    text = services.no_estimate_text(services.mirror_forecast(mirror, TODAY))
    assert text.endswith("Log a band reflectance measurement after some observing nights; take each on a different "
                         "night from the last, with observing (dust exposure) between them.")
    # Three measured on one day: enough of them, but all at one exposure (calc.reflectance's "at least two different
    # exposures"), said as nights with observing between them.
    for value in (0.905, 0.904, 0.906):
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=TODAY - dt.timedelta(days=1), value=value,
                                              taken_by=users["technician"])
    state = services.mirror_forecast(mirror, TODAY)
    assert state.fit_note == "no fit yet: the readings need at least two different exposures"
    assert services.no_estimate_text(state).endswith(
        "The measurements so far were all taken at the same dust exposure: on one night, or with no observing logged "
        "between them. Log the next one on a later night, after some observing nights since the last."
    )


def test_a_run_wholly_within_the_recoat_says_its_dates_once(recoat):
    site = recoat.mirror.subsystem.telescope.site
    BookedRun.objects.create(site=site, title="Occultation", starts_on=dt.date(2026, 7, 8),
                             ends_on=dt.date(2026, 7, 12))
    (over,) = services.runs_over_recoats(site, TODAY)
    assert over.text == (
        "Booked run 'Occultation' (08 Jul 2026 to 12 Jul 2026, 5 nights) falls wholly within this recoat: the run is "
        "marked as blocking downtime on its nights, so move the run or re-plan the recoat."
    )
    # Part of it already past: the nights still to come are not the run's dates, so they are said.
    (later,) = services.runs_over_recoats(site, dt.date(2026, 7, 10))
    assert later.text.startswith(
        "Booked run 'Occultation' (08 Jul 2026 to 12 Jul 2026) falls on 3 nights, 10 Jul 2026 to 12 Jul 2026, of this "
        "recoat:"
    )


def test_a_one_night_run_is_dated_once_and_an_unblocked_one_loses_its_nights(recoat):
    site = recoat.mirror.subsystem.telescope.site
    BookedRun.objects.create(site=site, title="Transit", starts_on=dt.date(2026, 7, 9), ends_on=dt.date(2026, 7, 9),
                             blocked=False)
    (over,) = services.runs_over_recoats(site, TODAY)
    assert over.text == (
        "Booked run 'Transit' (09 Jul 2026) falls wholly within this recoat: the run is not marked as blocking "
        "downtime, so it loses those nights; move the run or re-plan the recoat, unless losing them is accepted."
    )
    assert "to 09 Jul 2026" not in over.text and "weighs" not in over.text and "5 times" not in over.text


def test_the_admin_warning_names_the_subsystem_as_the_site_pages_do(recoat, runs):
    subsystem = recoat.mirror.subsystem
    spectra = services.runs_over_recoats(subsystem.telescope.site, TODAY)[0]
    assert str(subsystem) == "T1: Primary"  # registry.models.Subsystem.__str__, the pages' name
    assert f"of the recoat of {subsystem} planned 05 Jul 2026 to 16 Jul 2026 with work orders " in spectra.admin_text


def test_the_planner_lists_each_booked_run_once_by_its_first_night(mirror, users, client):
    site = mirror.subsystem.telescope.site
    made = [BookedRun.objects.create(site=site, title=title, starts_on=first, ends_on=last) for title, first, last in (
        ("Alpha survey", dt.date(2026, 7, 1), dt.date(2026, 7, 1)),
        ("Zeta campaign", dt.date(2026, 6, 20), dt.date(2026, 6, 22)),
        ("Zeta campaign", dt.date(2026, 6, 25), dt.date(2026, 6, 27)),
        ("Beyond the horizon", dt.date(2026, 9, 1), dt.date(2026, 9, 3)),
    )]
    found = services.recoat_windows(mirror, TODAY, 40, list(RECOAT_PHASES))
    assert found["booked_runs"] == [made[1], made[2], made[0]]  # by start date; the two of one title apart
    client.force_login(users["viewer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/?start=2026-06-15&horizon_days=40").content.decode()
    listed = re.search(r'<p id="booked-runs">(.*?)</p>', page).group(1)
    assert re.sub(r"</?strong>", "", listed) == (
        "Booked observing runs: Zeta campaign (20 Jun to 22 Jun 2026); Zeta campaign (25 Jun to 27 Jun 2026); "
        "Alpha survey (01 Jul 2026)"
    )


def _logged(client, mirror, day: dt.date, value: str) -> str:
    from django.contrib.messages import get_messages

    response = client.post(f"/mirrors/{mirror.pk}/measurements/new/", {"measured_on": day.isoformat(), "value": value})
    assert response.status_code == 302
    return [str(m) for m in get_messages(response.wsgi_request)][-1]  # the earlier ones wait for a page to show them


def test_logging_a_measurement_says_why_there_is_no_fit_yet_until_there_is_one(mirror, users, client):
    client.force_login(users["technician"])
    first = _logged(client, mirror, COATED + dt.timedelta(days=10), "0.905")
    assert first == "Measurement logged. " + services.no_estimate_text(services.mirror_forecast(mirror, TODAY))
    assert first.startswith(
        f"Measurement logged. No estimate: 1 band measurement since the coating of {COATED:%d %b %Y} (no fit yet: need "
        "at least 3 readings to fit a decline with uncertainties; got 1)."
    )
    assert "the decline fit is updated" not in first
    second = _logged(client, mirror, COATED + dt.timedelta(days=30), "0.902")
    assert second.startswith("Measurement logged. No estimate")
    assert _logged(client, mirror, COATED + dt.timedelta(days=50), "0.899") == (
        "Measurement logged; the decline fit is updated."
    )
    # One dated before the coating is kept but never fitted: the decline runs from the coating.
    assert _logged(client, mirror, COATED - dt.timedelta(days=5), "0.86") == (
        f"Measurement logged. It is listed below but not fitted: it predates the coating of {COATED:%d %b %Y}, and the "
        "decline is fitted from that coating on."
    )


def test_a_recoat_without_work_orders_is_named_without_a_list_and_told_how_to_replan(recoat):
    """A recoat plan's work orders are optional (its orders withdrawn and removed, or one entered in the admin): the
    warning wrote "with work orders :" and told to withdraw orders there were none of."""
    site = recoat.mirror.subsystem.telescope.site
    recoat.work_orders.clear()
    BookedRun.objects.create(site=site, title="Occultation", starts_on=dt.date(2026, 7, 8), ends_on=dt.date(2026, 7, 8))
    (over,) = services.runs_over_recoats(site, TODAY)
    assert "(no work orders)" in over.admin_text and "with work orders" not in over.admin_text
    assert over.admin_text.endswith("to re-plan the recoat, delete this recoat plan in the admin (Recoat plans) and "
                                    "plan it again on the mirror's recoat page.")


def test_the_dashboard_reads_the_coming_recoats_once(recoat, runs, users, client, django_assert_max_num_queries):
    """runs_over_recoats takes the recoats the dashboard already read."""
    from django.db.models import prefetch_related_objects

    from observatory_ops.planning.services import recoats_in_hand, site_today

    site = recoat.mirror.subsystem.telescope.site
    plans = recoats_in_hand(site, site_today(site))
    prefetch_related_objects(plans, "work_orders")  # as the dashboard reads them, for their nights
    with django_assert_max_num_queries(1):
        services.runs_over_recoats(site, TODAY, plans)


def test_the_dashboard_names_a_recoat_to_plan_and_the_booked_run_over_its_forecast(mirror, users, client):
    """A manager's review read "No recoat planned" on the dashboard seven weeks before a primary's crossing forecast
    inside a booked campaign: the recoats due or forecast within a year, not planned yet, are listed under it
    (mirrors.services.recoats_to_plan) with the booked runs over their forecast. Here the recoat plan's calendar limit
    is set to 100 days from the coating 60 days ago: forecast 40 days on."""
    [plan] = services.recoat_plans(mirror.subsystem)
    plan.triggers.all().delete()
    plan.triggers.create(metric="calendar_days", limit=100)
    forecast = COATED + dt.timedelta(days=100)
    BookedRun.objects.create(site=mirror.subsystem.telescope.site, title="Nova follow-up",
                             starts_on=forecast - dt.timedelta(days=2), ends_on=forecast + dt.timedelta(days=3))
    BookedRun.objects.create(site=mirror.subsystem.telescope.site, title="Far off", starts_on=forecast +
                             dt.timedelta(days=30), ends_on=forecast + dt.timedelta(days=31))
    site_recompute(mirror.subsystem.telescope.site, TODAY)
    client.force_login(users["viewer"])
    page = " ".join(html.unescape(re.sub(r"<[^>]+>", " ", client.get(
        mirror.subsystem.telescope.site.get_absolute_url()).content.decode())).split())
    assert (f"Recoats to plan T1 Primary: forecast {forecast:%d %b %Y} (Calendar days) inside the booked run "
            f"Nova follow-up ({forecast - dt.timedelta(days=2):%d %b} to {forecast + dt.timedelta(days=3):%d %b %Y}) · "
            "plan the recoat window") in page
    assert "Far off" not in page
