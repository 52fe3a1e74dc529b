"""A telescope's register as a file: its subsystems in service with their service plans and triggers, written as JSON
(``register_of``) and read into another telescope (``register_import``), of this installation or another.

An export review: a second site, starting with the same kind of telescope, wanted this site's subsystems and plans,
and the only way out was the whole installation's backup. What is copied is what describes the equipment and its
maintenance: kinds, names, parts, hazards, plans' steps, tools, readings and triggers. What belongs to the units
themselves stays behind: serial numbers, in-service and retire days, notes, and when each plan was last served. A
plan read in counts with its last service unknown (due now, as one added in the admin) until its first service is
logged. Retired subsystems are not written.

The import is all or nothing, and idempotent: a subsystem of the same name and kind already on the telescope, or a
plan of the same name already on it, is left as it is and counted as already there."""
from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass, field

from django.core.exceptions import ValidationError
from django.db import transaction

from observatory_ops.planning.models import ServicePlan, Trigger

from .models import Subsystem, Telescope

#: The file's ``format`` and ``version``: a file of another format, or of a later version, is refused by name.
FORMAT = "observatory_ops telescope register"
VERSION = 1
#: What each record carries (the models' own field names), and nothing else: a key the file adds is refused.
SUBSYSTEM_FIELDS = ("kind", "name", "hazards", "no_hazards_found")
PLAN_FIELDS = ("name", "task", "steps_powered", "steps", "steps_restore", "tools", "parts", "readings", "hazards",
               "estimated_hours", "dust_sensitivity", "basis", "active")
TRIGGER_FIELDS = ("metric", "limit", "quantity", "direction")


def register_of(telescope: Telescope, today: dt.date) -> dict:
    """The telescope's subsystems in service (a part under its parent, by name), each with its plans and their
    triggers, as the file holds them; ``today`` is said in it, as the day it was written."""
    subsystems = list(telescope.subsystems.filter(retired_on__isnull=True).select_related("parent")
                      .prefetch_related("plans__triggers").order_by("pk"))
    return {
        "format": FORMAT, "version": VERSION, "site": telescope.site.name, "telescope": telescope.name,
        "written_on": today.isoformat(),
        "subsystems": [{
            **{name: getattr(s, name) for name in SUBSYSTEM_FIELDS},
            "part_of": s.parent.name if s.parent_id else None,
            "plans": [{
                **{name: getattr(p, name) for name in PLAN_FIELDS},
                "triggers": [{name: getattr(t, name) for name in TRIGGER_FIELDS}
                             for t in sorted(p.triggers.all(), key=lambda t: t.pk)],
            } for p in sorted(s.plans.all(), key=lambda p: p.pk)],
        } for s in subsystems],
    }


class RegisterFileError(ValueError):
    """The file cannot be read in: ``problems`` each name the place in the file (subsystem, plan, trigger) and what is
    wrong. Nothing was stored."""

    def __init__(self, problems: list[str]):
        super().__init__("; ".join(problems))
        self.problems = problems


@dataclass
class RegisterRead:
    """What an import did: subsystems and plans added, and those already on the telescope (left as they were)."""

    subsystems_added: list[str] = field(default_factory=list)
    plans_added: list[str] = field(default_factory=list)
    subsystems_there: list[str] = field(default_factory=list)
    plans_there: list[str] = field(default_factory=list)

    @property
    def summary(self) -> str:
        def count(items: list, what: str) -> str:
            return f"{len(items)} {what}{'' if len(items) == 1 else 's'}"

        text = f"{count(self.subsystems_added, 'subsystem')} and {count(self.plans_added, 'plan')} added"
        if self.subsystems_there or self.plans_there:
            text += (f"; {count(self.subsystems_there, 'subsystem')} and {count(self.plans_there, 'plan')} already "
                     "on the telescope, left as they are")
        return text


def read_register_file(data: bytes) -> dict:
    """The file's JSON, checked for its format and version; RegisterFileError naming what it is instead."""
    try:
        content = json.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise RegisterFileError(["the file is not UTF-8 text: is it a register written by this tool?"]) from None
    except json.JSONDecodeError as exc:
        raise RegisterFileError([f"the file is not JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})"]) from None
    if not isinstance(content, dict) or content.get("format") != FORMAT:
        raise RegisterFileError([f'the file is not a telescope register (its "format" is not "{FORMAT}")'])
    if content.get("version") != VERSION:
        raise RegisterFileError([f"the register's version is {content.get('version')!r}; this tool reads version "
                                 f"{VERSION}"])
    if not isinstance(content.get("subsystems"), list):
        raise RegisterFileError(['the register has no list of "subsystems"'])
    return content


def register_import(telescope: Telescope, content: dict, by, today: dt.date) -> RegisterRead:
    """Read ``content`` (``read_register_file``) into ``telescope``, as ``by``, on the site's ``today`` (the day its
    plans count from, their last service unknown): all or nothing. RegisterFileError lists every problem, each named
    by its place in the file."""
    from observatory_ops.planning.services import site_recompute  # planning builds on the register

    problems: list[str] = []
    read = RegisterRead()
    existing = {(s.name, s.kind): s for s in telescope.subsystems.filter(retired_on__isnull=True)}
    with transaction.atomic():
        made: dict[str, Subsystem] = {}
        for i, entry in enumerate(content["subsystems"], start=1):
            place = f"subsystem {i}"
            if not isinstance(entry, dict):
                problems.append(f"{place}: not a record of a subsystem")
                continue
            place = f"subsystem {i} ({entry.get('name', 'no name')!s:.60})"
            if unknown := sorted(set(entry) - {*SUBSYSTEM_FIELDS, "part_of", "plans"}):
                problems.append(f"{place}: unknown field{'s' if len(unknown) > 1 else ''} {', '.join(unknown)}")
                continue
            subsystem = existing.get((entry.get("name"), entry.get("kind")))
            if subsystem is not None:
                read.subsystems_there.append(subsystem.name)
            else:
                parent_name = entry.get("part_of")
                parent = made.get(parent_name) or next(
                    (s for (name, _), s in existing.items() if name == parent_name), None) if parent_name else None
                if parent_name and parent is None:
                    problems.append(f"{place}: part of {parent_name!r}, which comes after it in the file or is not "
                                    "on the telescope")
                    continue
                subsystem = Subsystem(telescope=telescope, parent=parent,
                                      **{name: entry[name] for name in SUBSYSTEM_FIELDS if name in entry})
                if not _valid(subsystem, place, problems, exclude=["in_service_since", "retired_on"]):
                    continue
                subsystem._history_user = by
                subsystem._change_reason = "read in from a register file"
                subsystem.save()
                read.subsystems_added.append(subsystem.name)
            made[subsystem.name] = subsystem
            _plans_import(subsystem, entry.get("plans", []), place, by, today, read, problems)
        if problems:
            transaction.set_rollback(True)
            raise RegisterFileError(problems)
        site_recompute(telescope.site)
    return read


def _plans_import(subsystem: Subsystem, plans, place: str, by, today: dt.date, read: RegisterRead,
                  problems: list[str]) -> None:
    if not isinstance(plans, list):
        problems.append(f'{place}: "plans" is not a list')
        return
    there = set(subsystem.plans.values_list("name", flat=True))
    for j, entry in enumerate(plans, start=1):
        where = f"{place}, plan {j}"
        if not isinstance(entry, dict):
            problems.append(f"{where}: not a record of a plan")
            continue
        where = f"{place}, plan {j} ({entry.get('name', 'no name')!s:.60})"
        if unknown := sorted(set(entry) - {*PLAN_FIELDS, "triggers"}):
            problems.append(f"{where}: unknown field{'s' if len(unknown) > 1 else ''} {', '.join(unknown)}")
            continue
        if entry.get("name") in there:
            read.plans_there.append(f"{subsystem.name}: {entry['name']}")
            continue
        plan = ServicePlan(subsystem=subsystem, counting_from=today, counting_from_given=False,
                           **{name: entry[name] for name in PLAN_FIELDS if name in entry})
        triggers = entry.get("triggers", [])
        if not isinstance(triggers, list) or not triggers:
            problems.append(f"{where}: a plan needs at least one trigger")
            continue
        if not _valid(plan, where, problems, exclude=["subsystem"]):
            continue
        plan._history_user = by
        plan._change_reason = "read in from a register file"
        plan.save()
        there.add(plan.name)
        read.plans_added.append(f"{subsystem.name}: {plan.name}")
        for k, values in enumerate(triggers, start=1):
            spot = f"{where}, trigger {k}"
            if not isinstance(values, dict) or (unknown := sorted(set(values) - set(TRIGGER_FIELDS))):
                problems.append(f"{spot}: not a record of a trigger" if not isinstance(values, dict) else
                                f"{spot}: unknown field{'s' if len(unknown) > 1 else ''} {', '.join(unknown)}")
                continue
            trigger = Trigger(plan=plan, **values)
            if _valid(trigger, spot, problems, exclude=["plan"]):
                trigger.save()


def _valid(record, place: str, problems: list[str], exclude: list[str]) -> bool:
    """Whether ``record`` passes the model's own checks (as the admin's); each problem named by ``place`` and field."""
    try:
        record.full_clean(exclude=exclude)
    except ValidationError as exc:
        errors = exc.message_dict if hasattr(exc, "error_dict") else {"": exc.messages}
        problems.extend(f"{place}: {name + ': ' if name and name != '__all__' else ''}{' '.join(messages)}"
                        for name, messages in errors.items())
        return False
    except (TypeError, ValueError) as exc:  # a value of the wrong type (a list for a number)
        problems.append(f"{place}: {exc}")
        return False
    return True
