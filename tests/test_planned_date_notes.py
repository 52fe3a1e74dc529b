"""What the edit of a work order says after a planned date is saved (workorders.selectors.planned_date_notes): a
date before the site's today (kept: work done from paper is entered afterwards), a day the crew does not work, and a
recoat phase moved out of the order its phases are started in (tests/test_recoat_phase_order.py). A reviewer saved a
removal after its reinstall and a draft dated last year with nothing but "Saved."."""
from __future__ import annotations

import datetime as dt

from django.contrib.messages import get_messages
from test_recoat_phase_order import mirror, recoat  # noqa: F401  (fixtures, used by name)

from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import CrewDayOff


def _edit(client, order, planned: dt.date):
    url = f"/workorders/{order.pk}/edit/"
    form = client.get(url).context["form"]
    data = {name: ("" if value is None else value) for name, value in form.initial.items() if name in form.fields}
    response = client.post(url, {**data, "planned_date": planned.isoformat()})
    assert response.status_code == 302
    order.refresh_from_db()
    assert order.planned_date == planned  # kept, whatever is said
    return [str(m) for m in get_messages(response.wsgi_request)]


def _working_day(site, day: dt.date, step: int = 1) -> dt.date:
    """``day``, or the crew's nearest working day after it (before it with ``step`` -1)."""
    while day.isoweekday() not in site.crew_days:
        day += dt.timedelta(days=step)
    return day


def test_a_removal_moved_after_its_reinstall_is_said_so(recoat, users, client):  # noqa: F811
    removal, reinstall = recoat["removal"], recoat["reinstall"]
    client.force_login(users["engineer"])
    later = _working_day(removal.site, reinstall.planned_date + dt.timedelta(days=10))
    said = _edit(client, removal, later)
    assert said[0] == "Saved."
    coating = recoat["coating"]
    assert [note for note in said if "the phases are started in their order" in note] == [
        f"This removal is now planned after the strip and coat that follows it ({coating.number}, planned "
        f"{coating.planned_date:%d %b %Y}): the phases are started in their order, and the recoat's days out of "
        "service (the dashboard, the forecasts) run from its first order's date to its last's. Give the phases dates "
        "in their order."
    ]
    # The reinstall, moved before the strip and coat it follows, is said so from its side.
    said = _edit(client, reinstall, _working_day(reinstall.site, coating.planned_date - dt.timedelta(days=1), -1))
    assert any(note.startswith("This reinstall is now planned before the strip and coat it follows") for note in said)


def test_a_past_date_and_a_crew_day_off_are_said_and_kept(recoat, users, client):  # noqa: F811
    removal = recoat["removal"]
    site = removal.site
    client.force_login(users["engineer"])
    past = site_today(site) - dt.timedelta(days=12)
    said = _edit(client, removal, past)
    assert (f"The planned date, {past:%d %b %Y}, is 12 days before today at the site: if the work is still to be "
            "done, give the day it will be done.") in said
    # A working day other than the one just saved (saved again unchanged, the edit says nothing): the day after, or
    # the next working day (the test failed on a day when twelve days back was itself a working day).
    off = _working_day(site, removal.planned_date + dt.timedelta(days=1))
    CrewDayOff.objects.create(site=site, date=off, note="site closed")
    said = _edit(client, removal, off)
    assert f"{off:%a %d %b %Y} is listed as a crew day off (site closed)." in said
