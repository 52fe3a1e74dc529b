"""Reads of the change history kept by django-simple-history: who changed what, when, before and after."""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from django.apps import apps
from django.core.exceptions import FieldDoesNotExist
from django.db import models

KIND = {"+": "created", "~": "changed", "-": "deleted"}


@dataclass
class Change:
    when: dt.datetime
    who: str
    kind: str
    reason: str
    fields: list[tuple[str, str, str]] = field(default_factory=list)  # (field, before, after)


def audited_model(label: str) -> type[models.Model] | None:
    """The model for an ``app_label.model_name`` label, if it keeps a history."""
    try:
        model = apps.get_model(label)
    except (LookupError, ValueError):
        return None
    return model if hasattr(model, "history") else None


def _text(value) -> str:
    return "" if value is None else str(value)


def _shown(model, name: str, value) -> str:
    """A changed value as a person reads it: a related record by its name, not its id."""
    try:
        field = model._meta.get_field(name)
    except FieldDoesNotExist:  # a field since removed from the model: show the stored value
        return _text(value)
    if field.is_relation and value is not None:
        related = field.related_model._default_manager.filter(pk=value).first()
        return str(related) if related is not None else _text(value)
    return _text(value)


def changes(instance: models.Model, limit: int | None = None) -> list[Change]:
    """The instance's history, newest first, each change with the fields it changed (before, after)."""
    records = list(instance.history.select_related("history_user").order_by("-history_date", "-history_id"))
    out = []
    for i, record in enumerate(records[: limit or len(records)]):
        previous = records[i + 1] if i + 1 < len(records) else None
        diffs = []
        if previous is not None and record.history_type == "~":
            delta = record.diff_against(previous)
            model = type(instance)
            diffs = [(c.field, _shown(model, c.field, c.old), _shown(model, c.field, c.new)) for c in delta.changes]
        user = record.history_user
        out.append(
            Change(
                when=record.history_date,
                who=(user.get_full_name() or user.username) if user else "system (command or background task)",
                kind=KIND.get(record.history_type, record.history_type),
                reason=record.history_change_reason or "",
                fields=diffs,
            )
        )
    return out
