"""A plan stored before the catalogue's steps were revised keeps its own steps, and its work orders are drafted from
them: the day's safety review rewrote the brake, AC, recoat and lockout wording, which an installation's existing
plans would never get. The subsystem page says where a plan's steps differ from its catalogue plan's present ones,
shows them, and lets an engineer take them (the plan's history keeps the earlier ones)."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.planning.selectors import catalogue_revision
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


@pytest.fixture
def brake(telescope):
    return subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=dt.date(2026, 1, 1))


def test_a_plan_with_older_steps_is_pointed_out_and_an_engineer_takes_the_present_ones(brake, users, client):
    plan = brake.plans.first()
    assert catalogue_revision(plan) is None  # made from the catalogue as it is
    template = next(t for t in KINDS["brake"].plans if t.name == plan.name)
    older = "\n".join(step for step in template.after_isolation if "pin" not in step.lower())
    plan.steps = older  # as stored before the pad-change steps with the axis pinned were added
    plan.save()
    assert catalogue_revision(plan) == template

    client.force_login(users["technician"])
    page = client.get(brake.get_absolute_url()).content.decode()
    assert f'id="plan-{plan.pk}-revised"' in page and "Take the catalogue" not in page  # an engineer's to take
    assert client.post(f"/plans/{plan.pk}/catalogue-steps/").status_code in (302, 403)
    plan.refresh_from_db()
    assert plan.steps == older

    client.force_login(users["engineer"])
    assert "Take the catalogue's present steps" in client.get(brake.get_absolute_url()).content.decode()
    response = client.post(f"/plans/{plan.pk}/catalogue-steps/")
    assert response.status_code == 302 and response["Location"].endswith(f"#plan-{plan.pk}")
    plan.refresh_from_db()
    assert plan.steps == template.stored_steps["steps"] and catalogue_revision(plan) is None
    assert plan.history.first().history_change_reason == "steps taken from the catalogue's present wording"
    assert plan.history.all()[1].steps == older  # the history keeps the earlier steps
    assert f'id="plan-{plan.pk}-revised"' not in client.get(brake.get_absolute_url()).content.decode()


def test_a_plan_of_its_sites_own_is_compared_with_nothing(brake):
    plan = brake.plans.first()
    plan.name, plan.steps = "Our own brake check", "Look at it."
    plan.save()
    assert catalogue_revision(plan) is None
