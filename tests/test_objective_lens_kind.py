"""A refractor's objective lens is a kind of its own in the catalogue.

A reviewer setting up a site with a small refractor found no kind for its objective: "Other" brings no plans and no
optical-surface caution, and "Primary mirror" brings a recoat plan and lifting figures that are wrong for a lens. The
kind "Objective lens (refractor)" brings an inspection of the objective's outer surface, cleaned only when needed
(dust blown off first, then lens tissue with cleaning fluid, never wiped dry), and a check of its dew heater and dew
shield. Its intervals are common practice, no published source, and say so; it is no mirror: no mirror record, no
recoat line, no place in the optical train the recoat planner reads. The order of the cleaning steps is common
practice, no published source (the optical-surface caution defers to the optic maker's instructions).
"""
from __future__ import annotations

import datetime as dt

import pytest
from conftest import site_in_use
from django.core.exceptions import ValidationError

from observatory_ops.mirrors.forms import MirrorAdminForm
from observatory_ops.mirrors.models import TRAIN_KINDS, Mirror
from observatory_ops.mirrors.services import telescope_mirrors
from observatory_ops.planning import metrics
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.selectors import plans_not_computed
from observatory_ops.planning.services import site_recompute
from observatory_ops.registry.catalogue import COMMON_PRACTICE, KIND_CHOICES, KINDS, RELEASE
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import services as workorders
from observatory_ops.workorders.cautions import HAZARDS

CODE = "objective_lens"
START = dt.date(2026, 1, 1)


def _plan(word: str):
    (plan,) = [plan for plan in KINDS[CODE].plans if word in plan.name.lower()]
    return plan


# --- the catalogue ---------------------------------------------------------------------------------------------------


def test_the_kind_is_offered_with_its_label():
    kind = KINDS[CODE]
    assert kind.label == "Objective lens (refractor)"
    assert (CODE, kind.label) in KIND_CHOICES
    assert (CODE, kind.label) in Subsystem._meta.get_field("kind").choices
    assert kind.moves == "telescope"  # at the front of a tube that can move


def test_its_hazards_include_the_optical_surface_the_dew_heaters_supply_and_the_moving_telescope():
    kind = KINDS[CODE]
    assert {"optical_surface", "electrical", "moving_machinery"} <= set(kind.hazards)
    assert set(kind.hazards) | {h for plan in kind.plans for h in plan.hazards} <= set(HAZARDS)
    # Reached from a step ladder, and cleaned with a fluid: the tasks' own hazards.
    assert {"chemical", "height"} <= set(_plan("inspect").hazards)
    assert "height" in _plan("dew").hazards


def test_its_plans_have_triggers_steps_and_say_their_intervals_are_common_practice():
    plans = KINDS[CODE].plans
    assert [plan.name for plan in plans] == [
        "Inspect objective, clean only if needed", "Check dew heater, its cable and the dew shield",
    ]
    for plan in plans:
        assert plan.triggers and plan.before_isolation and plan.after_isolation, plan.name
        assert plan.restore[0] == RELEASE, plan.name
        assert plan.basis == COMMON_PRACTICE, plan.name  # "common practice, no published source": no citation
        for metric, limit, *_quantity in plan.triggers:
            assert metric in metrics.METRICS and 0 < limit <= metrics.MAX_LIMIT[metric][0], (plan.name, metric)
    cleaning = _plan("inspect")
    assert {t[0] for t in cleaning.triggers} == {metrics.CALENDAR_DAYS, metrics.DUST_HOURS}
    assert cleaning.dust_sensitivity > 0  # the dust-weighted hours count the dust on the glass
    assert {t[0] for t in _plan("dew").triggers} == {metrics.CALENDAR_DAYS, metrics.OPEN_HOURS}


def test_the_objective_is_looked_at_first_and_cleaned_only_if_needed_dust_blown_off_before_any_tissue():
    steps = _plan("inspect").after_isolation
    look = next(i for i, step in enumerate(steps) if "flashlight" in step)
    fungus = next(i for i, step in enumerate(steps) if step.startswith("If there is fungus"))
    blow = next(i for i, step in enumerate(steps) if "hand blower" in step)
    tissue = next(i for i, step in enumerate(steps) if "lens tissue" in step)
    assert look < fungus < blow < tissue
    assert steps[blow].startswith("Clean only if")
    assert "Never wipe the glass dry" in steps[tissue] and "cleaning fluid" in steps[tissue]
    assert "do not clean" in steps[fungus]


def test_the_dew_heater_check_records_its_voltage_and_tests_for_absence_of_voltage_before_touching():
    plan = _plan("dew")
    assert [q for q, _limit in plan.readings] == ["supply_voltage_v"]
    assert plan.after_isolation[0].startswith("Test for absence of voltage")
    assert any("dew shield" in step for step in plan.after_isolation)


def test_it_is_no_mirror_and_brings_no_recoat_or_lifting():
    assert CODE not in TRAIN_KINDS
    for plan in KINDS[CODE].plans:
        assert metrics.RECOAT_LINE not in {t[0] for t in plan.triggers}, plan.name
        assert "suspended_load" not in plan.hazards, plan.name
        assert not any("recoat" in text.lower() or "lift plan" in text.lower()
                       for text in (plan.name, plan.task, *plan.steps, *plan.tools)), plan.name
    assert "suspended_load" not in KINDS[CODE].hazards


# --- in use ----------------------------------------------------------------------------------------------------------


@pytest.mark.django_db
def test_every_plan_of_it_gets_a_due_state_on_a_site_in_use():
    site = site_in_use("refractor-hill", kinds=(CODE,))
    plans = ServicePlan.objects.filter(subsystem__telescope__site=site, subsystem__kind=CODE)
    assert sorted(plans.values_list("name", flat=True)) == sorted(plan.name for plan in KINDS[CODE].plans)
    site_recompute(site)
    assert plans_not_computed(site) == []
    assert PlanStatus.objects.filter(site=site, plan__in=plans).count() == plans.count()


@pytest.mark.django_db
def test_it_is_offered_no_mirror_record_recoat_line_or_mirror_page(telescope, users, client):
    objective = subsystem_create(telescope, CODE, "Objective", counting_from=START)
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)

    offered = MirrorAdminForm().fields["subsystem"].queryset
    assert primary in offered and objective not in offered
    trigger = Trigger(plan=objective.plans.first(), metric=metrics.RECOAT_LINE, limit=1)
    with pytest.raises(ValidationError, match="cannot have one"):
        trigger.clean()
    # On a fresh instance: an unsaved mirror record is cached on the subsystem it names, as if it had one.
    with pytest.raises(ValidationError, match="mirror record belongs only to"):
        Mirror(subsystem=Subsystem.objects.get(pk=objective.pk), diameter_mm=100).clean()
    mirrors, missing = telescope_mirrors(telescope)
    assert mirrors == [] and missing == [primary]  # the optical train the recoat planner reads leaves it out

    client.force_login(users["viewer"])
    assert "No mirror record" in client.get(f"/subsystems/{primary.pk}/").content.decode()  # the notice, for a mirror
    page = client.get(f"/subsystems/{objective.pk}/").content.decode()
    assert "No mirror record" not in page and "recoat planning" not in page


@pytest.mark.django_db
def test_an_order_over_both_its_plans_parks_once_and_isolates_once(telescope, users):
    """At the telescope's one service position, as every other kind parks: an order with a fans plan on the same
    telescope parks once too (a position of its own would have asked for two)."""
    objective = subsystem_create(telescope, CODE, "Objective", counting_from=START)
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=START)
    plans = [*objective.plans.all(), fans.plans.get(name="Replace fan filters")]
    steps = workorders.work_order_from_due(plans, users["engineer"]).step_list
    parks = [step for step in steps if step.startswith("Park the telescope")]
    assert len(parks) == 1
    assert steps.count(workorders.LOCKOUT_STEP) == 1
    assert steps.index(parks[0]) < steps.index(workorders.LOCKOUT_STEP)
