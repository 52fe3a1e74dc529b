"""How a form's problems are listed in the frame's error summary (``templates/_error_summary.html``), and how a field
whose figure is questioned is marked, for the forms of every app."""
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
    before its first colon are the label short of its note in brackets or after a comma ("Actual hours: enter a
    number" for "Actual hours (person-hours)", "Others on the crew: ..." for "Others on the crew, without an
    account"); "Part: ..." does not name "Part number"."""
    message, label = str(message), str(label or "").strip()
    head, colon, _ = message.partition(":")
    head = head.strip()
    # The words before the colon are the label short of its note in brackets or after a comma, not any first word:
    # "Part: ..." does not name "Part number".
    return _opens_with(message, label) or bool(colon and head and head.casefold() == _label_stem(label))


def _label_stem(label: str) -> str:
    """A label short of a note in brackets or after a comma: "Actual hours (person-hours)" -> "actual hours",
    "Others on the crew, without an account" -> "others on the crew"."""
    return label.split(" (")[0].split(",")[0].strip().casefold()


@register.filter
def refused(messages) -> bool:
    """``{% if messages|refused %}``: whether the page's messages hold an error (a refusal said as a message: "Not done:
    ..."), which base.html announces as it does a form's problems."""
    return any(m.level_tag == "error" for m in messages or ())


@register.filter
def questioned(field):
    """``{{ field|questioned }}``: a field's input whose figure the form questions (the finish form's hours far above
    the estimate, a reading beyond its limit): marked invalid, and described by the question said after it
    (``<auto_id>_questioned``) as well as by its help text and problems, so a screen reader says why it is asked."""
    own = field.field.widget.attrs.get("aria-describedby") or field.aria_describedby
    described = " ".join(filter(None, (own, f"{field.auto_id}_questioned")))
    return field.as_widget(attrs={"aria-invalid": "true", "aria-describedby": described})
