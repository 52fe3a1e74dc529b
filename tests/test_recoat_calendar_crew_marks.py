"""The recoat planner's "Coming nights" calendar marks the nights the crew is not at work: a crew day off listed for
the site (✕, its note in the night's tooltip) and a weekday the crew does not work (◇), each explained in the
legend, while the nights keep their shading by cost.

References checked against: Python's ``datetime`` (``date.isoweekday``, ``strftime("%A")``) for which dates are
Saturdays and Sundays; hand-worked calendars in the comments (December 2026: Thursday 24, Friday 25). The site, its
days off and its nights are invented, like the demo's end-of-year closure.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from crew_calendar import mirror_under_a_flat_sky

FIRST, HORIZON = dt.date(2026, 12, 14), 21  # Monday 14 December 2026 to Sunday 3 January 2027
CLOSURE = {dt.date(2026, 12, 24): "end-of-year closure", dt.date(2026, 12, 25): "end-of-year closure"}
LEGEND_OFF = "✕ after the date = a crew day off listed for the site (why, in the night's tooltip)."
LEGEND_REST = "◇ after the date = a weekday the crew does not work (Sat, Sun; it works Mon–Fri)."


@pytest.fixture
def mirror(telescope, monkeypatch):
    """A demo-like site: a Monday-to-Friday crew (the default) off for the end-of-year closure, under a sky of 4
    moonless dark hours every night over December and January. The planner's "today" (its search starts no
    earlier) is FIRST."""
    from observatory_ops.registry.models import CrewDayOff

    monkeypatch.setattr("observatory_ops.mirrors.views.site_today", lambda site, now=None: FIRST)

    for day, note in CLOSURE.items():
        CrewDayOff.objects.create(site=telescope.site, date=day, note=note)
    return mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 62)


def _planner(client, mirror) -> str:
    return client.get(f"/mirrors/{mirror.pk}/recoat/",
                      {"start": FIRST.isoformat(), "horizon_days": str(HORIZON)}).content.decode()


def _cells(page: str) -> dict[dt.date, dict[str, str]]:
    """Each calendar night by its date: its classes, shading, tooltip and what its date label shows."""
    found = re.findall(r'<div class="night([^"]*)" style="background: ([^"]*)" title="([^"]*)">\s*'
                       r'<span class="day">(.*?)</span><span class="moon">', page, flags=re.S)
    cells = {}
    for classes, background, title, label in found:
        title = html.unescape(title)
        day = dt.datetime.strptime(title.split(":")[0], "%a %d %b %Y").date()
        cells[day] = {"classes": classes, "background": background, "title": title, "label": label}
    return cells


def _legend(page: str) -> str:
    legend = re.search(r'<p class="muted">(Darker = .*?)</p>', page, flags=re.S).group(1)
    return html.unescape(legend)


def test_the_calendar_marks_crew_days_off_with_their_note_and_the_weekend(mirror, users, client) -> None:
    client.force_login(users["viewer"])
    page = _planner(client, mirror)
    cells = _cells(page)
    assert len(cells) == HORIZON
    for day, note in CLOSURE.items():  # Thursday 24 and Friday 25 December 2026
        assert 'class="crew-off">✕</span>' in cells[day]["label"]
        assert f"crew day off: {note}, no crew work at the telescope" in cells[day]["title"]
        assert "crew-rest" not in cells[day]["label"]
    weekend = [day for day in cells if day.isoweekday() in (6, 7)]
    assert len(weekend) == 6  # Sat 19, Sun 20, Sat 26, Sun 27 December, Sat 2, Sun 3 January
    for day in weekend:
        assert 'class="crew-rest">◇</span>' in cells[day]["label"]
        assert f"the crew does not work on {day:%A}s (it works Mon–Fri)" in cells[day]["title"]
    legend = _legend(page)
    assert LEGEND_OFF in legend and LEGEND_REST in legend


def test_working_days_carry_no_crew_mark(mirror, users, client) -> None:
    client.force_login(users["viewer"])
    cells = _cells(_planner(client, mirror))
    working = [day for day in cells if day.isoweekday() <= 5 and day not in CLOSURE]
    assert len(working) == HORIZON - 6 - 2
    for day in working:
        assert "crew-off" not in cells[day]["label"] and "crew-rest" not in cells[day]["label"]
        assert "crew" not in cells[day]["title"]


def test_marked_nights_keep_their_shading_by_cost(mirror, users, client) -> None:
    # Every night costs the same under the flat sky, so every night is shaded as the costliest: the marks add to
    # the shading, they do not replace it.
    client.force_login(users["viewer"])
    cells = _cells(_planner(client, mirror))
    assert {cell["background"] for cell in cells.values()} == {"rgba(46,93,122,1.00)"}
    assert "cost 2.0 h" in cells[dt.date(2026, 12, 25)]["title"]  # 4 moonless dark h x the prior 50 % open


def test_a_crew_at_work_every_day_without_days_off_gets_no_marks_nor_legend_lines(mirror, users, client) -> None:
    from observatory_ops.registry.models import CrewDayOff

    site = mirror.subsystem.telescope.site
    site.crew_weekdays = "1234567"
    site.save()
    CrewDayOff.objects.filter(site=site).delete()
    client.force_login(users["viewer"])
    page = _planner(client, mirror)
    assert all("crew" not in cell["label"] + cell["title"] for cell in _cells(page).values())
    legend = _legend(page)
    assert "✕" not in legend and "◇" not in legend


def test_a_day_off_outside_the_horizon_adds_no_legend_line(mirror, users, client) -> None:
    client.force_login(users["viewer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", {"start": "2027-01-04", "horizon_days": "14"}).content.decode()
    assert not any("crew-off" in cell["label"] for cell in _cells(page).values())
    legend = _legend(page)
    assert "✕" not in legend and LEGEND_REST in legend


def test_the_first_of_a_month_shows_its_day_and_month_beside_the_crew_mark(mirror, users, client) -> None:
    """1 January 2027 (a Friday) made a crew day off: its label reads "1 Jan ✕", the day number kept (it used to be
    replaced by the month, "Jan ✕"); the days around it show their number alone."""
    from observatory_ops.registry.models import CrewDayOff

    CrewDayOff.objects.create(site=mirror.subsystem.telescope.site, date=dt.date(2027, 1, 1), note="new year")
    client.force_login(users["viewer"])
    cells = _cells(_planner(client, mirror))
    assert cells[dt.date(2027, 1, 1)]["label"] == '1 Jan <span class="crew-off">✕</span>'
    assert cells[dt.date(2026, 12, 31)]["label"] == "31"
    assert cells[dt.date(2027, 1, 2)]["label"] == '2 <span class="crew-rest">◇</span>'  # a Saturday
