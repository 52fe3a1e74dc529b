"""Template filters that write a plan's figures as its sentences and tables do (``planning.selectors.rate_text``,
``planning.models.figure_text``), so a figure a page writes by hand reads as it does everywhere else."""
from django import template

from observatory_ops.planning.metrics import READING
from observatory_ops.planning.models import figure_text
from observatory_ops.planning.selectors import rate_text

register = template.Library()


@register.filter
def rate(value) -> str:
    """``{{ state.dust_hours_per_day|rate }}``: a rate per day as ``rate_text`` writes it; empty for no value."""
    return "" if value is None or value == "" else rate_text(float(value))


@register.filter
def reading(value, unit) -> str:
    """``{{ r.value|reading:r.unit }}``: a reading as the trigger table and the due list write it (``figure_text``:
    4 significant figures, a reflectance to its decimals); empty for no value."""
    return "" if value is None or value == "" else figure_text(READING, unit, float(value))


@register.filter
def days_past(status) -> int | str:
    """How many days an overdue plan (a ``PlanStatus``) is past its limit at its site's today, as the due list's CSV
    counts them ("days past the limit"; a manager's review found it only there); "" for a plan whose last service is
    unknown (how long is not known) or with no day reached."""
    from observatory_ops.planning.services import site_today

    if status.last_service_unknown or status.forecast_date is None:
        return ""
    return (site_today(status.plan.subsystem.telescope.site) - status.forecast_date).days
