"""Specifications for `python manage.py demo --no-serve`: loads once, twice is harmless, the due list explains itself.

Runs in the test database whatever DATABASE_URL says. Slow-ish (several seconds): three years of nights.
"""
from __future__ import annotations

from io import StringIO

import pytest
from django.apps import apps
from django.contrib.auth.models import User
from django.core.management import call_command
from django.urls import reverse
from django.utils.html import escape

from fixtures_demo.generator import DEMO_USERS, SITE_SLUG
from observatory_ops.calc.triggers import DUE, OVERDUE
from observatory_ops.planning.metrics import METRICS
from observatory_ops.planning.models import PlanStatus

pytestmark = pytest.mark.django_db


def row_counts() -> dict[str, int]:
    return {model._meta.label: model.objects.count() for model in apps.get_models()}


@pytest.fixture
def demo_twice():
    first, second = StringIO(), StringIO()
    call_command("demo", "--no-serve", stdout=first)
    counts = row_counts()
    call_command("demo", "--no-serve", stdout=second)
    return counts, first.getvalue(), second.getvalue()


def test_running_the_demo_twice_leaves_the_same_row_counts_and_prints_every_login(demo_twice):
    counts_after_first, first_out, second_out = demo_twice
    assert row_counts() == counts_after_first
    assert counts_after_first["logbook.NightUsage"] >= 3 * 365 - 1
    assert counts_after_first["registry.Telescope"] == 2
    assert "Loaded Vestal Ridge Observatory" in first_out
    assert "Already loaded: Vestal Ridge Observatory" in second_out
    for out in (first_out, second_out):
        assert "Due summary:" in out
        for username, role, _name, password in DEMO_USERS:
            assert f"{role:<14} {username} / {password}" in out


def test_the_demo_due_list_has_overdue_and_due_rows_each_with_a_reason_naming_its_trigger(demo_twice, client):
    rows = list(PlanStatus.objects.filter(site__slug=SITE_SLUG, status__in=[OVERDUE, DUE]))
    assert {r.status for r in rows} == {OVERDUE, DUE}
    for row in rows:
        governing = row.trigger_rows[0]
        assert governing["metric"] == row.metric
        reason = row.reason.lower()
        # The trigger is named by its label ("Open-dome hours: ...") or, for a reading, by its basis
        # ("Settle time after a slew: Theil-Sen trend of 5 readings ...").
        basis = governing["basis"].strip().lower()
        assert METRICS[row.metric][0].lower() in reason or (basis and basis in reason), row.reason

    client.force_login(User.objects.get(username="viewer"))
    for status in (OVERDUE, DUE):
        response = client.get(reverse("due-list"), {"status": status})
        assert response.status_code == 200
        page = response.content.decode()
        for row in (r for r in rows if r.status == status):
            assert escape(row.reason) in page


def test_the_demo_order_underway_is_ticked_in_the_sequence_of_the_lockout():
    """Its ticks go through the service in the order of the work, OSHA 29 CFR 1910.147(d): the steps done under
    power, then every isolation point as its lock goes on, then the lockout step; the locked-out work is next."""
    from observatory_ops.workorders import services
    from observatory_ops.workorders.cautions import needs_isolation
    from observatory_ops.workorders.models import State, WorkOrder
    from observatory_ops.workorders.selectors import checklist, isolation_points

    call_command("demo", "--no-serve", stdout=StringIO())
    order = WorkOrder.objects.get(site__slug=SITE_SLUG, state=State.UNDERWAY)
    assert needs_isolation(order.hazards)
    lockout, locked = services.isolated_steps(order.step_list)
    ticks = list(order.ticks.order_by("pk"))
    assert all(tick.ticked for tick in ticks)
    steps = [tick.step_index for tick in ticks if tick.kind == "step"]
    points = [tick.isolation_point_id for tick in ticks if tick.kind == "point"]
    assert points and sorted(points) == sorted(p.pk for p in isolation_points(order))
    assert [tick.kind for tick in ticks] == ["step"] * lockout + ["point"] * len(points) + ["step"]
    assert steps == list(range(lockout + 1))
    lines = checklist(order)
    assert [line.ticked for line in lines.steps] == [index <= lockout for index in range(len(order.step_list))]
    assert locked and not any(lines.steps[index].ticked for index in locked)


def test_the_demo_primaries_cleaning_plans_count_from_their_last_cleaning():
    """A reviewer saw a mirror cleaned weeks ago with its cleaning plan overdue: the demo's cleanings and its
    service records were out of step. Each cleaning is now the cleaning plan's record, as the mirror page logs it."""
    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.mirrors.services import plans_a_cleaning_restarts

    call_command("demo", "--no-serve", stdout=StringIO())
    primaries = Mirror.objects.filter(subsystem__name="Primary mirror", subsystem__telescope__site__slug=SITE_SLUG)
    assert primaries.count() == 2
    for mirror in primaries:
        last_cleaning = mirror.cleanings.order_by("-cleaned_on").first().cleaned_on
        for plan in plans_a_cleaning_restarts(mirror.subsystem):
            newest = ServiceRecord.objects.filter(plan=plan).order_by("-performed_on").first()
            assert newest.performed_on == last_cleaning, plan


def test_the_demo_refuses_a_production_installation_and_a_database_with_other_sites(settings, site):
    from django.core.management.base import CommandError

    settings.SECRET_KEY = "a-key-of-this-installation-0123456789"
    with pytest.raises(CommandError, match="production installation"):
        call_command("demo", "--no-serve", stdout=StringIO())
    settings.SECRET_KEY = settings.DEVELOPMENT_SECRET_KEY
    with pytest.raises(CommandError, match=f"already holds other sites \\({site.name}\\)"):
        call_command("demo", "--no-serve", stdout=StringIO())
    assert not User.objects.exists()


def test_an_existing_account_with_a_demo_username_is_left_alone_and_its_password_not_printed(db):
    from fixtures_demo.generator import demo_users

    admin = User.objects.create_superuser("admin", password="a-strong-password-of-their-own")
    printed = {username: password for username, _role, password in demo_users()}
    assert printed["admin"] is None and printed["viewer"]
    admin.refresh_from_db()
    assert admin.check_password("a-strong-password-of-their-own") and not admin.groups.exists()


def test_the_demo_refuses_a_database_with_users_of_its_own_saying_why_and_where_to_load_it(db):
    """The reviewer's case: a fresh real install (migrate, createsuperuser) would have got three more logins whose
    passwords are in the README. Nothing is added, not even the demo's logins."""
    from django.core.management.base import CommandError

    User.objects.create_superuser("admin", password="a-strong-password-of-their-own")
    with pytest.raises(CommandError) as refused:
        call_command("demo", "--no-serve", stdout=StringIO())
    assert str(refused.value) == (
        "this database already has users of its own (admin), and the demo would add logins whose passwords are "
        "published in the README. Give the demo a database of its own: run it with OBSOPS_DATA_DIR set to an empty "
        "folder, e.g. `OBSOPS_DATA_DIR=/tmp/obsops-demo python manage.py demo` (or with DATABASE_URL set to another "
        "database)."
    )
    assert list(User.objects.values_list("username", flat=True)) == ["admin"]
    assert not apps.get_model("registry", "Site").objects.exists()


def test_the_demo_loaded_once_loads_again_whatever_users_were_added_to_it_since(db):
    """A demo database stays the demo's: someone trying the admin may add a person, and `demo` still serves it."""
    call_command("demo", "--no-serve", stdout=StringIO())
    User.objects.create_user("trial-person", password="a-password-for-the-trial")
    out = StringIO()
    call_command("demo", "--no-serve", stdout=out)
    assert "Already loaded: Vestal Ridge Observatory" in out.getvalue()


def test_no_page_of_a_demo_orders_paper_ends_on_a_heading():
    """A safety review printed the demo's cleaning order and found "Mirror cleaning - tick one for each mirror" alone
    at the foot of page 3, its tick boxes on page 4. Every demo order's paper, page by page (read with pypdf)."""
    import io
    import re

    from pypdf import PdfReader

    from observatory_ops.workorders.models import WorkOrder
    from observatory_ops.workorders.pdf import render_sheet
    from observatory_ops.workorders.selectors import sheet

    call_command("demo", "--no-serve", stdout=StringIO())
    headings = ("Mirror cleaning", "Steps", "Energy isolation", "Parts", "Tools", "Readings", "Lifting figures",
                "Sign-off", "What a competent person must check")
    ended = []
    for order in WorkOrder.objects.filter(site__slug=SITE_SLUG).order_by("pk"):
        pages = PdfReader(io.BytesIO(render_sheet(sheet(order, "http://x/")))).pages
        for number, page in enumerate(pages[:-1], start=1):
            body = [line for line in page.extract_text().splitlines()  # less the running header and footer
                    if line.strip() and not line.startswith("Work order ") and not re.fullmatch(r"page \d+ of \d+",
                                                                                                 line.strip())]
            if body and body[-1].startswith(headings):
                ended.append((order.number, number, body[-1]))
    assert not ended, ended
