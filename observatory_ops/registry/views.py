from django.contrib import messages
from django.shortcuts import get_object_or_404, redirect, render
from django.utils.text import slugify

from fixtures_demo.generator import load_refusal
from observatory_ops.access.decorators import posted_only, requires
from observatory_ops.access.roles import ENGINEER, VIEWER
from observatory_ops.archive.history import changes
from observatory_ops.logbook import selectors as logbook_selectors
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import TRAIN_KINDS
from observatory_ops.planning import selectors as planning_selectors
from observatory_ops.planning.services import (
    mirrors_left_out,
    recoats_in_hand,
    site_recompute,
    site_today,
    sites_bring_up_to_date,
)
from observatory_ops.workorders import selectors as workorder_selectors
from observatory_ops.workorders.cautions import HAZARDS
from observatory_ops.workorders.models import RequiredReading, WorkOrderItem

from . import services
from .forms import RetireForm
from .models import Site, Subsystem
from .selectors import open_orders_of, parts_of, subsystem_tree, telescopes_taken_down, tube_warning


@requires(VIEWER)
def home(request):
    sites = list(Site.objects.all())
    if len(sites) == 1:
        return redirect(sites[0])
    sites_bring_up_to_date(sites)  # as the due list does: the counts below are today's
    counts = planning_selectors.status_counts_by_site(sites)
    # The demo is offered only where its command would load it: never beside real users, whatever the page.
    offer_demo = not sites and not load_refusal()
    return render(request, "registry/home.html", {
        "sites": [(site, counts[site.pk]) for site in sites], "offer_demo": offer_demo,
    })


#: Rows of the dashboard's "Needs attention" list; the rest are a link away on the due list.
ATTENTION_ROWS = 12


@requires(VIEWER)
def telescope_register(request, slug, pk):
    """The telescope's register as the JSON file ``register import`` reads into another telescope
    (``register_file.register_of``), named with the site, the telescope and the day."""
    import json

    from django.http import HttpResponse

    from .models import Telescope
    from .register_file import register_of

    telescope = get_object_or_404(Telescope.objects.select_related("site"), pk=pk, site__slug=slug)
    today = site_today(telescope.site)
    response = HttpResponse(json.dumps(register_of(telescope, today), indent=2, ensure_ascii=False) + "\n",
                            content_type="application/json; charset=utf-8")
    name = f"register-{telescope.site.slug}-{slugify(telescope.name)}-{today.isoformat()}.json"
    response["Content-Disposition"] = f'attachment; filename="{name}"'
    return response


@requires(VIEWER)
def site_dashboard(request, slug):
    site = get_object_or_404(Site, slug=slug)
    sites_bring_up_to_date([site])
    upcoming = list(planning_selectors.due_for_site(site)[:ATTENTION_ROWS])
    on_orders = workorder_selectors.orders_for_plans(s.plan_id for s in upcoming)  # as the due list says it
    for status in upcoming:
        status.on_orders = on_orders.get(status.plan_id, [])
    telescopes = [(t, subsystem_tree(t), tube_warning(t)) for t in site.telescopes.all()]
    taken_down = telescopes_taken_down(site)  # every subsystem retired: not "to register"
    last_nights = logbook_selectors.last_nights(site)
    today = site_today(site)
    closures = planning_selectors.closures_listed(site, today)
    for telescope, _, _ in telescopes:
        telescope.taken_down_on = taken_down.get(telescope.pk)
        # A closure under way, its own or the whole site's, said in its panel (a user review looked there first).
        telescope.closed_now = next((c for c in closures if c.state == "under way" and c.covers(telescope.pk)), None)
    # Each recoat's nights as its orders now stand, as the forecasts count them, and their cost (with_days_out).
    downtime = mirror_services.with_days_out(recoats_in_hand(site, today), today)
    runs_over = mirror_services.runs_over_each_recoat(site, today, downtime)
    for plan in downtime:  # the booked runs on its nights, under it
        plan.runs_over = runs_over.get(plan.pk, [])
    return render(
        request,
        "registry/site_dashboard.html",
        {
            "site": site,
            "counts": planning_selectors.status_counts(site),
            # Counted plans with no due state, each with why: missing from the counts and the due list, so named.
            "not_computed": planning_selectors.plans_not_computed(site),
            "upcoming": upcoming,
            "attention_rows": ATTENTION_ROWS,
            "telescopes": telescopes,
            # A site being set up: telescopes with no subsystem in service yet (the page points to where to add them).
            "bare_telescopes": [t for t, nodes, _ in telescopes if not nodes and t.pk not in taken_down],
            "taken_down": taken_down,
            "last_nights": last_nights,
            "log_behind": planning_selectors.nights_unlogged_said(site, last_nights, today),
            "recent_service": planning_selectors.recent_service(site)[:8],
            "parts_to_see_to": workorder_selectors.parts_low_or_short(site),
            "telescopes_out": workorder_selectors.telescopes_out([site]),
            "inspections": workorder_selectors.energy_control_inspections(site, today),
            "downtime": downtime,
            "left_out": mirrors_left_out(site, today, downtime),  # out with no recoat to put it back: counted to today
            "recoats_to_plan": mirror_services.recoats_to_plan(site, today),
            "closures": closures,
            "recoats_of_retired": mirror_services.recoats_of_retired(site),
            "open_work_orders": _open_orders(site, today),
        },
    )


def _open_orders(site, today) -> list:
    """The dashboard's open work orders, the earliest planned first, each one late said so
    (``workorders.selectors.late_orders``: how late, and what holds it)."""
    late = {each.order.pk: each.text for each in workorder_selectors.late_orders(site, today)}
    orders = list(workorder_selectors.work_orders().filter(site=site, state__in=["draft", "issued", "underway",
                                                                                 "finished"]).order_by("planned_date")[:10])
    for order in orders:
        order.late = late.get(order.pk, "")
    return orders


@requires(VIEWER)
def subsystem_detail(request, pk):
    subsystem = get_object_or_404(Subsystem.objects.select_related("telescope__site", "parent"), pk=pk)
    sites_bring_up_to_date([subsystem.telescope.site])
    plans = planning_selectors.plans_with_plots(subsystem)
    return render(
        request,
        "registry/subsystem_detail.html",
        {
            "subsystem": subsystem,
            "site": subsystem.telescope.site,
            # A mirror subsystem in service without its mirror record: no reflectance, so no recoat line is judged.
            "mirror_missing": subsystem.kind in TRAIN_KINDS and not subsystem.retired_on
            and not hasattr(subsystem, "mirror"),
            "plans": plans,
            "expected_use": planning_selectors.expected_use_by_month(subsystem, plans),
            "records": subsystem.service_records.select_related(
                "plan", "performed_by", "created_by", "corrects", "corrected_by__created_by", "work_order"
            ),
            "readings": subsystem.readings.select_related("taken_by", "withdrawn_by")[:50],
            "children": subsystem.children.in_service(),
            # Where its work goes now, when retired; before retiring, the orders retiring would leave open.
            "successors": services.successors_of(subsystem) if subsystem.retired_on else [],
            "predecessors": services.predecessors_of(subsystem),  # in service: the units of its kind it may replace
            "open_orders": [] if subsystem.retired_on else _open_orders_of_it_and_parts(subsystem),
            "today": site_today(subsystem.telescope.site),  # the retire form's day, and its latest
            "hazard_labels": [HAZARDS.get(h, h) for h in subsystem.hazards],
            "history": changes(subsystem, limit=5),
            "history_label": "registry.subsystem",
            "history_pk": subsystem.pk,
        },
    )


@requires(ENGINEER)
def subsystem_retire(request, pk):
    subsystem = get_object_or_404(Subsystem.objects.select_related("telescope__site"), pk=pk)
    if (visit := posted_only(request, subsystem.get_absolute_url())) is not None:
        return visit
    site = subsystem.telescope.site
    form = RetireForm(request.POST)
    if not form.is_valid():
        messages.error(request, "Not retired: " + "; ".join(e for errors in form.errors.values() for e in errors))
        return redirect(subsystem)
    try:
        services.subsystem_retire(subsystem, form.cleaned_data["retired_on"] or site_today(site),
                                  form.cleaned_data["reason"], request.user)
    except ValueError as exc:
        messages.error(request, f"Not retired: {exc}.")
    else:
        site_recompute(site)
        messages.success(request, f"{subsystem.name} retired; its records and history are kept.")
        if open_orders := _open_orders_of_it_and_parts(subsystem):
            listed = ", ".join(f"{o.number} ({o.get_state_display().lower()}" + (f", on {o.on_parts})" if o.on_parts
                                                                                 else ")") for o in open_orders)
            whose = "it and its parts" if any(o.on_parts for o in open_orders) else "it"
            messages.warning(request, f"Work orders still open for {whose}: {listed}. Finish or withdraw "
                                      "them: a retired subsystem takes no new work, and the recoat of a retired mirror "
                                      "is no longer counted as downtime.")
    return redirect(subsystem)


def _open_orders_of_it_and_parts(subsystem: Subsystem) -> list:
    """The work orders not yet done on ``subsystem`` or any of its parts, which retiring it retires too
    (``selectors.open_orders_of``), each with ``on_parts``: the names of the parts it names ("" when it names only
    ``subsystem``). A reviewer retired an optical tube and was told of none of the four recoat orders of its mirror."""
    names = {subsystem.pk: subsystem.name, **{part.pk: part.name for part in parts_of(subsystem)}}
    orders = open_orders_of(list(names))
    named: dict[int, set[str]] = {}
    for model in (WorkOrderItem, RequiredReading):
        for order, part in model.objects.filter(work_order__in=orders, subsystem__in=names).exclude(
                subsystem=subsystem).values_list("work_order_id", "subsystem_id"):
            named.setdefault(order, set()).add(names[part])
    for order in orders:
        order.on_parts = ", ".join(sorted(named.get(order.pk, ())))
    return orders
