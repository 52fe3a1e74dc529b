"""How a form's problems are listed in the frame's error summary (``templates/_error_summary.html``), for the forms
of every app."""
from django import template

register = template.Library()


def _opens_with(text: str, start: str) -> bool:
    """``text`` begins with ``start`` as whole words (any case): "Actual hours (person-hours)" with "Actual hours",
    not "Findings" with "Find"."""
    return bool(start) and text[:len(start)].casefold() == start.casefold() and not text[len(start):][:1].isalnum()


@register.filter
def names_field(message, label) -> bool:
    """``{% if e|names_field:field.label %}``: whether a field's error ``message`` already names the field at its
    start, so the summary writes the message alone rather than "label: message" with the label twice. It does when
    it begins with the label ("Fan used (pcs): enter how many were used" for "Fan used (pcs)"), or when the words
    before its first colon begin the label ("Actual hours: enter a number" for "Actual hours (person-hours)",
    "Others on the crew: ..." for "Others on the crew, without an account")."""
    message, label = str(message), str(label or "").strip()
    head, colon, _ = message.partition(":")
    return _opens_with(message, label) or (bool(colon) and _opens_with(label, head.strip()))
