"""Where an order's estimated hours come from, said beside them on its page and its paper (traceability): the plans'
own estimates added up for an order made from the due list; a recoat phase's days at one person's working day (our
own planning figure, no published source); nothing once an engineer edits the estimate."""
from __future__ import annotations

import datetime as dt
import io
from html import escape

from pypdf import PdfReader
from test_recoat_phase_order import mirror, recoat  # noqa: F401

from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import pdf, selectors, services


def _pdf_text(order) -> str:
    document = pdf.render_sheet(selectors.sheet(order, "https://ops.example/wo/1/"))
    return " ".join(" ".join(page.extract_text().split()) for page in PdfReader(io.BytesIO(document)).pages)


def test_an_order_from_two_plans_gives_their_estimates_added_up(telescope, users, client):
    fans = subsystem_create(telescope, "cooling_fans", "Mirror cell fans", counting_from=dt.date(2026, 1, 1))
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=dt.date(2026, 1, 1))
    plans = [fans.plans.first(), drive.plans.first()]
    order = services.work_order_from_due(plans, users["engineer"])
    hours = [p.estimated_hours for p in plans]
    assert order.estimated_hours == sum(hours)
    assert order.estimate_basis in (f"the plans' own estimates, {hours[0]:g} h + {hours[1]:g} h",
                                    f"the plans' own estimates, {hours[1]:g} h + {hours[0]:g} h")  # the steps' order
    client.force_login(users["viewer"])
    assert f"({escape(order.estimate_basis)})" in client.get(order.get_absolute_url()).content.decode()
    assert f"{sum(hours):g} h ({order.estimate_basis})" in _pdf_text(order)


def test_a_recoat_phase_order_gives_its_days_and_the_working_day(recoat):  # noqa: F811
    removal = recoat["removal"]
    assert removal.estimated_hours == 16
    assert removal.estimate_basis == "2 days of the phase x 8 h, one person's working day (our own planning figure)"
    assert "16 h (2 days of the phase x 8 h" in _pdf_text(removal)


def test_an_estimate_edited_by_the_engineer_is_theirs_alone(telescope, users, client):
    fans = subsystem_create(telescope, "cooling_fans", "Mirror cell fans", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due([fans.plans.first()], users["engineer"])
    assert order.estimate_basis == "the plan's own estimate"
    client.force_login(users["engineer"])
    url = f"/workorders/{order.pk}/edit/"
    form = client.get(url).context["form"]
    data = {name: ("" if value is None else value) for name, value in form.initial.items() if name in form.fields}
    client.post(url, {**data, "estimated_hours": order.estimated_hours})  # saved unchanged: the basis stays
    order.refresh_from_db()
    assert order.estimate_basis == "the plan's own estimate"
    client.post(url, {**data, "estimated_hours": 6})
    order.refresh_from_db()
    assert order.estimated_hours == 6 and order.estimate_basis == ""
    assert "own estimate" not in client.get(order.get_absolute_url()).content.decode()


def test_an_estimate_edited_in_the_admin_is_theirs_alone_too(telescope, users, rf):
    """The admin's change form (WorkOrderAdmin.save_model) clears the basis as the order's edit page does."""
    from django.contrib import admin

    from observatory_ops.workorders.models import WorkOrder

    fans = subsystem_create(telescope, "cooling_fans", "Mirror cell fans", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due([fans.plans.first()], users["engineer"])
    request = rf.post("/admin/")
    request.user = users["administrator"]
    model_admin = admin.site._registry[WorkOrder]
    form_class = model_admin.get_form(request, order)
    unchanged = form_class(instance=order)
    data = {name: ("" if value is None else value) for name, value in unchanged.initial.items()
            if name in unchanged.fields}
    for estimate, basis in ((order.estimated_hours, "the plan's own estimate"), (40, "")):
        form = form_class({**data, "estimated_hours": estimate}, instance=order)
        assert form.is_valid(), form.errors
        model_admin.save_model(request, form.save(commit=False), form, change=True)
        order.refresh_from_db()
        assert (order.estimated_hours, order.estimate_basis) == (estimate, basis)
