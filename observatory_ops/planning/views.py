from django.contrib import messages
from django.db.models import Model
from django.http import HttpResponseBadRequest
from django.shortcuts import get_object_or_404, redirect, render
from django.utils import timezone
from django_tables2 import RequestConfig

from observatory_ops.access.decorators import posted_only, requires
from observatory_ops.access.roles import ENGINEER, VIEWER
from observatory_ops.exports import csv_response
from observatory_ops.registry.models import Telescope
from observatory_ops.workorders.selectors import orders_for_plans, telescopes_out

from . import selectors
from .filters import DueFilter
from .models import ServicePlan
from .services import plan_steps_from_catalogue, site_today, sites_bring_up_to_date
from .tables import DueTable


@requires(VIEWER)
def due_list(request):
    filtered = DueFilter(request.GET, queryset=selectors.due_rows())
    chosen = filtered.chosen_site()
    sites_bring_up_to_date([chosen] if chosen else None)
    # A filter that cannot be applied (an unknown site, a status that does not exist) is said so: on the
    # page the rest is shown, a download is refused rather than made without it.
    unapplied = filtered.unapplied()
    if request.GET.get("export") == "csv":
        if unapplied:
            return HttpResponseBadRequest("; ".join(unapplied), content_type="text/plain; charset=utf-8")
        # Dated: "days past the limit" counts to the day it was made (each site's today). Filtered to one site, the
        # name gives that site's slug and today (a handover review could not tell two sites' lists apart); across
        # sites, UTC's today (the sites' todays may differ).
        named = f"due-list-{chosen.slug}-{site_today(chosen):%Y-%m-%d}" if chosen else (
            f"due-list-{timezone.now().date():%Y-%m-%d}")
        return csv_response(f"{named}.csv", selectors.DUE_CSV_HEADER, map(selectors.due_csv_row, filtered.qs))
    for problem in unapplied:
        messages.warning(request, problem)
    table = DueTable(filtered.qs)
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    rows = [row.record for row in table.page.object_list]
    on_orders = orders_for_plans(r.plan_id for r in rows)
    for record in rows:
        record.on_orders = on_orders.get(record.plan_id, [])
    out = telescopes_out([chosen] if chosen else None)
    # What the list is filtered by, in the title and the count above it: a screen reader hears a filtered list's
    # page as it heard the whole one otherwise (an accessibility review).
    chosen_values = getattr(filtered.form, "cleaned_data", {})  # validated when the rows were filtered
    fields = filtered.form.fields
    shown = [f"{fields[name].label.lower()} {_filter_word(fields[name], value)}"
             for name, value in chosen_values.items() if value not in (None, "")]
    context = {"filter": filtered, "table": table, "telescopes_out": out, "filtered_by": "; ".join(shown),
               "not_computed": selectors.not_computed_counts([chosen] if chosen else None), **_links(request, table)}
    return render(request, "planning/due_list.html", context)


def _filter_word(field, value) -> str:
    """A filter's chosen value as the page names it: a telescope with its site (several sites may have a "T1"), a
    kind by its label, anything else as it reads."""
    if isinstance(value, Telescope):
        return f"{value.site.name}: {value}"
    if isinstance(value, Model):  # read when the form was checked; its choices would be another query
        return str(value)
    return str(dict(getattr(field, "choices", ())).get(value, value))


def _links(request, table) -> dict:
    """Header sort links and page links that keep the filters (the rows template writes them as is), the sorted
    column's aria-sort, and each column's header words by name (the cells' labels on a narrow screen)."""

    def query(**changes) -> str:
        params = request.GET.copy()
        params.pop("export", None)
        for key, value in changes.items():
            params[key] = value
        return params.urlencode()

    headers = []
    for column in table.columns:
        if column.name == "plans" or not column.orderable:
            headers.append(("" if column.name == "plans" else column.header, "", "", ""))
            continue
        css, sort = "orderable", ""
        if column.is_ordered:
            descending = column.order_by_alias.is_descending
            css += " desc" if descending else " asc"
            sort = "descending" if descending else "ascending"
        headers.append(
            (column.header, query(**{table.prefixed_order_by_field: column.order_by_alias.next}), css, sort)
        )
    page, field = table.page, table.prefixed_page_field
    return {
        "headers": headers,
        "labels": {column.name: column.header for column in table.columns},
        "previous_page": query(**{field: page.previous_page_number()}) if page.has_previous() else "",
        "next_page": query(**{field: page.next_page_number()}) if page.has_next() else "",
    }


@requires(ENGINEER)
def plan_catalogue_steps(request, pk):
    """Give the plan its catalogue plan's present steps (the subsystem page's button, shown while they differ)."""
    plan = get_object_or_404(ServicePlan.objects.select_related("subsystem"), pk=pk)
    if (visit := posted_only(request, plan.subsystem.get_absolute_url())) is not None:
        return visit
    try:
        plan_steps_from_catalogue(plan, request.user)
    except ValueError as exc:
        messages.info(request, f"{exc}.")
    else:
        messages.success(request, f"{plan.name}: its steps and tools are now the catalogue's present ones; its history "
                                  "keeps the earlier ones. Orders already made keep theirs.")
    return redirect(f"{plan.subsystem.get_absolute_url()}#plan-{plan.pk}")
