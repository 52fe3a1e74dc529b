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

from .catalogue import KINDS
from .models import Subsystem, Telescope, is_shared_enclosure, name_key, validate_hazards

#: The file's ``format`` and ``version``: a file of another format, or of a later version, is refused by name.
FORMAT = "observatory_ops telescope register"
VERSION = 1
#: What each record carries (the models' own field names), and nothing else: a key the file adds is refused.
SUBSYSTEM_FIELDS = ("kind", "name", "hazards", "no_hazards_found")
PLAN_FIELDS = ("name", "task", "steps_powered", "steps", "steps_restore", "tools", "parts", "readings", "hazards",
               "estimated_hours", "dust_sensitivity", "basis", "active")
TRIGGER_FIELDS = ("metric", "limit", "quantity", "direction")
TOP_FIELDS = {"format", "version", "site", "telescope", "written_on", "subsystems"}


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
    #: Plans already there that differ from the file (left as they are: changed in the admin, not by a file).
    plans_differing: list[str] = field(default_factory=list)
    #: What the file cannot bring, to enter by hand: each a sentence.
    to_enter: list[str] = field(default_factory=list)

    @property
    def summary(self) -> str:
        def count(items: list, what: str) -> str:
            return f"{len(items)} {what}{'' if len(items) == 1 else 's'}"

        text = f"{count(self.subsystems_added, 'subsystem')} and {count(self.plans_added, 'plan')} added"
        if self.subsystems_there or self.plans_there:
            text += (f"; {count(self.subsystems_there, 'subsystem')} and {count(self.plans_there, 'plan')} already "
                     "there, left as they are")
        if self.plans_differing:
            one = len(self.plans_differing) == 1
            text += (f"; of those, {count(self.plans_differing, 'plan')} differ{'s' if one else ''} from the file "
                     f"({'; '.join(self.plans_differing)}): change {'it' if one else 'them'} in the admin if the file "
                     "is right")
        return text


def read_register_file(data: bytes) -> dict:
    """The file's JSON, checked for its format and version; RegisterFileError naming what it is instead."""
    if not data.strip():
        raise RegisterFileError(["the file is empty"])
    try:
        content = json.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise RegisterFileError(["the file is not UTF-8 text: is it a register written by this tool?"]) from None
    except json.JSONDecodeError as exc:
        raise RegisterFileError([f"the file is not JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})"]) from None
    except RecursionError:  # a register review's deeply nested file
        raise RegisterFileError(["the file nests its records too deeply to be a register"]) from None
    if not isinstance(content, dict) or content.get("format") != FORMAT:
        raise RegisterFileError([f'the file is not a telescope register (its "format" is not "{FORMAT}")'])
    if content.get("version") != VERSION:
        raise RegisterFileError([f"the register's version is {content.get('version')!r}; this tool reads version "
                                 f"{VERSION}"])
    if not isinstance(content.get("subsystems"), list):
        raise RegisterFileError(['the register has no list of "subsystems"'])
    if unknown := sorted(set(content) - TOP_FIELDS):
        raise RegisterFileError([f"the register has unknown field{'s' if len(unknown) > 1 else ''} "
                                 f"{', '.join(unknown)}: it reads only what `register export` writes"])
    return content


def register_import(telescope: Telescope, content: dict, by, today: dt.date) -> RegisterRead:
    """Read ``content`` (``read_register_file``) into ``telescope``, as ``by``, on the site's ``today`` (the day its
    plans count from, their last service unknown): all or nothing. RegisterFileError lists every problem, each named
    by its place in the file.

    A subsystem keeps its kind's hazards whatever the file says, as one registered in the admin does (a register
    review's file without the AC distribution's hazards made an order that needed no isolation). At a site whose
    telescopes share one enclosure, an enclosure already registered there is not registered again."""
    from observatory_ops.planning.services import site_recompute  # planning builds on the register

    problems: list[str] = []
    read = RegisterRead()
    site = telescope.site
    standing = list(telescope.subsystems.filter(retired_on__isnull=True))
    shared = {s.kind: s for s in Subsystem.objects.filter(telescope__site=site, retired_on__isnull=True)
              if is_shared_enclosure(site, s.kind)}
    with transaction.atomic():
        made: dict[str, Subsystem | None] = {}  # by name key; None: refused above
        for i, entry in enumerate(content["subsystems"], start=1):
            place = f"subsystem {i}"
            if not isinstance(entry, dict):
                problems.append(f"{place}: not a record of a subsystem")
                continue
            place = f"subsystem {i} ({entry.get('name', 'no name')!s:.60})"
            if unknown := sorted(set(entry) - {*SUBSYSTEM_FIELDS, "part_of", "plans"}):
                problems.append(f"{place}: unknown field{'s' if len(unknown) > 1 else ''} {', '.join(unknown)}")
                continue
            if wrong := _types_wrong(Subsystem, entry, SUBSYSTEM_FIELDS):
                problems.extend(f"{place}: {problem}" for problem in wrong)
                continue
            name, kind = entry.get("name", ""), entry.get("kind", "")
            key = name_key(name) if isinstance(name, str) else ""
            alike = next((s for s in standing if name_key(s.name) == key), None)
            if alike is not None and alike.kind != kind:
                problems.append(f"{place}: {alike.name} is already on {telescope.name} as a subsystem of another kind "
                                f"({alike.get_kind_display()}); rename one of them")
                made[key] = None
                continue
            subsystem = alike or (shared.get(kind) if is_shared_enclosure(site, kind) else None)
            if subsystem is not None:
                read.subsystems_there.append(subsystem.name if subsystem.telescope_id == telescope.pk else
                                             f"{subsystem.name} (the enclosure {site.name}'s telescopes share)")
            else:
                subsystem = _subsystem_made(telescope, entry, place, made, problems, by)
                if subsystem is None:
                    made[key] = None
                    continue
                read.subsystems_added.append(subsystem.name)
                standing.append(subsystem)
            made[key] = subsystem
            _plans_import(subsystem, entry.get("plans", []), place, by, today, read, problems)
        if problems:
            transaction.set_rollback(True)
            raise RegisterFileError(problems)
        site_recompute(site)
    read.to_enter = _to_enter(telescope)
    return read


def _subsystem_made(telescope: Telescope, entry: dict, place: str, made: dict, problems: list[str], by
                    ) -> Subsystem | None:
    """The subsystem of ``entry``, saved with its kind's hazards and those the file gives; None, with the problems
    said, when it cannot be."""
    parent_name = entry.get("part_of")
    parent = None
    if parent_name is not None:
        if not isinstance(parent_name, str):
            problems.append(f"{place}: part_of must be the name of a subsystem above it in the file, or null")
            return None
        known = made.get(name_key(parent_name), False)
        if known is None:
            problems.append(f"{place}: part of {parent_name!r}, which was refused above")
            return None
        parent = known or next((s for s in telescope.subsystems.filter(retired_on__isnull=True)
                                if name_key(s.name) == name_key(parent_name)), None)
        if parent is None:
            problems.append(f"{place}: part of {parent_name!r}, which comes after it in the file or is not on the "
                            "telescope")
            return None
    given = entry.get("hazards", [])
    kind = KINDS.get(entry.get("kind"))
    hazards = [*(kind.hazards if kind else ()), *(h for h in given if not kind or h not in kind.hazards)]
    subsystem = Subsystem(telescope=telescope, parent=parent, **{
        name: entry[name] for name in SUBSYSTEM_FIELDS if name in entry and name != "hazards"}, hazards=hazards)
    if not _valid(subsystem, place, problems, exclude=["in_service_since", "retired_on"]):
        return None
    subsystem._history_user = by
    subsystem._change_reason = "read in from a register file"
    subsystem.save()
    return subsystem


def _to_enter(telescope: Telescope) -> list[str]:
    """What the file cannot bring that the telescope's work needs, each a sentence (a register review was told nothing
    of it): its isolation points, its mirrors' records, its subsystems' in-service days, and plans for a subsystem
    read in with none."""
    from observatory_ops.mirrors.models import TRAIN_KINDS, Mirror  # the mirrors build on the register
    from observatory_ops.workorders.models import IsolationPoint  # the work orders build on the register

    said = []
    if not IsolationPoint.objects.filter(telescope=telescope).exists():
        said.append(f"{telescope.name} has no isolation points: register them (AC mains first) before any work that "
                    "needs a lockout can be issued")
    subsystems = list(telescope.subsystems.filter(retired_on__isnull=True).prefetch_related("plans"))
    mirrors = set(Mirror.objects.filter(subsystem__in=subsystems).values_list("subsystem_id", flat=True))
    if bare := [s.name for s in subsystems if s.kind in TRAIN_KINDS and s.pk not in mirrors]:
        whose = "its" if len(bare) == 1 else "each one's"
        said.append(f"no mirror record for {', '.join(bare)}: enter {whose} size, material and last coating under "
                    "Mirrors")
    if undated := [s.name for s in subsystems if s.in_service_since is None]:
        said.append(f"{len(undated)} subsystem{'s have' if len(undated) > 1 else ' has'} no in-service date: give "
                    "those you know under Subsystems (the reliability page counts hours from it)")
    if planless := [s.name for s in subsystems if not s.plans.all()]:
        said.append(f"no service plan for {', '.join(planless)}")
    return said


def _plans_import(subsystem: Subsystem, plans, place: str, by, today: dt.date, read: RegisterRead,
                  problems: list[str]) -> None:
    if not isinstance(plans, list):
        problems.append(f'{place}: "plans" is not a list')
        return
    there = {name_key(p.name): p for p in subsystem.plans.prefetch_related("triggers")}
    in_file: set[str] = set()
    for j, entry in enumerate(plans, start=1):
        where = f"{place}, plan {j}"
        if not isinstance(entry, dict):
            problems.append(f"{where}: not a record of a plan")
            continue
        where = f"{place}, plan {j} ({entry.get('name', 'no name')!s:.60})"
        if unknown := sorted(set(entry) - {*PLAN_FIELDS, "triggers"}):
            problems.append(f"{where}: unknown field{'s' if len(unknown) > 1 else ''} {', '.join(unknown)}")
            continue
        if wrong := _types_wrong(ServicePlan, entry, PLAN_FIELDS):
            problems.extend(f"{where}: {problem}" for problem in wrong)
            continue
        key = name_key(entry.get("name", ""))
        if key in in_file:
            problems.append(f"{where}: a second plan of this name on the subsystem in the file")
            continue
        in_file.add(key)
        triggers = entry.get("triggers", [])
        if not isinstance(triggers, list) or not triggers:
            problems.append(f"{where}: a plan needs at least one trigger")
            continue
        if key in there:
            plan = there[key]
            read.plans_there.append(f"{subsystem.name}: {plan.name}")
            if _differs(plan, entry):
                read.plans_differing.append(f"{subsystem.name}: {plan.name}")
            continue
        plan = ServicePlan(subsystem=subsystem, counting_from=today, counting_from_given=False,
                           **{name: entry[name] for name in PLAN_FIELDS if name in entry})
        if "hazards" in entry:
            try:  # not checked by the model's field (the admin's form checks it): checked here
                validate_hazards(entry["hazards"])
            except ValidationError as exc:
                unknown = [h for h in entry["hazards"] if not isinstance(h, str) or h not in _hazard_codes()] \
                    if isinstance(entry["hazards"], list) else []
                problems.append(f"{where}: hazards: {' '.join(exc.messages)}" + (
                    f" ({', '.join(map(str, unknown))} is not one)" if unknown else ""))
                continue
        if not _valid(plan, where, problems, exclude=["subsystem"]):
            continue
        plan._history_user = by
        plan._change_reason = "read in from a register file"
        plan.save()
        read.plans_added.append(f"{subsystem.name}: {plan.name}")
        for k, values in enumerate(triggers, start=1):
            spot = f"{where}, trigger {k}"
            if not isinstance(values, dict) or (unknown := sorted(set(values) - set(TRIGGER_FIELDS))):
                problems.append(f"{spot}: not a record of a trigger" if not isinstance(values, dict) else
                                f"{spot}: unknown field{'s' if len(unknown) > 1 else ''} {', '.join(unknown)}")
                continue
            if wrong := _types_wrong(Trigger, values, TRIGGER_FIELDS):
                problems.extend(f"{spot}: {problem}" for problem in wrong)
                continue
            trigger = Trigger(plan=plan, **values)
            if _valid(trigger, spot, problems, exclude=["plan"]):
                trigger._history_user = by
                trigger._change_reason = "read in from a register file"
                trigger.save()


def _hazard_codes() -> set[str]:
    from observatory_ops.workorders.cautions import HAZARDS  # the cautions' codes

    return set(HAZARDS)


def _differs(plan: ServicePlan, entry: dict) -> bool:
    """Whether the plan already there differs from the file's: a field, or its triggers."""
    if any(name in entry and entry[name] != getattr(plan, name) for name in PLAN_FIELDS):
        return True
    stored = sorted(tuple(getattr(t, name) for name in TRIGGER_FIELDS) for t in plan.triggers.all())
    given = sorted(tuple(t.get(name, Trigger._meta.get_field(name).get_default()) for name in TRIGGER_FIELDS)
                   for t in entry.get("triggers", []) if isinstance(t, dict))
    return stored != given


def _types_wrong(model, entry: dict, names) -> list[str]:
    """Each value of ``entry`` of another JSON type than ``model``'s field takes, in words: Django's checks turn a
    list into its text and true into 1 (a register review's steps as a list printed as one line of brackets, and a
    limit of true stored as 1)."""
    wrong = []
    for name in names:
        if name not in entry or entry[name] is None:
            continue
        value, kind = entry[name], model._meta.get_field(name).get_internal_type()
        if kind in ("CharField", "TextField") and not isinstance(value, str):
            wrong.append(f"{name}: must be text")
        elif kind == "FloatField" and (isinstance(value, bool) or not isinstance(value, int | float)):
            wrong.append(f"{name}: must be a number")
        elif kind == "FloatField" and not (abs(value) < 1e300):
            wrong.append(f"{name}: {value!r} is no usable number")
        elif kind == "BooleanField" and not isinstance(value, bool):
            wrong.append(f"{name}: must be true or false")
        elif kind == "JSONField" and not isinstance(value, list):
            wrong.append(f"{name}: must be a list")
    return wrong


def _valid(record, place: str, problems: list[str], exclude: list[str]) -> bool:
    """Whether ``record`` passes the model's own checks (as the admin's); each problem named by ``place`` and field."""
    try:
        record.full_clean(exclude=exclude)
    except ValidationError as exc:
        errors = exc.message_dict if hasattr(exc, "error_dict") else {"": exc.messages}
        problems.extend(f"{place}: {name + ': ' if name and name != '__all__' else ''}{' '.join(messages)}"
                        for name, messages in errors.items())
        return False
    except (TypeError, ValueError, OverflowError) as exc:  # a value of the wrong type (a list for a number)
        problems.append(f"{place}: {exc}")
        return False
    return True
