"""Template filters that write measured quantities as the rest of the site does (``logbook.quantities``)."""
from django import template

from observatory_ops.logbook.quantities import reflectance_text

register = template.Library()


@register.filter
def reflectance(value) -> str:
    """``{{ state.current|reflectance|default:"–" }}``: ``reflectance_text``, or empty for no value."""
    return "" if value is None or value == "" else reflectance_text(float(value))
