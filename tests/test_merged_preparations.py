"""An order over several plans whose steps before the one lockout prepare the telescope for more than one plan's work,
each its own way (workorders.selectors.prepared_apart). A technician's review of the demo's primary and secondary
cleaning: the primary's cover was opened and the tube parked at the horizon, then the cover closed again and the tube
pointed for the secondary, all before one lockout, so the primary's locked-out work could not be done as written. The
page and the paper say to stop rather than move anything under the locks (OSHA 29 CFR 1910.147(d); the rest common
practice, no published source), and issuing asks first."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from conftest import mains_isolator

from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import PREPARED_APART_NOTE
from observatory_ops.workorders.models import State, WorkOrder

pytestmark = pytest.mark.django_db
START = dt.date(2026, 1, 1)


def _cleaning(subsystem):
    return next(p for p in subsystem.plans.all() if "clean" in p.name.lower())


@pytest.fixture
def both(telescope, users):
    mains_isolator(telescope)
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    secondary = subsystem_create(telescope, "secondary_mirror", "Secondary", counting_from=START)
    plans = [_cleaning(primary), _cleaning(secondary)]
    return services.work_order_from_due(plans, users["engineer"], services.site_today(telescope.site)), plans


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_each_plans_own_preparation_is_found_by_its_label(both):
    order, plans = both
    apart = selectors.prepared_apart(order)
    assert list(apart) == [p.name for p in plans]
    for label, places in apart.items():
        assert all(order.step_list[place - 1].startswith(f"[{label}] ") for place in places)
        assert max(places) < order.step_list.index(services.LOCKOUT_STEP) + 1
    note = PREPARED_APART_NOTE.format(n=2, plans="; ".join(p.name for p in plans))
    assert note in selectors.standing_notes(order)


def test_issuing_asks_first_and_the_page_and_paper_say_to_stop_rather_than_move_under_the_locks(both, users, client):
    order, plans = both
    client.force_login(users["engineer"])
    page = _text(client.get(order.get_absolute_url()))
    assert "Throughout this work: The steps before the lockout prepare the telescope for the work of 2 plans" in page
    asked = client.post(f"/workorders/{order.pk}/move/issue/")
    assert asked.status_code == 200 and WorkOrder.objects.get(pk=order.pk).state == State.DRAFT
    text = _text(asked)
    assert (f"{order.number} merges the work of 2 plans under one lockout, and each prepares the telescope its own "
            "way") in text
    assert "Issue as written?" in text and "Edit the steps" in text
    response = client.post(f"/workorders/{order.pk}/move/issue/", {"asked": "confirmed"})
    assert response.status_code == 302 and WorkOrder.objects.get(pk=order.pk).state == State.ISSUED


def test_an_order_of_one_plan_is_issued_without_the_question(telescope, users, client):
    mains_isolator(telescope)
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    order = services.work_order_from_due([_cleaning(primary)], users["engineer"], services.site_today(telescope.site))
    assert selectors.prepared_apart(order) == {} and selectors.standing_notes(order) == ()
    client.force_login(users["engineer"])
    assert client.post(f"/workorders/{order.pk}/move/issue/").status_code == 302
    assert WorkOrder.objects.get(pk=order.pk).state == State.ISSUED


def test_every_plan_that_prepares_counts_and_each_telescope_is_compared_with_itself(telescope, users):
    """A diff review: the first labelled step of each plan was taken for its records step, so a plan with one
    preparing step (the recoat's "close the cover and park") was left out, and plans on two telescopes were compared
    with each other."""
    from observatory_ops.registry.models import Telescope

    mains_isolator(telescope)
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    secondary = subsystem_create(telescope, "secondary_mirror", "Secondary", counting_from=START)
    recoat = next(p for p in primary.plans.all() if "recoat" in p.name.lower())
    plans = [_cleaning(primary), recoat, _cleaning(secondary)]
    order = services.work_order_from_due(plans, users["engineer"], services.site_today(telescope.site))
    apart = selectors.prepared_apart(order)
    assert len(apart) == 3
    assert not any(order.step_list[place - 1].endswith("Read the last service record and open faults for this "
                                                       "subsystem.") for places in apart.values() for place in places)
    other = Telescope.objects.create(site=telescope.site, name="T2", aperture_m=0.3, mount="fork")
    mains_isolator(other)
    elsewhere = subsystem_create(other, "primary_mirror", "Primary", counting_from=START)
    order = services.work_order_from_due([_cleaning(primary), _cleaning(elsewhere)], users["engineer"],
                                         services.site_today(telescope.site))
    assert selectors.prepared_apart(order) == {}  # one plan a telescope: nothing to clash
