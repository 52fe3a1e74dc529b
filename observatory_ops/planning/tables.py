import django_tables2 as tables
from django.utils.html import format_html

from .models import PlanStatus


class DueTable(tables.Table):
    plans = tables.CheckBoxColumn(accessor="plan_id", verbose_name="", attrs={"th__input": {"title": "tick all"}})
    status = tables.Column(order_by=("urgency", "forecast_date"))
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

    def render_status(self, value):
        return format_html('<span class="status status-{}">{}</span>', value, value)

    def render_subsystem(self, value, record):
        return format_html('<a href="{}">{}</a>', record.plan.subsystem.get_absolute_url(), value)

    def render_metric(self, record):
        return record.get_metric_display()

    def render_progress(self, record):
        return f"{record.value:,.4g} / {record.limit:,.4g} {record.unit}".strip()

    def render_forecast_date(self, value, record):
        if record.earliest and record.latest and record.earliest != record.latest:
            return format_html(
                '{}<br><span class="muted">{} to {}</span>',
                value.strftime("%d %b %Y"), record.earliest.strftime("%d %b"), record.latest.strftime("%d %b %Y"),
            )
        return value.strftime("%d %b %Y")

    def render_reason(self, value):
        return format_html('<span class="reason">{}</span>', value)
