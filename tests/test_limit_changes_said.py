"""A plan's limits changed since its last service are said on the subsystem page, with the day and who changed them
(planning.selectors.limit_changes, from the triggers' history). A forecast review relaxed a safety interlock test from
90 to 120 days in the admin and its "overdue" cleared with nothing said on the plan, then tightened it to 60 days and
the service logged next was recorded as 37 days late: the page now says that its figures, and the lateness of a
service logged next, count against the limits as they stand."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from django.utils import timezone

from observatory_ops.planning.models import Trigger
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_a_limit_changed_since_the_last_service_is_said_with_when_and_who(telescope, users, client):
    site = telescope.site
    today = site_today(site)
    fans = subsystem_create(telescope, "cooling_fans", "Mirror cell fans", counting_from=today - dt.timedelta(days=40))
    plan = fans.plans.first()
    client.force_login(users["viewer"])
    assert "limits changed since" not in _text(client.get(f"/subsystems/{fans.pk}/"))  # made so: no change
    # Made an hour ago: the triggers the plan was made with are its start; those added later, changes.
    Trigger.history.filter(plan_id=plan.pk).update(history_date=timezone.now() - dt.timedelta(hours=1))
    trigger = plan.triggers.first()
    old = trigger.limit
    trigger.limit = old / 2
    trigger._history_user = users["engineer"]
    trigger.save()
    added = Trigger(plan=plan, metric="calendar_days", limit=60)
    added._history_user = users["engineer"]
    added.save()
    site_recompute(site)
    page = _text(client.get(f"/subsystems/{fans.pk}/"))
    assert "This plan's limits changed since it started counting" in page
    assert f"{today:%d %b %Y}, by engineer: " in page
    assert re.search(rf": {old:g} \w+ changed to [^:]+: {old / 2:g} \w+", page), page
    assert "Calendar days: 60 days added" in page
    # What a trigger counts changed, its limit kept (a diff review: a 300-day interval became 300 open hours).
    added.metric = "open_hours"
    added._history_user = users["engineer"]
    added.save()
    assert "Calendar days: 60 days changed to Open-dome hours: 60 h" in _text(client.get(f"/subsystems/{fans.pk}/"))
