import django_tables2 as tables

from .models import PlanStatus
from .selectors import DUE_ORDER


class DueTable(tables.Table):
    """Columns, sorting and paging of the due list; the rows are written by planning/_due_table.html.

    site.css lays the columns out for a narrow screen by their position in ``sequence``: keep the two in step.
    """

    plans = tables.CheckBoxColumn(accessor="plan_id", verbose_name="", attrs={"th__input": {"title": "tick all"}})
    status = tables.Column(order_by=DUE_ORDER)  # ties broken as the CSV and the API break them
    site = tables.Column(accessor="plan__subsystem__telescope__site__name", verbose_name="Site")
    telescope = tables.Column(accessor="plan__subsystem__telescope__name", verbose_name="Telescope")
    subsystem = tables.Column(accessor="plan__subsystem__name", verbose_name="Subsystem")
    plan = tables.Column(accessor="plan__name", verbose_name="Service")
    metric = tables.Column(verbose_name="Trigger")
    progress = tables.Column(empty_values=(), orderable=False, verbose_name="Now / limit")
    forecast_date = tables.Column(verbose_name="Forecast")
    reason = tables.Column(orderable=False, verbose_name="Why")

    class Meta:
        model = PlanStatus
        fields = ()
        sequence = (
            "plans", "status", "site", "telescope", "subsystem", "plan", "metric", "progress", "forecast_date", "reason"
        )
        attrs = {"class": "due-table"}
        order_by = ("status",)
