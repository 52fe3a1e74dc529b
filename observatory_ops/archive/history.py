"""Reads of the change history kept by django-simple-history: who changed what, when, before and after.

Every page that shows a history reads it here, so it is shown one way everywhere: times in the time zone
of the record's site (UTC for a record of no site) to the minute, people by their full names, related
records by their names. The CSV export takes the same changes with times as ISO 8601 in UTC.
"""
from __future__ import annotations

import datetime as dt
import json
import zoneinfo
from collections import defaultdict
from dataclasses import dataclass, field

from django.apps import apps
from django.contrib.auth import get_user_model
from django.core.exceptions import FieldDoesNotExist
from django.db import models
from django.utils import dateformat

from observatory_ops.registry.models import Site, crew_weekdays_text

KIND = {"+": "created", "~": "changed", "-": "deleted"}
UTC = zoneinfo.ZoneInfo("UTC")
#: How times are written on the pages (as the rest of the site writes them); the zone is said beside.
SHOWN_TIME = "d M Y H:i"
#: Links followed from a record to its site: trigger, plan, subsystem, telescope, site is the longest.
SITE_LINKS = 5
#: Records whose history is shown within their owner's (model label -> [(part's model label, its link to the owner,
#: what a part is called)]): a plan's triggers are edited on the plan's admin page, and a changed limit is a change of
#: the plan as its people think of it. Deleted parts stay in (their history names their owner).
PARTS = {"planning.serviceplan": [("planning.trigger", "plan", "trigger")]}
#: Fields stored in a code a person does not read, with how they are written out: the crew's ISO weekday digits
#: ("12345") as the site's pages write them ("Mon–Fri").
IN_WORDS = {(Site, "crew_weekdays"): crew_weekdays_text}


@dataclass
class Change:
    when: dt.datetime  # as stored: UTC
    who: str
    kind: str
    reason: str
    fields: list[tuple[str, str, str]] = field(default_factory=list)  # (field's label, before, after) as shown
    zone: zoneinfo.ZoneInfo = UTC  # the record's site's zone, or UTC for a record of no site
    fields_exported: list[tuple[str, str, str]] = field(default_factory=list)  # field's name, times in ISO UTC
    part: str = ""  # a part's change in its owner's history (``PARTS``): which part, e.g. "trigger Dust hours"

    @property
    def zone_name(self) -> str:
        return self.zone.key

    @property
    def when_shown(self) -> str:
        return dateformat.format(self.when.astimezone(self.zone), SHOWN_TIME)


def audited_model(label: str) -> type[models.Model] | None:
    """The model for an ``app_label.model_name`` label, if it keeps a history."""
    try:
        model = apps.get_model(label)
    except (LookupError, ValueError):
        return None
    return model if hasattr(model, "history") else None


def site_of(record: models.Model, links: int = SITE_LINKS) -> Site | None:
    """The site a record belongs to: the record itself if it is one, else the first site reached through
    the records it points to, in the order its model declares them (a work order's site, a subsystem's
    telescope's site, a trigger's plan's subsystem's ...); None for a record of no site (a user)."""
    if isinstance(record, Site):
        return record
    if links == 0:
        return None
    for link in record._meta.concrete_fields:
        if not link.many_to_one and not link.one_to_one or link.related_model is get_user_model():
            continue
        linked = getattr(record, link.name)
        found = site_of(linked, links - 1) if linked is not None else None
        if found is not None:
            return found
    return None


def zone_of(record: models.Model) -> zoneinfo.ZoneInfo:
    """The time zone a record's times are shown in: its site's, or UTC when it belongs to no site."""
    site = site_of(record)
    return site.zone if site is not None else UTC


def person(user) -> str:
    """A person as the pages name them: full name, or the user name when no name is given."""
    return (user.get_full_name() or user.username) if user is not None else ""


def _text(value) -> str:
    return "" if value is None else str(value)


def _shown(model, name: str, value, zone: zoneinfo.ZoneInfo) -> tuple[str, str]:
    """A changed value as a person reads it, and as the CSV writes it: a related record by its name (a
    person by full name), not its id; a coded value in words (``IN_WORDS``); a time in ``zone`` to the minute on
    the page, ISO 8601 UTC in the CSV."""
    try:
        model_field = model._meta.get_field(name)
    except FieldDoesNotExist:  # a field since removed from the model: show the stored value
        return _text(value), _text(value)
    in_words = IN_WORDS.get((model, name))
    if in_words is not None and value:
        try:
            text = in_words(value)
        except ValueError:  # a value stored without validation, so not in the code: show it as stored
            text = _text(value)
        return text, text
    if isinstance(value, dt.datetime) and value.tzinfo is not None:
        return dateformat.format(value.astimezone(zone), SHOWN_TIME), value.astimezone(dt.UTC).isoformat()
    if isinstance(value, dt.date) and not isinstance(value, dt.datetime):  # as the pages write a day; ISO in the CSV
        return value.strftime("%d %b %Y"), value.isoformat()
    if isinstance(model_field, models.JSONField):  # lists and records kept as data: in words, and as JSON in the CSV
        return _data_in_words(value), "" if value is None else json.dumps(value, ensure_ascii=False)
    if isinstance(model_field, models.BooleanField) and value is not None:
        return ("yes" if value else "no"), _text(value)
    if model_field.many_to_many:  # the ids it held (``_held``): each record by its name
        found = model_field.related_model._default_manager.in_bulk(value)
        text = ", ".join(_named(found[pk]) if pk in found else _text(pk) for pk in value)
        return text, text
    if model_field.is_relation and value is not None:
        related = model_field.related_model._default_manager.filter(pk=value).first()
        if related is None:
            return _text(value), _text(value)
        text = _named(related)
        return text, text
    return _text(value), _text(value)


def _what_changed(old, new) -> tuple:
    """A record kept as data (a JSON object) changed in some of its parts: those parts alone, before and after, so
    that the change is not cut off the end of a long record (a year's review read "lift inputs: ... fixture k... ->
    ... fixture k...", the working load limit entered unseen). Anything else as it is."""
    if isinstance(old, dict) and isinstance(new, dict):
        keys = [key for key in dict.fromkeys([*old, *new]) if old.get(key) != new.get(key)]
        return {key: old.get(key) for key in keys}, {key: new.get(key) for key in keys}
    return old, new


def _data_in_words(value) -> str:
    """A JSON field's value as a person reads it (a tablet review read "{'points': [{'id': 1, 'energy': 'ac', ..."
    and "[]" in an order's history): a list's items joined with "; " ("none" when empty), a record (a kept isolation
    point) by the words it kept ("text"), any other record as its labelled parts, ids left out."""
    if value is None:
        return ""
    if isinstance(value, list):
        return "; ".join(_data_in_words(item) for item in value) or "none"
    if isinstance(value, dict):
        if "text" in value:
            return _data_in_words(value["text"])
        return "; ".join(f"{key.replace('_', ' ')}: {_data_in_words(item)}" for key, item in value.items()
                         if key != "id")
    return _text(value)


def _label(model, name: str) -> str:
    """A field as the pages name it: its label (``issued_at`` -> "issued at", a ``verbose_name`` where one is given);
    a field since removed from the model by its stored name. The CSV keeps the field's name, for programs."""
    try:
        return str(model._meta.get_field(name).verbose_name)
    except FieldDoesNotExist:
        return name


def _named(related: models.Model) -> str:
    """A related record by its name: a person by full name."""
    return person(related) if isinstance(related, get_user_model()) else str(related)


def changes(instance: models.Model, limit: int | None = None) -> list[Change]:
    """The instance's history, newest first, each change with the fields it changed (before, after); with the
    changes of its parts (``PARTS``), each saying which part it was."""
    zone = zone_of(instance)
    out = _changes(instance.history.all(), type(instance), zone, limit)
    for label, link, called in PARTS.get(instance._meta.label_lower, []):
        part_model = apps.get_model(label)
        histories = part_model.history.filter(**{f"{link}_id": instance.pk})
        for pk in sorted(set(histories.values_list("id", flat=True))):
            out += _changes(histories.filter(id=pk), part_model, zone, limit, part=called)
    out.sort(key=lambda c: c.when, reverse=True)
    return out[:limit] if limit else out


def _changes(history, model, zone: zoneinfo.ZoneInfo, limit: int | None, part: str = "") -> list[Change]:
    """The changes of one record's ``history`` (a queryset of its historical rows), newest first; ``part``: what the
    record is called in its owner's history (its name is added from the row). A save that changed no field and gave
    no reason (the admin's Save pressed on an unchanged page) is left out: the database keeps it, the list would only
    repeat the record's name."""
    records = list(history.select_related("history_user").order_by("-history_date", "-history_id"))
    held = {m2m.name: _held(history, m2m) for m2m in getattr(history.model, "_history_m2m_fields", ())}
    out = []
    for i, record in enumerate(records):
        if limit and len(out) == limit:
            break
        previous = records[i + 1] if i + 1 < len(records) else None
        diffs = []
        if previous is not None and record.history_type == "~":
            diffs = [
                (c.field, (_shown(model, c.field, old, zone)[0], _shown(model, c.field, c.old, zone)[1]),
                 (_shown(model, c.field, new, zone)[0], _shown(model, c.field, c.new, zone)[1]))
                for c in record.diff_against(previous, excluded_fields=list(held)).changes
                for old, new in [_what_changed(c.old, c.new)]  # the page shows the parts changed; the CSV all
            ]
            diffs += [
                (name, _shown(model, name, rows[previous.pk], zone), _shown(model, name, rows[record.pk], zone))
                for name, rows in held.items() if rows[previous.pk] != rows[record.pk]
            ]
            diffs.sort(key=lambda diff: diff[0])  # by field, as diff_against gives them
            if not diffs and not record.history_change_reason:
                continue
        user = record.history_user
        out.append(
            Change(
                when=record.history_date.astimezone(dt.UTC),
                who=person(user) if user else "system (command or background task)",
                kind=KIND.get(record.history_type, record.history_type),
                reason=record.history_change_reason or "",
                fields=[(_label(model, name), before[0], after[0]) for name, before, after in diffs],
                zone=zone,
                fields_exported=[(name, before[1], after[1]) for name, before, after in diffs],
                part=f"{part} {record.instance}" if part else "",
            )
        )
    return out


def _held(history, m2m: models.ManyToManyField) -> defaultdict[int, list[int]]:
    """What a many-to-many field the history keeps (its ``m2m_fields``) held at each of ``history``'s records: the
    related ids by the record's history id, in one query for them all (diff_against asks two for every change)."""
    rows = getattr(history.model, m2m.name).model.objects.filter(history__in=history.values("pk"))
    related = m2m.m2m_reverse_field_name()
    held: defaultdict[int, list[int]] = defaultdict(list)
    for record, pk in rows.order_by(related).values_list("history", related):
        held[record].append(pk)
    return held
