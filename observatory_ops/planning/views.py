from django.shortcuts import render
from django_tables2 import RequestConfig

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import VIEWER
from observatory_ops.exports import csv_response

from . import selectors
from .filters import DueFilter
from .tables import DueTable


@requires(VIEWER)
def due_list(request):
    filtered = DueFilter(request.GET, queryset=selectors.due_rows())
    if request.GET.get("export") == "csv":
        rows = (
            (
                s.status, s.plan.subsystem.telescope.site.name, s.plan.subsystem.telescope.name, s.plan.subsystem.name,
                s.plan.name, s.get_metric_display(), round(s.value, 3), s.limit, s.unit, s.forecast_date, s.earliest,
                s.latest, s.reason,
            )
            for s in filtered.qs
        )
        header = ("status", "site", "telescope", "subsystem", "service", "trigger", "value", "limit", "unit",
                  "forecast", "earliest", "latest", "why")
        return csv_response("due-list.csv", header, rows)
    table = DueTable(filtered.qs)
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(request, "planning/due_list.html", {"filter": filtered, "table": table})
