"""Dates a work order is given and the words its pages answer with: the day the work was done, bounded by the day
the order was issued (a technician working from the paper presses Start only when entering the work); the planned
date of a new order, so it can be issued without an Edit first; counts worded in the singular or the plural; a
refused number naming its field; and lifting figures that stop an order being issued, said when they are saved.
"""
from __future__ import annotations

import datetime as dt
import html
import re
from zoneinfo import ZoneInfo

import pytest
from django.contrib.messages import get_messages
from test_workorders import _unticked, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import State, WorkOrder


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _message(response) -> str:
    return " ".join(str(m) for m in get_messages(response.wsgi_request))


# --- the day the work was done, from the day the order was issued ---------------------------------------------


def test_work_done_before_the_start_on_the_system_but_after_the_issue_is_accepted(order, users):  # noqa: F811
    """The review's case: printed when issued, done from the paper, started and finished on the system later."""
    services.work_order_move(order, "issue", users["engineer"])
    WorkOrder.objects.filter(pk=order.pk).update(issued_at=order.issued_at - dt.timedelta(days=5))
    order.refresh_from_db()
    services.work_order_move(order, "start", users["technician"])  # today, when the work is entered
    order.refresh_from_db()
    day = site_today(order.site) - dt.timedelta(days=3)
    assert order.started_at.astimezone(order.site.zone).date() > day
    services.work_order_finish(order, users["technician"], 2.0, "from paper",
                               {r.pk: 0.6 for r in order.required_readings.all()},
                               confirmed_unticked=_unticked(order), isolation_answer="isolated", work_done_on=day)
    assert ServiceRecord.objects.get(work_order=order).performed_on == day


def test_the_bound_is_the_local_date_of_the_issue_at_the_site(order, users):  # noqa: F811
    """Issued at 00:30 in Madrid (UTC+1 or +2): the UTC date is the day before, the site's date is the day."""
    services.work_order_move(order, "issue", users["engineer"])
    today = site_today(order.site)
    issued_on = today - dt.timedelta(days=3)
    issued_at = dt.datetime.combine(issued_on, dt.time(0, 30), tzinfo=ZoneInfo("Europe/Madrid"))
    assert issued_at.astimezone(dt.UTC).date() == issued_on - dt.timedelta(days=1)
    WorkOrder.objects.filter(pk=order.pk).update(issued_at=issued_at)
    order.refresh_from_db()
    assert services.work_done_on_problem(order, issued_on, today) == ""
    the_day_before = issued_on - dt.timedelta(days=1)
    assert services.work_done_on_problem(order, the_day_before, today) == (
        f"{the_day_before:%d %b %Y} is before {order.number} was issued ({issued_on:%d %b %Y}), and no work on it "
        "comes before that; enter the day the work was done"
    )


# --- a planned date for a new order ----------------------------------------------------------------------------


@pytest.fixture
def station(telescope):
    """A subsystem with no hazards of its own: its work needs no lockout, so its checklist is its steps."""
    return Subsystem.objects.create(telescope=telescope, kind="other", name="Weather station", no_hazards_found=True)


def _ad_hoc(station, **fields) -> dict:
    return {"title": "Replace the anemometer", "order_type": "corrective", "subsystems": [station.pk],
            "steps": "Replace the anemometer.", "planned_date": site_today(station.telescope.site).isoformat(),
            **fields}


def test_the_ad_hoc_form_offers_the_sites_today_as_the_planned_date(station, site, users, client):
    client.force_login(users["technician"])
    page = client.get(f"/sites/{site.slug}/workorders/new/").content.decode()
    field = re.search(r'<input[^>]*name="planned_date"[^>]*>', page).group(0)
    assert f'value="{site_today(site).isoformat()}"' in field and 'type="date"' in field


def test_an_ad_hoc_order_with_its_planned_date_is_issued_without_an_edit(station, site, users, client):
    client.force_login(users["technician"])
    response = client.post(f"/sites/{site.slug}/workorders/new/", _ad_hoc(station))
    assert response.status_code == 302
    made = WorkOrder.objects.get()
    today = site_today(site)
    assert made.planned_date == today
    assert _message(response) == f"{made.number} drafted, planned for {today:%d %b %Y}."
    assert "issue" not in selectors.moves_held(made)
    services.work_order_move(made, "issue", users["engineer"])
    assert WorkOrder.objects.get().state == State.ISSUED


def test_a_technician_who_drafts_from_the_due_list_is_told_an_engineer_issues_it(drive, users, client):  # noqa: F811
    """A technician may draft an order from the due list but not edit or issue it (an engineer's moves)."""
    client.force_login(users["technician"])
    response = client.post("/workorders/from-due/", {"plans": [p.pk for p in drive.plans.all()]})
    assert _message(response).endswith(
        "An engineer checks its steps and date and issues it; it is listed among the drafts on the work orders page."
    )


def test_an_ad_hoc_order_left_without_a_planned_date_says_it_needs_one(station, site, users, client):
    client.force_login(users["technician"])
    response = client.post(f"/sites/{site.slug}/workorders/new/", _ad_hoc(station, planned_date=""))
    made = WorkOrder.objects.get()
    assert made.planned_date is None
    assert _message(response) == f"{made.number} drafted, with no planned date: set one (Edit) before issuing it."


def test_an_ad_hoc_planned_date_more_than_a_year_back_is_refused_naming_the_field(station, site, users, client):
    today = site_today(site)
    long_ago = today - dt.timedelta(days=400)
    client.force_login(users["technician"])
    response = client.post(f"/sites/{site.slug}/workorders/new/", _ad_hoc(station, planned_date=long_ago.isoformat()))
    assert response.status_code == 200
    assert (f"Planned date: {long_ago:%d %b %Y} is more than a year before today at the site ({today:%d %b %Y}): "
            "enter the date the work is planned for.") in _text(response)
    assert not WorkOrder.objects.exists()


def test_an_ad_hoc_planned_date_a_little_in_the_past_is_kept(station, site, users, client):
    """Work already done from paper is entered afterwards, with the day it was planned for."""
    last_week = site_today(site) - dt.timedelta(days=7)
    client.force_login(users["technician"])
    client.post(f"/sites/{site.slug}/workorders/new/", _ad_hoc(station, planned_date=last_week.isoformat()))
    assert WorkOrder.objects.get().planned_date == last_week


def test_an_order_made_on_the_due_list_is_planned_for_the_sites_today_and_can_be_issued(drive, users, client):  # noqa: F811
    plans = list(drive.plans.all())
    client.force_login(users["engineer"])
    response = client.post("/workorders/from-due/", {"plans": [p.pk for p in plans]})
    made = WorkOrder.objects.get()
    today = site_today(drive.telescope.site)
    assert made.planned_date == today
    items = "1 due item" if len(plans) == 1 else f"{len(plans)} due items"
    assert _message(response).startswith(
        f"{made.number} drafted from {items}, planned for today ({today:%d %b %Y}). Check the steps, change the "
        "planned date if the work is for another day (Edit), then issue it."
    )
    assert "issue" not in selectors.moves_held(made)
    services.work_order_move(made, "issue", users["engineer"])
    assert WorkOrder.objects.get().state == State.ISSUED


# --- words ---------------------------------------------------------------------------------------------------------


def _underway(station, users) -> WorkOrder:
    made = services.work_order_ad_hoc(station.telescope.site, [station], "Replace the anemometer", users["engineer"],
                                      steps="Replace the anemometer.", planned_date=site_today(station.telescope.site))
    services.work_order_move(made, "issue", users["engineer"])
    services.work_order_move(made, "start", users["technician"])
    made.refresh_from_db()
    return made


def test_one_unticked_line_is_counted_in_the_singular(station, users, client):
    made = _underway(station, users)
    assert len(_unticked(made)) == 1
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{made.pk}/finish/", {
        "actual_hours": "1", "findings": "", "work_done_on": site_today(made.site).isoformat(),
        "confirm_unticked": "on", "unticked": _unticked(made),
    })
    assert response.status_code == 302
    message = _message(response)
    assert "1 unticked line confirmed as done or not applicable is on the record." in message
    assert "(s)" not in message
    page = _text(client.get(made.get_absolute_url()))
    assert "Finished with 1 checklist line not ticked;" in page


def test_negative_actual_hours_are_refused_naming_the_field(station, users, client):
    made = _underway(station, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{made.pk}/finish/", {
        "actual_hours": "-1", "findings": "", "work_done_on": site_today(made.site).isoformat(),
        "confirm_unticked": "on", "unticked": _unticked(made),
    })
    assert response.status_code == 200
    assert "Actual hours: enter 0 or more." in _text(response)
    assert "Ensure this value" not in _text(response)
    assert WorkOrder.objects.get(pk=made.pk).state == State.UNDERWAY and not ServiceRecord.objects.exists()


def test_lifting_figures_saved_that_stop_the_issue_say_why(order, users, client):  # noqa: F811
    """Sling leg tension T = W / (n sin a) (ASME B30.9): a 500 mm, 50 mm borosilicate blank (CRC Handbook, 2.23
    g/cm3) of 21.9 kg with a 30 kg cell on two legs at 60 degrees is about 30 kg a leg, above a 10 kg limit."""
    client.force_login(users["engineer"])
    lift = {"diameter_mm": "500", "thickness_mm": "50", "hole_mm": "0", "material": "borosilicate",
            "lightweighting_fraction": "0", "fixture_kg": "30", "legs": "2", "angle_deg": "60", "wll_kg": "10"}
    response = client.post(f"/workorders/{order.pk}/lift/", lift)
    assert response.status_code == 302
    message = _message(response)
    order.refresh_from_db()
    held = selectors.lift_refusal(order)
    assert held.startswith(f"{order.number}'s lifting figures show a leg tension of 30 kg, above the working load "
                           "limit of 10 kg")
    assert message == (
        "Lifting figures saved; the suspended-load caution is on the work order. They stop it being issued or "
        f"started: {held}."
    )
    assert order.lift_inputs["wll_kg"] == 10  # saved all the same, for the engineer to correct


def test_lifting_figures_within_the_limit_are_saved_without_a_warning(order, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    lift = {"diameter_mm": "500", "thickness_mm": "50", "hole_mm": "0", "material": "borosilicate",
            "lightweighting_fraction": "0", "fixture_kg": "30", "legs": "2", "angle_deg": "60", "wll_kg": "500"}
    response = client.post(f"/workorders/{order.pk}/lift/", lift)
    assert _message(response) == "Lifting figures saved; the suspended-load caution is on the work order."
