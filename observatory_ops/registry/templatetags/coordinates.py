"""The one way pages write a site's position (``registry.models.latitude_text`` and ``longitude_text``)."""
from django import template

from observatory_ops.registry.models import latitude_text, longitude_text

register = template.Library()


@register.filter
def coordinates(site) -> str:
    """``{{ site|coordinates }}``: "39.607° N, 110.374° W", so a longitude's side of Greenwich is never guessed
    from its sign."""
    return f"{latitude_text(site.latitude_deg)}, {longitude_text(site.longitude_deg)}"
