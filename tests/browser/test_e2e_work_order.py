"""End to end in a real browser (issue 4, item 7): an engineer ticks two overdue items on the due list and
makes one work order of them, reads its cautions and issues it; the technician starts it, finishes it
through the finish form (hours, hostile findings, the required reading) and downloads the A4 PDF; the two
items leave the overdue group; the engineer countersigns as the second person.

Runs against the demo observatory of fixtures_demo, served by pytest-django's live server. The PDF is read
back with pypdf, an independent PDF parser; A4 is ISO 216's 210 mm x 297 mm, 595.28 pt x 841.89 pt at
72 pt to the inch (1 in = 25.4 mm exactly).
"""
from __future__ import annotations

import re
import tempfile
from pathlib import Path

import pytest
from playwright.sync_api import Page, expect
from pypdf import PdfReader

from observatory_ops.calc.triggers import OVERDUE

SCREENSHOTS = Path(tempfile.gettempdir())
#: Text a technician might type that is also markup: it must print literally, on the page and the PDF.
HOSTILE_FINDINGS = "Pads worn to 3 mm, replaced. <b>x</b> & <i"
A4_POINTS = (595.28, 841.89)

# Each due-list row as [plan id of its tick box, status text].
_READ_TICKS = """rows => rows.map(row => [
  Number(row.querySelector("input[name=plans]").value), row.querySelector(".status").innerText.trim()
])"""
# True when the first element comes before the second in the document.
_PRECEDES = "([a, b]) => Boolean(a.compareDocumentPosition(b) & Node.DOCUMENT_POSITION_FOLLOWING)"


def _shot(page: Page, name: str) -> None:
    """Left behind for a person to look at; the test never reads it back."""
    page.screenshot(path=str(SCREENSHOTS / f"e2e_wo_{name}.png"), full_page=True)


def _due_statuses(page: Page) -> dict[int, str]:
    """Open the due list from the menu; the status of each plan on its first page."""
    page.get_by_role("navigation").get_by_role("link", name="Due list").click()
    expect(page.get_by_role("heading", name="Due list")).to_be_visible()
    return dict(page.locator("table.due-table tbody tr").evaluate_all(_READ_TICKS))


def _two_overdue_plans(statuses: dict[int, str]) -> list[int]:
    """Two overdue plans of one telescope, one with a reading trigger so the finish form asks for a reading."""
    from observatory_ops.planning.metrics import READING
    from observatory_ops.planning.models import ServicePlan

    overdue = [pk for pk, status in statuses.items() if status == OVERDUE]
    candidates = ServicePlan.objects.filter(pk__in=overdue)
    telescope_of = dict(candidates.values_list("pk", "subsystem__telescope_id"))
    with_reading = set(candidates.filter(triggers__metric=READING).values_list("pk", flat=True))
    first = next((pk for pk in overdue if pk in with_reading), None)
    assert first is not None, "the demo should list an overdue item with a reading trigger on the due list"
    second = next((pk for pk in overdue if pk != first and telescope_of[pk] == telescope_of[first]), None)
    assert second is not None, f"the demo should list a second overdue item on the same telescope, found {overdue}"
    return [first, second]


def _value_within(limit_text: str) -> float:
    """A reading comfortably inside a positive limit written as 'at most L' or 'at least L'; a reading
    with a limit in words (as the maker says) gets a plain positive value."""
    match = re.fullmatch(r"at (most|least) (\S+)", limit_text)
    if not match:
        return 0.5
    limit = float(match[2])
    assert limit > 0, f"no value chosen for the limit {limit_text!r}"
    if match[1] == "most":
        return limit / 2
    # A fraction (a reflectance) must stay at most 1.
    return (limit + 1) / 2 if limit < 1 else 2 * limit


def _switch_user(page: Page, live_server, login, demo, role: str, url: str) -> None:
    page.get_by_role("button", name="Sign out").click()
    username = demo.usernames[role]
    login(page, live_server, username, demo.passwords[username])
    page.goto(url)


def _expect_state(page: Page, label: str) -> None:
    expect(page.locator(".wo-state")).to_have_text(label)


def _pdf_text(path: Path) -> tuple[str, list[tuple[float, float]]]:
    """All the text of a PDF with runs of white space made single spaces, and each page's size in points."""
    reader = PdfReader(path)
    text = " ".join(p.extract_text() for p in reader.pages)
    sizes = [(float(p.mediabox.width), float(p.mediabox.height)) for p in reader.pages]
    return re.sub(r"\s+", " ", text), sizes


def _one_line(text: str) -> str:
    return re.sub(r"\s+", " ", text).strip()


@pytest.mark.browser
def test_two_overdue_items_go_from_the_due_list_through_a_work_order_to_countersigned(
    browser_page, live_server, login, demo
):
    from django.contrib.auth.models import User

    from observatory_ops.workorders.cautions import PRECEDENCE_STATEMENT
    from observatory_ops.workorders.models import State, WorkOrder
    from observatory_ops.workorders.selectors import cautions

    page = browser_page
    engineer = demo.usernames["engineer"]
    login(page, live_server, engineer, demo.passwords[engineer])

    # The engineer ticks two overdue items and makes one work order of them.
    plans = _two_overdue_plans(_due_statuses(page))
    for pk in plans:
        page.locator(f"table.due-table input[name=plans][value='{pk}']").check()
    _shot(page, "1_due_list_ticked")
    page.get_by_role("button", name="Make a work order from the ticked items").first.click()  # also under the list
    expect(page.locator(".messages")).to_contain_text("drafted from 2 due items, planned for today")
    order = WorkOrder.objects.latest("pk")  # the demo has open work orders of its own
    assert sorted(order.items.values_list("plan_id", flat=True)) == sorted(plans)
    order_url = live_server.url + order.get_absolute_url()
    expect(page).to_have_url(order_url)
    expect(page.get_by_role("heading", level=1)).to_contain_text(order.number)
    _expect_state(page, State.DRAFT.label)

    # The cautions, most severe first, and the precedence statement come before the first step.
    expected = cautions(order)
    assert expected, "the ticked items carry hazards, so the work order must show cautions"
    box = page.locator("section.cautions")
    expect(box.locator(".caution strong")).to_have_text([f"{c.signal_word} · {c.title}" for c in expected])
    expect(box.locator(".precedence")).to_have_text(PRECEDENCE_STATEMENT)
    steps = page.locator("ol.checklist li")
    expect(steps).to_have_count(len(order.step_list))
    assert page.evaluate(_PRECEDES, [box.element_handle(), steps.first.element_handle()]), (
        "the cautions box must come before the steps"
    )
    _shot(page, "2_draft")

    # The due list asks no date: the order is planned for the site's today, so it is issued straight away.
    from observatory_ops.planning.services import site_today

    assert order.planned_date == site_today(order.site)
    expect(page.locator(".moves-held")).to_have_count(0)
    page.get_by_role("button", name="Issue to the technicians").click()
    # Plans whose steps under power were merged are read through first (workorders/issue_question.html): which two
    # items the demo's first page offers changes with the site's day, and after 07:00 UTC they are such plans.
    question = page.get_by_role("heading", name="Before this order is issued")
    expect(page.get_by_text("issue to the technicians: done").or_(question)).to_be_visible()  # whichever page comes
    if question.count():
        _shot(page, "2b_issue_question")
        page.get_by_role("button", name="Issue as written").click()
    expect(page.locator(".messages")).to_contain_text("issue to the technicians: done")
    _expect_state(page, State.ISSUED.label)

    # The technician starts it and finishes it through the form.
    _switch_user(page, live_server, login, demo, "technician", order_url)
    page.get_by_role("button", name="Start work").click()
    expect(page.locator(".wo-state.wo-underway, .start-question").first).to_be_visible()  # the answer has come
    if page.locator(".start-question").count():  # the demo's own work underway on the same telescope: asked first
        expect(page.locator(".start-question").last).to_contain_text("have you agreed with")
        page.get_by_role("button", name="Start anyway").click()
    _expect_state(page, State.UNDERWAY.label)
    # The demo's own work underway on the telescope has its lockout on: its crew removes its locks first, since nothing
    # after a release is confirmed while another crew is still locked out (services.still_locked_out).
    from observatory_ops.workorders import services as workorder_services

    other_crew = User.objects.get(username=demo.usernames["technician"])
    for other in workorder_services.still_locked_out(WorkOrder.objects.get(pk=order.pk)):
        release = workorder_services.isolated_steps(other.order.step_list)[1].stop
        workorder_services.checklist_tick_set(other.order, "step", release, True, other_crew)
    finish = page.get_by_role("link", name="Finish and record")
    expect(finish).to_have_count(2)  # at the top, and after the steps where the last tick was made
    finish.last.click()
    expect(page.get_by_role("heading", level=1)).to_contain_text(f"Finish {order.number}")
    page.get_by_label("Actual hours").fill("2.5")
    page.get_by_label("Findings:", exact=True).fill(HOSTILE_FINDINGS)  # the isolation answers speak of findings too
    required = list(order.required_readings.select_related("subsystem"))
    assert required, "a plan with a reading trigger must make the finish form ask for the reading"
    values = {}
    for r in required:
        values[r.pk] = _value_within(r.limit_text)
        page.get_by_label(f"{r.quantity_label} on {r.subsystem.name} ({r.unit})").fill(str(values[r.pk]))
    for cleaning in page.locator("select[name^=cleaned_]").all():  # asked with no default on a mirror's order
        cleaning.select_option("none")
    for use in order.part_uses.select_related("part"):  # typed, never prefilled with the planned quantity
        used = page.get_by_label(f"{use.part.name} used ({use.part.unit})")
        expect(used).to_have_value("")
        used.fill(f"{use.quantity_planned:g}")
    # Nothing was ticked on the work order page: the form lists every line, and finishing needs the confirmations:
    # the energy isolation's on its own (OSHA 29 CFR 1910.147), the box for the other lines.
    from observatory_ops.workorders.cautions import ISOLATION_UNTICKED
    from observatory_ops.workorders.selectors import isolation_lines, unticked_lines

    open_lines = unticked_lines(order)
    # A hand-back left to a crew still at work on the telescope is said apart, not confirmed (left_to_the_last_crew).
    hand_back, _ = workorder_services.left_to_the_last_crew(order, open_lines)
    expect(page.locator("p.left-to-last-crew")).to_have_count(len(hand_back))
    open_lines = [line for line in open_lines if line not in hand_back]
    others = [line for line in open_lines if line not in isolation_lines(open_lines)]
    expect(page.locator("ul.unticked li")).to_have_count(len(open_lines))
    expect(page.locator("ul.unticked.isolation li")).to_have_count(len(open_lines) - len(others))
    # The isolation's answer is required in the browser itself (no default); the box for the others on the server.
    page.get_by_label(ISOLATION_UNTICKED["isolated"]).check()
    page.get_by_role("button", name="Finish and record").click()
    expect(page.locator(".errorlist")).to_contain_text("confirm here that they were done or did not apply")
    assert WorkOrder.objects.get(pk=order.pk).state == State.UNDERWAY
    expect(page.get_by_label(ISOLATION_UNTICKED["isolated"])).to_be_checked()  # kept on the page sent back
    page.get_by_label("I confirm the other unticked lines were done or did not apply").check()
    _shot(page, "3_finish_form")
    page.get_by_role("button", name="Finish and record").click()

    expect(page).to_have_url(order_url)
    expect(page.locator(".messages")).to_contain_text(
        f"{order.number} finished: 2 service records written, dated "  # one for each of the two plans
    )
    expect(page.locator(".messages")).to_contain_text("2 service plans restarted, counting from that day")
    _expect_state(page, State.FINISHED.label)
    expect(page.get_by_text(f"Finished with {len(others)} checklist line{'' if len(others) == 1 else 's'} "
                            "not ticked")).to_be_visible()
    expect(page.locator("#isolation-confirmed")).to_contain_text(ISOLATION_UNTICKED["isolated"])
    findings = page.locator("div.panel", has_text=HOSTILE_FINDINGS)
    expect(findings).to_have_count(1)
    expect(findings.locator("b, i")).to_have_count(0)
    for r in required:
        r.refresh_from_db()
        assert r.reading is not None and r.reading.value == pytest.approx(values[r.pk])
    _shot(page, "4_finished")

    # The A4 PDF from the download button: the number, the cautions before the first step, the findings as typed.
    with page.expect_download() as download:
        page.get_by_role("link", name="Download PDF (A4)").click()
    assert download.value.suggested_filename == f"{order.number}.pdf"
    text, sizes = _pdf_text(download.value.path())
    for width, height in sizes:
        assert (width, height) == pytest.approx(A4_POINTS, abs=0.5), f"a page of {width} x {height} pt is not A4"
    assert order.number in text
    first_step = _one_line(order.step_list[0])
    assert first_step in text, f"the first step {first_step!r} is not in the PDF"
    first_caution = text.find(expected[0].title)
    assert 0 <= first_caution < text.index(first_step), "the cautions must come before the first step in the PDF"
    assert HOSTILE_FINDINGS in text, "the findings must print literally in the PDF"

    # Back on the due list, neither item is overdue any more.
    statuses = _due_statuses(page)
    _shot(page, "5_due_list_after")
    assert set(plans) <= set(statuses), "both items should still be on the first page of the due list"
    assert all(statuses[pk] != OVERDUE for pk in plans), f"after finishing: {[statuses[pk] for pk in plans]}"

    # A second person, the engineer, countersigns.
    _switch_user(page, live_server, login, demo, "engineer", order_url)
    page.get_by_role("button", name="Countersign (second person)").click()
    expect(page.locator(".messages")).to_contain_text("countersign (second person): done")
    _expect_state(page, State.COUNTERSIGNED.label)
    signer = User.objects.get(username=engineer).get_full_name()
    expect(page.get_by_text(re.compile(rf"Countersigned .* by {re.escape(signer)}\."))).to_be_visible()
    _shot(page, "6_countersigned")
    order.refresh_from_db()
    assert order.state == State.COUNTERSIGNED
    assert order.countersigned_by.username == engineer and order.finished_by.username == demo.usernames["technician"]
