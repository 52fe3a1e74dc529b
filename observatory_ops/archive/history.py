"""Reads of the change history kept by django-simple-history: who changed what, when, before and after."""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from django.apps import apps
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


def changes(instance: models.Model, limit: int | None = None) -> list[Change]:
    """The instance's history, newest first, each change with the fields it changed (before, after)."""
    records = list(instance.history.select_related("history_user").order_by("-history_date", "-history_id"))
    out = []
    for i, record in enumerate(records[: limit or len(records)]):
        previous = records[i + 1] if i + 1 < len(records) else None
        diffs = []
        if previous is not None and record.history_type == "~":
            delta = record.diff_against(previous)
            diffs = [(c.field, _text(c.old), _text(c.new)) for c in delta.changes]
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
