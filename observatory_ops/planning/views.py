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
        header = ("status", "site", "subsystem", "plan", "trigger", "value", "limit", "unit", "rate",
                  "forecast_date", "earliest", "latest", "reason")
        rows = ([record[k] for k in header] for record in map(selectors.due_record, filtered.qs))
        return csv_response("due-list.csv", header, rows)
    table = DueTable(filtered.qs)
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(request, "planning/due_list.html", {"filter": filtered, "table": table})
