"""Template filters that write a part's quantity with its unit as the finish form and the paper do
(``workorders.models.amount_text``)."""
from django import template

from observatory_ops.workorders.models import amount_text

register = template.Library()


@register.filter
def amount(quantity, unit) -> str:
    """``{{ use.quantity_planned|amount:use.part.unit }}``: "1 set", "2 sets", "0.5 m" (``amount_text``), or empty
    for no quantity, so that ``|default:"–"`` stands in for it."""
    return "" if quantity is None or quantity == "" else amount_text(float(quantity), str(unit or ""))
