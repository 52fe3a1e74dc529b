"""Reads about people: the records that name them."""
from __future__ import annotations

from collections import defaultdict

from django.contrib.auth import get_user_model
from django.db import models
from django.db.models import ForeignObjectRel, Q

from observatory_ops.workorders.models import listed


def protecting_fields() -> dict[type[models.Model], list[str]]:
    """Each model whose records keep the people named on them, with those fields: the foreign keys to the user that
    refuse the person's deletion (PROTECT or RESTRICT), read from the models, so a record added later is not missed.
    Found today: a service record's performer and writer, a reading's and a reflectance measurement's taker and
    withdrawer, a work order's assignee, writer, finisher and countersigner, a checklist tick's recorder, a recoat
    plan's writer, an API token's creator and a crew member chosen by account. The change history keeps no such key
    (it keeps the id), nor the admin's log (deleted with the person)."""
    found: dict[type[models.Model], list[str]] = defaultdict(list)
    for relation in get_user_model()._meta.get_fields(include_hidden=True):
        if isinstance(relation, ForeignObjectRel) and relation.on_delete in (models.PROTECT, models.RESTRICT):
            found[relation.related_model].append(relation.field.name)
    return dict(found)


def records_naming(people: list[int]) -> dict[int, str]:
    """For each person of ``people`` (ids) named on records (``protecting_fields``), those records in words: "3 service
    records and 1 work order". A person named on none is left out. One query for each model."""
    counted: dict[int, dict[type[models.Model], set[int]]] = defaultdict(lambda: defaultdict(set))
    for model, fields in protecting_fields().items():
        naming = Q()
        for name in fields:
            naming |= Q(**{f"{name}__in": people})
        for pk, *named in model._default_manager.filter(naming).values_list("pk", *fields):
            for person in set(named) & set(people):
                counted[person][model].add(pk)
    return {
        person: listed([
            f"{len(pks):,} {model._meta.verbose_name if len(pks) == 1 else model._meta.verbose_name_plural}"
            for model, pks in by_model.items()
        ])
        for person, by_model in counted.items()
    }
