"""What finishing a work order records, and what the finished order's page and paper then show: the energy isolation
nobody ticked, answered for on its own; the crew; each tick printed once, beside its line; the mirrors' cleaning; and
parts used beyond what the parts register held.

Orders are those of tests/test_workorders.py (an axis drive on a telescope with one AC isolation point, "Mount
isolator"; electrical energy and a moving telescope, so a lockout step) and tests/test_workorder_finish.py (a
primary mirror's CO2-snow clean). Names of people are invented.
"""
from __future__ import annotations

import html
import importlib
import re

import pytest
from conftest import ticked_in_sequence
from test_workorder_finish import (  # noqa: F401  (fixtures, used by name)
    _message,
    _nothing_stored,
    _post,
    _started,
    _text,
    cleaning_order,
    mirror,
)
from test_workorder_pdf import body_text
from test_workorders import ISOLATED, _all_readings, _confirmed, _unticked, drive, order  # noqa: F401

from observatory_ops.mirrors.models import CleaningEvent
from observatory_ops.planning.services import site_today
from observatory_ops.workorders import pdf, selectors, services
from observatory_ops.workorders.cautions import (
    ISOLATION_REVIEW,
    ISOLATION_UNTICKED,
    ISOLATION_UNTICKED_FINDINGS,
    NOT_ISOLATED,
    NOT_NEEDED,
)
from observatory_ops.workorders.models import ChecklistTick, IsolationPoint, Part, PartUse, State, WorkOrder


def _pdf(client, work_order) -> str:
    """The order's paper as text (read back with pypdf), without the page furniture (the page numbers too, which
    come between the two halves of a line broken over a page), whitespace collapsed."""
    text = body_text(client.get(f"/workorders/{work_order.pk}/pdf/").content)
    return " ".join(re.sub(r"\bpage \d+ of \d+\b", " ", text).split())


def _isolation(work_order) -> list[str]:
    return [line.text for line in selectors.isolation_lines(selectors.unticked_lines(work_order))]


# --- 1. an energy isolation nobody ticked is answered for on its own -----------------------------------------
# The isolation comes before the work and the locks come off only after it (OSHA 29 CFR 1910.147(d), (e)): a box
# that says "done or did not apply" for every unticked line would cover it without a word.


def test_the_finish_form_asks_about_the_unticked_isolation_apart_with_no_answer_chosen(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    isolation = html.unescape(page.split('<ul class="unticked isolation">')[1].split("</ul>")[0])
    assert "Isolation point: T1: AC mains: Mount isolator" in isolation and services.LOCKOUT_STEP in isolation
    radios = re.findall(r'<input type="radio" name="isolation_answer"[^>]*>', page)
    assert [re.search(r'value="(\w+)"', r)[1] for r in radios] == list(ISOLATION_UNTICKED)
    assert not any("checked" in r for r in radios)  # no default: the technician says which is true
    for wording in ISOLATION_UNTICKED.values():
        assert wording in html.unescape(page)
    # The box for the other lines no longer speaks for the isolation.
    assert "I confirm the other unticked lines were done or did not apply" in page


def test_the_box_for_the_other_lines_does_not_confirm_the_isolation(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    data = _post(order)
    del data["isolation_answer"]
    response = client.post(f"/workorders/{order.pk}/finish/", data)
    assert response.status_code == 200
    assert "Energy isolation not ticked: say which of these is true, or tick the isolation on the work order page." in (
        _text(response)
    )
    _nothing_stored(order)


def test_an_answer_not_offered_is_refused_naming_the_field(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, isolation_answer="probably"))
    assert "Energy isolation not ticked: choose one of the answers listed." in _text(response)
    _nothing_stored(order)


def test_the_findings_must_say_why_the_isolation_was_not_ticked(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, findings="  "))
    assert response.status_code == 200 and f"Findings: {ISOLATION_UNTICKED_FINDINGS}." in _text(response)
    _nothing_stored(order)


def test_the_service_refuses_the_same_for_any_caller_and_stores_nothing(order, users):  # noqa: F811
    _started(order, users)
    readings = _all_readings(order, 0.6)
    with pytest.raises(services.Refused, match=r"^the energy isolation is not ticked \(isolation point \(T1: AC"):
        services.work_order_finish(order, users["technician"], 1.0, "ok", readings,
                                   confirmed_unticked=_unticked(order))  # every line in the one box: not enough
    with pytest.raises(services.Refused, match=re.escape(ISOLATION_UNTICKED_FINDINGS)):
        services.work_order_finish(order, users["technician"], 1.0, "", readings, **_confirmed(order))
    with pytest.raises(services.Refused, match="the energy isolation is not ticked"):  # an answer of its own
        services.work_order_finish(order, users["technician"], 1.0, "ok", readings,
                                   confirmed_unticked=_unticked(order), isolation_answer="yes")
    _nothing_stored(order)


def test_the_energy_not_isolated_is_kept_and_shown_on_the_page_and_the_paper(order, users, client):  # noqa: F811
    _started(order, users)
    lockout = order.step_list.index(services.LOCKOUT_STEP)
    client.force_login(users["technician"])
    why = "Inspection from the platform only; drives left energised, mount parked and key held."
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, isolation_answer=NOT_ISOLATED, findings=why))
    assert response.status_code == 302, _text(response)[-1500:]
    assert "Your answer for the energy isolation nobody ticked is on the record." in _message(response)
    order.refresh_from_db()
    assert order.isolation_confirmed_at_finish == NOT_ISOLATED
    release = services.isolated_steps(order.step_list)[1].stop
    assert order.isolation_unticked_at_finish == [
        f"Isolation point: {IsolationPoint.objects.get().description}", f"Step {lockout + 1}: {services.LOCKOUT_STEP}",
        f"Step {release + 1}: {order.step_list[release]}",  # the lock removal is answered for with them
    ]
    assert services.LOCKOUT_STEP not in " ".join(order.unticked_at_finish)  # not among the lines of the other box
    assert "remove the locks" not in " ".join(order.unticked_at_finish)
    said = ("Finished with the energy isolation not ticked; technician confirmed, apart from the other lines: "
            + ISOLATION_UNTICKED[NOT_ISOLATED])
    client.force_login(users["engineer"])  # who countersigns reads it
    page = _text(client.get(order.get_absolute_url()))
    assert said in page and ISOLATION_REVIEW[NOT_ISOLATED] in page and why in page
    paper = _pdf(client, order)
    assert (f"{lockout + 1}. Lockout: {services.LOCKOUT_STEP} not ticked; at finishing technician confirmed: "
            "the energy was NOT isolated") in paper
    review = ISOLATION_REVIEW[NOT_ISOLATED]
    assert paper.index("Confirmed when the work was finished") < paper.index(said) < paper.index(review)


def test_work_said_to_need_no_isolation_goes_to_the_countersigning_engineer_too(order, users, client):  # noqa: F811
    # A safety review finished an order of a moving telescope with nothing past its lockout ticked, "needed no
    # isolation" and findings "ok": the order was drafted with a lockout because its hazards call for one, so that
    # answer is read by the engineer who countersigns, as "not isolated" is.
    _started(order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, isolation_answer=NOT_NEEDED, findings="ok"))
    assert response.status_code == 302, _text(response)[-1500:]
    client.force_login(users["engineer"])
    page = _text(client.get(order.get_absolute_url()))
    assert ISOLATION_UNTICKED[NOT_NEEDED] in page and ISOLATION_REVIEW[NOT_NEEDED] in page
    assert ISOLATION_REVIEW[NOT_NEEDED] in _pdf(client, order)


# --- 2. the crew -------------------------------------------------------------------------------------------------


def test_the_crew_typed_on_the_finish_form_is_kept_and_printed_one_to_a_crew_line(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    assert re.search(r'<input type="text" name="crew"[^>]*>', page)
    crew = "Ilse Marrow, Tomas Vell;\nIlse Marrow , Dana Quist"  # as typed on a tablet, a name twice
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, crew=crew))
    assert response.status_code == 302, _text(response)[-1500:]
    order.refresh_from_db()
    assert order.crew == ["Ilse Marrow", "Tomas Vell", "Dana Quist"]
    assert "Crew: Ilse Marrow, Tomas Vell, Dana Quist." in _text(client.get(order.get_absolute_url()))
    paper = _pdf(client, order)
    day = order.finished_at.astimezone(order.site.zone).strftime("%d %b %Y")
    for name in order.crew:
        assert f"Crew member {name} {day}" in paper
    assert paper.count("Crew member") == 3
    assert paper.index("Performed by") < paper.index("Crew member Ilse Marrow") < paper.index("Checked by")


def test_no_crew_named_prints_one_line_saying_so_not_blank_lines_to_fill_in_later(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    assert client.post(f"/workorders/{order.pk}/finish/", _post(order)).status_code == 302
    order.refresh_from_db()
    assert order.crew == []
    assert "Crew: none named." in _text(client.get(order.get_absolute_url()))
    paper = _pdf(client, order)
    assert paper.count("Crew member") == 1 and "Crew member none named" in paper


def test_an_order_finished_before_the_crew_was_asked_keeps_its_blank_crew_lines(order, users, client):  # noqa: F811
    _started(order, users)
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), **_confirmed(order))
    WorkOrder.objects.filter(pk=order.pk).update(crew=None)
    client.force_login(users["viewer"])
    assert _pdf(client, order).count("Crew member") == pdf.CREW_LINES
    assert "Crew:" not in _text(client.get(order.get_absolute_url()))


def test_a_crew_name_too_long_is_refused_naming_the_field_and_stores_nothing(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, crew="Ilse Marrow and " + "x" * 80))
    assert response.status_code == 200
    assert f"is longer than {services.CREW_NAME_MAX} characters for one name; separate the names with commas." in (
        _text(response)
    )
    _nothing_stored(order)


# --- 3. the ticks printed once -----------------------------------------------------------------------------------


def test_a_finished_papers_ticks_are_printed_once_beside_their_lines(order, users, client):  # noqa: F811
    _started(order, users)
    ticked_in_sequence(order, users["technician"], through=services.isolated_steps(order.step_list)[1].stop)
    # up to the lock removal
    services.work_order_finish(order, users["technician"], 1.0, "", _all_readings(order, 0.6),
                               confirmed_unticked=_unticked(order))  # the isolation ticked: no answer asked
    client.force_login(users["viewer"])
    paper = _pdf(client, order)
    for tick in ChecklistTick.objects.filter(work_order=order):
        when = tick.recorded_at.astimezone(order.site.zone).strftime("%d %b %Y %H:%M")
        assert paper.count(f"{tick.text} ticked by technician, {when}") == 1
    assert "Checklist as ticked" not in paper and "Confirmed when the work was finished" not in paper


# --- 4. the mirrors' cleaning --------------------------------------------------------------------------------------


def test_the_cleaning_chosen_at_finishing_shows_on_the_orders_page_and_paper(cleaning_order, mirror, users, client):  # noqa: F811
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    data = _post(cleaning_order, **{f"cleaned_{mirror.pk}": "co2_snow"})
    data.update({f"reading_{r.pk}": "0.88" for r in cleaning_order.required_readings.all()})
    assert client.post(f"/workorders/{cleaning_order.pk}/finish/", data).status_code == 302
    cleaning = CleaningEvent.objects.get(mirror=mirror)
    assert cleaning.work_order_id == cleaning_order.pk
    day = f"{site_today(cleaning_order.site):%d %b %Y}"
    said = f"Primary mirror: cleaned by CO2 snow on {day}"
    assert f"Mirror cleaning: {said}." in _text(client.get(cleaning_order.get_absolute_url()))
    paper = _pdf(client, cleaning_order)
    assert paper.index("Readings to record") < paper.index("Mirror cleaning") < paper.index(said)


def test_not_cleaned_shows_that_no_cleaning_was_recorded(cleaning_order, mirror, users, client):  # noqa: F811
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    data = _post(cleaning_order, **{f"cleaned_{mirror.pk}": "none"})
    data.update({f"reading_{r.pk}": "0.88" for r in cleaning_order.required_readings.all()})
    assert client.post(f"/workorders/{cleaning_order.pk}/finish/", data).status_code == 302
    said = "Primary mirror: no cleaning recorded in this work"
    assert f"Mirror cleaning: {said}." in _text(client.get(cleaning_order.get_absolute_url()))
    assert said in _pdf(client, cleaning_order)


def test_cleanings_recorded_before_the_link_are_linked_to_their_order_by_their_note(cleaning_order, mirror, users):  # noqa: F811
    from django.apps import apps

    migration = importlib.import_module("observatory_ops.mirrors.migrations.0006_cleaning_work_order")
    day = site_today(cleaning_order.site)
    noted = CleaningEvent.objects.create(mirror=mirror, cleaned_on=day, method="wash",
                                         note=f"on {cleaning_order.number}")
    by_hand = CleaningEvent.objects.create(mirror=mirror, cleaned_on=day, method="wash", note="on WO-99999")
    migration.link_cleanings_to_their_orders(apps, None)
    noted.refresh_from_db()
    by_hand.refresh_from_db()
    assert noted.work_order_id == cleaning_order.pk and by_hand.work_order_id is None


# --- 5. parts used beyond what the register held -------------------------------------------------------------------


@pytest.fixture
def filters(order, site, users):  # noqa: F811
    """The order, underway, with 1 filter planned; the register holds 1."""
    part = Part.objects.create(site=site, name="Filter", part_number="F-10", quantity_on_hand=1, reorder_point=0)
    services.part_add(order, part, 1)
    _started(order, users)
    return part


def test_more_used_than_the_register_held_finishes_and_the_shortfall_is_kept(order, filters, users, client):  # noqa: F811
    use = PartUse.objects.get(part=filters)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{use.pk}": "3"}))
    assert response.status_code == 302, _text(response)[-1500:]
    assert WorkOrder.objects.get(pk=order.pk).state == State.FINISHED
    assert ("More parts were used than the parts register held (Filter: 3 each used, 1 in the register). They are "
            "recorded as used, the register is brought to zero") in _message(response)
    filters.refresh_from_db()
    use.refresh_from_db()
    assert filters.quantity_on_hand == 0  # never below zero
    assert (use.quantity_used, use.quantity_short, use.short_counted_at) == (3, 2, None)
    page = _text(client.get(order.get_absolute_url()))
    assert "3 each (2 beyond the register: the site engineer counts the stock)" in page
    assert "Filter F-10 1 each 3 each (2 beyond the register)" in _pdf(client, order)
    # The register's page shows it as a discrepancy to count, naming the order.
    parts = _text(client.get(f"/sites/{filters.site.slug}/parts/"))
    assert "Discrepancies: count the stock" in parts
    assert f"2 each on {order.number} (3 used, finished" in parts
    assert "the site engineer counts it and corrects the register" in parts  # a technician records no count


@pytest.mark.parametrize("on_hand, used, short", [
    (0, 2, 2), (1, 1, 0), (0.3, 0.1 + 0.2, 0),  # 0.1 + 0.2 m of cable: no shortfall of a rounding error
])
def test_the_register_never_goes_below_zero(order, filters, users, on_hand, used, short):  # noqa: F811
    # Kept by the metre, as cable is (a part counted in whole units takes no fraction: COUNTED_UNITS).
    Part.objects.filter(pk=filters.pk).update(quantity_on_hand=on_hand, unit="m")
    use = PartUse.objects.get(part=filters)
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: used},
                               **_confirmed(order))
    filters.refresh_from_db()
    use.refresh_from_db()
    assert filters.quantity_on_hand == max(on_hand - used, 0) >= 0 and use.quantity_short == short


@pytest.mark.parametrize("typed, message", [
    ("-1", "Filter used (each): enter 0 or more."),
    ("two", "Filter used (each): enter a number."),
    ("nan", "Filter used (each): enter a number."),
    ("", "Filter used (each): enter how many were used (0 if none)."),
])
def test_a_count_of_parts_used_that_is_not_a_number_of_0_or_more_is_refused_naming_the_part(
    order, filters, users, client, typed, message,  # noqa: F811
):
    use = PartUse.objects.get(part=filters)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{use.pk}": typed}))
    assert response.status_code == 200 and message in _text(response)
    _nothing_stored(order)
    filters.refresh_from_db()
    assert filters.quantity_on_hand == 1 and PartUse.objects.get(pk=use.pk).quantity_used is None


@pytest.mark.parametrize("used", [-1.0, float("nan"), float("inf")])
def test_the_service_refuses_a_bad_count_for_any_caller_naming_the_part(order, filters, users, used):  # noqa: F811
    use = PartUse.objects.get(part=filters)
    with pytest.raises(services.Refused, match=r"^Filter used: enter a number of 0 or more"):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: used},
                                   **_confirmed(order))
    _nothing_stored(order)


def test_a_finish_that_fails_part_way_leaves_the_register_and_the_shortfall_as_they_were(
    order, filters, users, monkeypatch  # noqa: F811
):
    use = PartUse.objects.get(part=filters)

    def broken_recompute(*args, **kwargs):
        raise RuntimeError("injected fault after the stock was written")

    monkeypatch.setattr(services, "site_recompute", broken_recompute)
    with pytest.raises(RuntimeError):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 3},
                                   **_confirmed(order))
    _nothing_stored(order)
    filters.refresh_from_db()
    use.refresh_from_db()
    assert filters.quantity_on_hand == 1 and use.quantity_short == 0 and use.quantity_used is None


def _short_by_two(order, filters, users) -> PartUse:  # noqa: F811
    use = PartUse.objects.get(part=filters)
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 3},
                               **_confirmed(order))
    return use


def test_the_engineer_counts_the_stock_and_the_discrepancy_is_closed(order, filters, users, client):  # noqa: F811
    use = _short_by_two(order, filters, users)
    client.force_login(users["engineer"])
    url = f"/sites/{filters.site.slug}/parts/"
    assert re.search(rf'<form method="post" action="{url}{filters.pk}/count/"', client.get(url).content.decode())
    response = client.post(f"{url}{filters.pk}/count/", {"counted": "4"}, follow=True)
    assert "Filter: the register now holds 4 each, as counted; its shortfall is marked counted." in _text(response)
    assert "Discrepancies" not in _text(response)
    filters.refresh_from_db()
    use.refresh_from_db()
    assert filters.quantity_on_hand == 4 and use.short_counted_at is not None
    assert filters.history.first().history_user == users["engineer"]
    counted = f"{use.short_counted_at.astimezone(filters.site.zone):%d %b %Y}"
    assert f"(2 beyond the register; counted {counted})" in _text(client.get(order.get_absolute_url()))


@pytest.mark.parametrize("typed, message", [
    ("-2", "Counted Filter (each): enter 0 or more."),
    ("a few", "Counted Filter (each): enter a number, such as 4."),
    ("", "Counted Filter (each): enter the number on the shelf (0 if none)."),
])
def test_a_bad_count_is_refused_naming_the_part_and_changes_nothing(order, filters, users, client, typed, message):  # noqa: F811
    use = _short_by_two(order, filters, users)
    client.force_login(users["engineer"])
    response = client.post(f"/sites/{filters.site.slug}/parts/{filters.pk}/count/", {"counted": typed})
    assert response.status_code == 200 and message in _text(response)
    filters.refresh_from_db()
    assert filters.quantity_on_hand == 0 and PartUse.objects.get(pk=use.pk).short_counted_at is None


def test_a_technician_records_no_count(order, filters, users, client):  # noqa: F811
    _short_by_two(order, filters, users)
    client.force_login(users["technician"])
    assert client.post(f"/sites/{filters.site.slug}/parts/{filters.pk}/count/", {"counted": "4"}).status_code == 403
    with pytest.raises(services.Refused, match="needs the engineer role"):
        services.part_count_record(filters, 4, users["technician"])
    filters.refresh_from_db()
    assert filters.quantity_on_hand == 0


def test_a_count_with_no_shortfall_waiting_is_refused(filters, users):
    with pytest.raises(services.Refused, match="no shortfall of Filter is waiting for a count"):
        services.part_count_record(filters, 4, users["engineer"])
    filters.refresh_from_db()
    assert filters.quantity_on_hand == 1



def test_countersigning_work_finished_without_isolation_shows_the_answer_and_the_findings_first(
    order, users, client  # noqa: F811
):
    # A review countersigned, in one click, an order of live electrical work finished as "needed no isolation".
    _started(order, users)
    client.force_login(users["technician"])
    why = "Visual check of the drive from the floor; covers left on."
    client.post(f"/workorders/{order.pk}/finish/", _post(order, isolation_answer=NOT_NEEDED, findings=why))
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/move/countersign/", {"go": "countersign"})
    assert response.status_code == 200 and WorkOrder.objects.get(pk=order.pk).state == State.FINISHED
    page = _text(response)
    assert "Before you countersign" in page and ISOLATION_REVIEW[NOT_NEEDED] in page and why in page
    response = client.post(f"/workorders/{order.pk}/move/countersign/", {"asked": "confirmed"})
    assert response.status_code == 302 and WorkOrder.objects.get(pk=order.pk).state == State.COUNTERSIGNED


def test_a_lock_removal_nobody_ticked_is_answered_for_with_the_isolation_not_as_did_not_apply(order, users):  # noqa: F811
    """A technician's review: with the lockout ticked and "remove the locks and tags" not, one box ("the unticked lines
    were done or did not apply") finished the order, and the paper printed "did not apply" beside the lock removal.
    The lock removal now joins the lines of the energy isolation (selectors.isolation_lines), whose "isolated" answer
    says the locks came off only after the work (cautions.ISOLATION_UNTICKED)."""
    _started(order, users)
    lockout, locked = services.isolated_steps(order.step_list)
    ticked_in_sequence(order, users["technician"], through=locked.stop - 1)  # up to the lock removal, not it
    release = order.step_list[locked.stop]
    with pytest.raises(services.Refused, match=re.escape(f"the energy isolation is not ticked (step {locked.stop + 1} "
                                                         f"({release}))")):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6),
                                   confirmed_unticked=_unticked(order))
    _nothing_stored(order)
    services.work_order_finish(order, users["technician"], 1.0, "Locks off, ticked on paper.",
                               _all_readings(order, 0.6), **_confirmed(order))
    order.refresh_from_db()
    assert order.isolation_unticked_at_finish == [f"Step {locked.stop + 1}: {release}"]
    assert order.isolation_confirmed_at_finish == "isolated"
