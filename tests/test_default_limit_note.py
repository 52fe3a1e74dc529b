"""A condition trigger whose limit is still the catalogue's default (a figure of the trade, not this equipment's)
says so on the subsystem page, with the way to where an engineer sets the equipment's own figure."""
from __future__ import annotations

import datetime as dt
import re

import pytest
from conftest import site_in_use
from django.utils.html import strip_tags

from observatory_ops.calc.trend import SETTLE_TIME_LIMIT_S
from observatory_ops.planning import metrics, selectors
from observatory_ops.planning.models import ServicePlan, Trigger
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Subsystem

NOTE = (
    "Settle time after a slew: limit is the catalogue's default (1 s, common practice, no published source); set "
    "this mount's own figure from its maker's data or its commissioning tests."
)


@pytest.fixture
def drive(db):
    site = site_in_use("default-limits", kinds=("axis1_drive", "servo_drives"))
    return Subsystem.objects.get(telescope__site=site, kind="axis1_drive")


def _settle_trigger(drive) -> Trigger:
    return Trigger.objects.get(plan__subsystem=drive, metric=metrics.READING, quantity="settle_time_s")


def _page(client, subsystem) -> tuple[str, str]:
    response = client.get(subsystem.get_absolute_url())
    assert response.status_code == 200
    html = response.content.decode()
    return html, re.sub(r"\s+", " ", strip_tags(html)).replace("&#x27;", "'")


def test_the_catalogue_default_settle_time_limit_is_1_s_common_practice():
    # calc.trend: a well-tuned direct-drive mount settles within about 1 s (common practice, no published source).
    assert selectors.CATALOGUE_READING_LIMITS == {"settle_time_s": SETTLE_TIME_LIMIT_S} and SETTLE_TIME_LIMIT_S == 1.0


def test_every_catalogue_default_limit_has_one_figure_and_a_stated_source():
    # Every quantity a catalogue condition trigger watches has a single default across the kinds (else "the
    # catalogue's default" would be ambiguous) and a source for the note.
    defaults: dict[str, set[float]] = {}
    for kind in KINDS.values():
        for template in kind.plans:
            for trigger in template.triggers:
                if trigger[0] == metrics.READING:
                    defaults.setdefault(trigger[2], set()).add(trigger[1])
    assert all(len(limits) == 1 for limits in defaults.values()), defaults
    assert set(selectors.DEFAULT_LIMIT_SOURCES) == set(defaults)


def test_an_engineer_sees_the_note_and_a_link_to_change_the_plans_triggers(drive, users, client):
    engineer = users["engineer"]
    engineer.is_staff = True  # engineers who edit the register reach the admin with staff status (README)
    engineer.save()
    client.force_login(engineer)
    html, text = _page(client, drive)
    plan = _settle_trigger(drive).plan
    assert text.count(f"{NOTE} Change the limit") == 1
    assert f'<a class="noprint" href="/admin/planning/serviceplan/{plan.pk}/change/">Change the limit</a>' in html


def test_a_viewer_sees_the_note_and_who_changes_it(drive, users, client):
    client.force_login(users["viewer"])
    html, text = _page(client, drive)
    assert f"{NOTE} An engineer changes it under Register and plans." in text
    assert "/admin/planning/serviceplan/" not in html


def test_the_note_goes_once_the_limit_is_the_mounts_own(drive, users, client):
    trigger = _settle_trigger(drive)
    trigger.limit = 0.8  # the maker's figure, say
    trigger.save()
    client.force_login(users["viewer"])
    assert "catalogue's default" not in _page(client, drive)[1]


def test_a_hand_made_trigger_at_the_default_figure_gets_the_note_too(drive):
    plan = ServicePlan.objects.create(subsystem=drive, name="Settle check after a retune", task="Step test.",
                                      counting_from=dt.date(2026, 1, 1))
    Trigger.objects.create(plan=plan, metric=metrics.READING, quantity="settle_time_s", limit=1.0)
    Trigger.objects.create(plan=plan, metric=metrics.CALENDAR_DAYS, limit=1.0)  # not a condition trigger
    assert selectors.default_limit_notes(plan) == [NOTE]


def test_a_plan_without_condition_triggers_has_no_note(drive):
    servo = Subsystem.objects.get(telescope=drive.telescope, kind="servo_drives")
    # Its plan asks for a settle time on the work order ("the maker's figure") but has no condition trigger.
    assert [selectors.default_limit_notes(plan) for plan in servo.plans.all()] == [[]]
