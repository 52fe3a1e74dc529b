"""Writes of work orders: creation from due items or ad hoc, lifecycle moves, checklist ticks, and finishing.

Finishing is the one place that turns a work order into service records, readings and stock changes,
then recomputes the site's due states. It is claimed with a conditional UPDATE (state must still be
"underway"), so two people finishing at once yield one completion on SQLite and PostgreSQL alike.
"""
from __future__ import annotations

import datetime as dt
import graphlib
import heapq
import math
from collections import Counter
from collections.abc import Collection, Sequence
from dataclasses import dataclass

from django.db import transaction
from django.db.models import Q
from django.utils import dateformat, timezone

from observatory_ops.access.roles import ENGINEER, TECHNICIAN, has_role
from observatory_ops.archive.history import person
from observatory_ops.calc import lifting
from observatory_ops.calc.triggers import DUE, OVERDUE
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.logbook.quantities import QUANTITIES, reflectance_text, value_problem
from observatory_ops.logbook.services import due_of_work
from observatory_ops.planning.metrics import READING
from observatory_ops.planning.models import ServicePlan, part_lines
from observatory_ops.planning.services import site_recompute, site_today, sites_bring_up_to_date
from observatory_ops.registry.catalogue import (
    BRAKE_AIR_BACK,
    HAND_BACK,
    MOVES_NO_AXIS,
    OUT_OF_CONTROL,
    OUT_OF_CONTROL_AND,
    OUT_OF_CONTROL_PARKED,
    PARK_AT_SERVICE,
    PARK_PLAIN,
    PARKINGS,
    RELEASE,
    RESTORE,
    RESTORES_BRAKE_AIR,
    RETURNS_TO_SERVICE,
    TAKES_OUT_OF_CONTROL,
    TELESCOPE_STEPS,
    asks_result,
    is_brake_air_step,
    is_hand_back,
    is_release_step,
    is_tag_out_step,
    release_step_for,
)
from observatory_ops.registry.models import Site, Subsystem

from .cautions import (
    HAZARDS,
    ISOLATION_HAZARDS,
    ISOLATION_UNTICKED,
    ISOLATION_UNTICKED_FINDINGS,
    ISOLATION_UNTICKED_REQUIRED,
    LOCKOUT_STEP,
    in_words,
    is_lockout_step,
    needs_isolation,
)
from .lifecycle import TRANSITIONS, role_needed, role_refusal
from .models import (
    PART_QUANTITY_MAX,
    ChecklistTick,
    CrewMember,
    IsolationPoint,
    Part,
    PartUse,
    RequiredReading,
    State,
    WorkOrder,
    WorkOrderItem,
    part_quantity_not_whole,
    part_quantity_too_many,
)
from .selectors import (
    Alongside,
    brake_air_vented,
    came_out_on,
    crew_state,
    hand_backs_held,
    hazards_missing,
    hazards_of,
    isolation_gaps,
    isolation_kept,
    isolation_lines,
    isolation_points,
    latest_ticks,
    lift_inputs,
    mirror_out_on,
    moves_held,
    order_plans,
    recoat_began_on,
    recoat_hands_back,
    register_part,
    second_person_refusal,
    telescope_out_notices,
    unlabelled,
    unticked_lines,
    work_alongside,
)

#: The longest name the finish form takes for one of the crew (names are separated by commas).
CREW_NAME_MAX = 80
#: The longest result a tick keeps (``models.ChecklistTick.result``).
RESULT_LONGEST = 200
class Refused(Exception):
    """A move or a completion that is not allowed; the message says why. Nothing was changed."""


def lockout_missing(hazards: Sequence[str], steps: Sequence[str]) -> bool:
    """True when the hazards call for isolation but no step is the lockout step (in any of its wordings)."""
    return needs_isolation(hazards) and not any(is_lockout_step(s) for s in steps)


def isolated_steps(steps: Sequence[str]) -> tuple[int, range] | None:
    """Where an order's steps isolate the energy, as ``steps_in_groups`` placed it: the position of the lockout
    step (its first occurrence, in its present wording or an earlier one: ``cautions.is_lockout_step``) and the
    positions of the steps done locked out after it, up to the step that removes the locks (in any of its wordings:
    ``catalogue.is_release_step``), which then stands at the range's ``stop``; None when no step is the lockout step.

    Only those two steps are looked for, never other wording. Without the release after the lockout step
    (a recoat phase ends its locked-out work in words of its own, or the steps were edited by hand) every step
    after the lockout step counts as done locked out: the locks may still be on there, and steps ticked in
    their written order never meet a refusal (``checklist_tick_set``).
    """
    lines = [step.strip() for step in steps]
    lockout = next((i for i, line in enumerate(lines) if is_lockout_step(line)), None)
    if lockout is None:
        return None
    release = next((i for i in range(lockout + 1, len(lines)) if is_release_step(lines[i])), len(lines))
    return lockout, range(lockout + 1, release)


def lockout_sequence_problem(hazards: Sequence[str], steps: Sequence[str], plans: Sequence[ServicePlan]) -> str:
    """Why an order's steps, where its hazards call for isolation, do not isolate the energy in sequence; "" when they
    do (or no step is the lockout step: ``lockout_missing`` says that).

    Four things are refused, in this order: the step that removes the locks (``catalogue.is_release_step``) before the
    lockout step; a step that brings energy or service back (``catalogue.RESTORE``, ``RETURNS_TO_SERVICE``: brake air,
    a test under power, the return to robotic control) after the lockout with no release before it (none at all, or
    the release placed after it), which would count
    as locked-out work, ticked while the locks are still on (a safety review deleted the release: the restoring steps
    were then ticked while another crew was locked out); a step of a plan's work (``ServicePlan.steps``, done locked
    out, as ``steps_in_groups`` places it), in its words or under its plan's "[label]", standing before the lockout
    step or after the release; and no step at all between the two (nothing is done locked out). A step the engineer
    wrote in words of their own is placed by the engineer.
    """
    if not needs_isolation(hazards):
        return ""
    lines = [step.strip() for step in steps]
    placed = isolated_steps(lines)
    if placed is None:
        return ""
    lockout, locked_out = placed
    early = next((i for i in range(lockout) if is_release_step(lines[i])), None)
    if early is not None:
        return (f"Step {early + 1} removes the locks, but the energy is isolated only at step {lockout + 1} (the "
                "lockout step): put the lockout step after the steps done under power and before the work.")
    restoring = next((i for i in locked_out
                      if unlabelled(lines[i]) in RESTORE | RETURNS_TO_SERVICE or is_hand_back(lines[i])), None)
    if restoring is not None:
        return (f"Step {restoring + 1} (\"{_shortened(unlabelled(lines[restoring]))}\") brings energy or service "
                "back after the lockout, but no step before it removes the locks: put the step that removes the "
                "locks (\"When the work is done and everyone is clear ..., remove the locks and tags ...\") "
                "after the work and before it.")
    work = _locked_out_work(plans)
    for i, line in enumerate(lines):
        if i not in locked_out and i != lockout and unlabelled(line) in work:
            where = (f"before the lockout (step {lockout + 1})" if i < lockout
                     else f"after the locks come off (step {locked_out.stop + 1})")
            named = _shortened(unlabelled(line))
            return (f"Step {i + 1} (\"{named}\") is work its plan does with the energy isolated, but "
                    f"it stands {where}: move it between the lockout step and the step that removes the locks.")
    if not locked_out:
        after = (f"the step that removes the locks (step {locked_out.stop + 1})" if locked_out.stop < len(lines)
                 else "the end of the steps")
        return (f"No step comes between the lockout (step {lockout + 1}) and {after}: the work done with the energy "
                "isolated goes there.")
    return ""


def _shortened(step: str) -> str:
    """A step's words as a refusal quotes them: at most 80 characters."""
    return step if len(step) <= 80 else f"{step[:79].rstrip()}…"


def _locked_out_work(plans: Sequence[ServicePlan]) -> set[str]:
    """The steps the plans do locked out (``_steps_for``), less any that a plan also does under power or after."""
    work, other = set(), set()
    for plan in plans:
        before, during, after = plan.step_groups
        work.update(during or ([] if before or after else [plan.task or plan.name]))
        other.update(before + after)
    return {step for step in work - other if not _orders_own(step)}


def steps_in_groups(
    hazards: Sequence[str], powered: list[str], work: list[str], restore: list[str], release: str = RELEASE,
    brake_air: bool = False,
) -> list[str]:
    """An order's steps from its three groups: with energy to isolate, the lockout step between the steps under
    power and the work, and ``release`` between the work and the restoring; without, the groups one after the
    other. The groups say where each step belongs, so no step is placed by its wording.

    ``release`` is the step that ends the isolated work: the catalogue's step that removes the locks, naming what
    the order's subsystems can set moving (``catalogue.release_step_for``), or the work's own wording where it ends
    otherwise (a mirror removal keeps the locks on until the reinstall; the reinstall removes them only once the
    balance is restored). With ``brake_air`` (the lockout vents an air brake's air and the restoring does not bring
    it back: ``brake_air_back``) the air comes back first, with everyone clear (``catalogue.BRAKE_AIR_BACK``).
    """
    if not needs_isolation(hazards):
        return powered + work + restore
    return powered + [LOCKOUT_STEP] + work + [release] + ([BRAKE_AIR_BACK] if brake_air else []) + restore


def brake_air_back(subsystems: Sequence[Subsystem], hazards: Sequence[str], restore: Sequence[str]) -> bool:
    """Whether an order over ``subsystems`` adds ``catalogue.BRAKE_AIR_BACK``: its lockout vents the air of an
    air-released brake that none of its ``restore`` steps (a plan label before one ignored) brings back with everyone
    clear. Steps written by hand in a brake plan's words (``catalogue.RESTORES_BRAKE_AIR``: "the axis", "the brake")
    do for the order's own brakes only: a shared air supply also releases the other axes' brakes, so the step
    covering each axis is added unless every vented brake is one of the order's. An order made from plans drops
    those words and writes ``BRAKE_AIR_BACK`` once instead (``_steps_for``).

    Whose brake air the lockout vents is decided in one place, ``selectors.brake_air_vented``, which the warning to
    bleed a moving telescope's brake air reads too (``selectors.isolation_gaps``): here with the air points of the
    order's telescopes (one of a telescope's, or one of a subsystem the order works on) registered when the order is
    made, as its steps are, and the order's ``hazards`` for each of its telescopes: it is asked before the order
    exists, and by the edit form, where nothing says which telescope's work a hazard is (the warning judges each
    telescope by the hazards of the work there, ``selectors._hazards_by_telescope``)."""
    steps = {unlabelled(step).strip() for step in restore}
    if not needs_isolation(hazards) or BRAKE_AIR_BACK in steps:
        return False
    telescopes = {s.telescope_id for s in subsystems}
    air = IsolationPoint.objects.filter(
        Q(subsystem__isnull=True) | Q(subsystem__in=[s.pk for s in subsystems]),
        telescope_id__in=telescopes, energy=IsolationPoint.Energy.AIR,
    )
    vented = brake_air_vented({pk: hazards for pk in telescopes}, subsystems, list(air))
    if not steps & RESTORES_BRAKE_AIR:
        return bool(vented)
    # Steps in a brake plan's words bring back the air of the order's own brakes only.
    return any(brake not in found.worked_on for found in vented for brake in found.brakes)


def brake_air_problem(subsystems: Sequence[Subsystem], hazards: Sequence[str], steps: Sequence[str]) -> str:
    """Why steps written or edited by hand leave unrestored the brake air their lockout vents (``brake_air_back``, on
    the steps after the release): what to put in, and where; "" when nothing is missing. Looked at only where the
    release is one of the catalogue's wordings (``is_release_step``): a recoat phase's own release keeps its locks on
    or restores the air in its own steps."""
    lines = [line.strip() for line in steps if line.strip()]
    placed = isolated_steps(lines)
    if placed is None or placed[1].stop >= len(lines):
        return ""
    if not brake_air_back(subsystems, hazards, lines[placed[1].stop + 1:]):
        return ""
    return ("The lockout vents the air of the telescope's air-released brakes, but no step after the locks come off "
            "brings it back with everyone clear. Put this line in right after the step that removes the locks: "
            f"{BRAKE_AIR_BACK}")


def _plan_labels(plans: Sequence[ServicePlan]) -> dict[int, str]:
    """How each plan is named in an order's title and step prefixes: by its name, with its telescope when the
    order spans several telescopes, and with its subsystem when that still leaves two alike."""
    several = len({p.subsystem.telescope_id for p in plans}) > 1
    labels = {p.pk: f"{p.subsystem.telescope.name}: {p.name}" if several else p.name for p in plans}
    repeated = {label for label, count in Counter(labels.values()).items() if count > 1}
    for p in plans:
        if labels[p.pk] in repeated:
            where = f"{p.subsystem.telescope.name}: " if several else ""
            labels[p.pk] = f"{where}{p.subsystem.name}: {p.name}"
    return labels


def _steps_for(plans: Sequence[ServicePlan], labels: dict[int, str], hazards: Sequence[str]) -> str:
    """The plans' steps, each prefixed with its plan's label when there are several plans.

    Each plan's steps come in three groups (``ServicePlan.step_groups``); the order keeps three runs, each in
    plan order: all the steps under power, then (after the one lockout step) all the locked-out work, then
    (after the one release step) all the restoring. So no plan's locks come off while another plan's
    locked-out work is still to do. A powered or restoring step about the whole telescope that several plans on
    it share (closing the dome, parking: ``catalogue.TELESCOPE_STEPS``) is written once, for all of them.
    The restoring run puts every plan's return to service (``catalogue.RETURNS_TO_SERVICE``, and whatever that plan
    does after it) after all the plans' other restoring, so an axis drive goes back in service only once its brake's
    air is back and tested. The release names what all their subsystems can set moving (``catalogue.release_step_for``)
    and, where a plan tags out what fails its inspection, that the tag stays (``catalogue.is_tag_out_step``). Where the
    lockout vents brake air (``brake_air_back``, or a brake plan brings its air back) the air comes back in one step
    for every axis right after the release (``catalogue.BRAKE_AIR_BACK``), in place of each brake plan's own; and an
    order that took the observatory out of robotic and remote control hands it back at the very end (``_handed_back``),
    having taken it out once, first where its plans would say so more than once (``_out_of_control_once``).
    """
    isolating = needs_isolation(hazards)
    powered, work, restoring, in_service = [], [], [], []
    brake_air = tagged_out = False
    for plan in plans:
        before, during, after = plan.step_groups
        if not (before or during or after):
            during = [plan.task or plan.name]
        tagged_out = tagged_out or any(is_tag_out_step(step) for step in during)
        # The lockout and the release are the order's to add, once: not repeated from a plan that holds them; nor,
        # where it isolates, a brake plan's air (it covers one axis; the order's step covers them all, once).
        powered += [(plan, step) for step in before if not _orders_own(step)]
        work += [(plan, step) for step in during if not _orders_own(step)]
        after = [step for step in after if not _orders_own(step)]
        if isolating and any(is_brake_air_step(step) for step in after):
            brake_air = True
            after = [step for step in after if not is_brake_air_step(step)]
        back = next((i for i, step in enumerate(after) if step in RETURNS_TO_SERVICE), len(after))
        restoring += [(plan, step) for step in after[:back]]
        in_service += [(plan, step) for step in after[back:]]
    several = len(plans) > 1
    subsystems = list({p.subsystem_id: p.subsystem for p in plans}.values())
    restore = _shared_once(restoring + in_service, labels, several)
    return "\n".join(_handed_back(steps_in_groups(
        hazards, _out_of_control_once(powered, labels, several), _labelled(work, labels, several), restore,
        release_step_for(subsystems, tagged_out), brake_air or brake_air_back(subsystems, hazards, restore),
    )))


def _orders_own(step: str) -> bool:
    """The step is one an order adds itself (``steps_in_groups``): the lockout step or the release, in any wording."""
    return is_lockout_step(step) or is_release_step(step)


def _handed_back(lines: list[str]) -> list[str]:
    """An order's steps with ``catalogue.HAND_BACK`` last where a step takes the observatory out of robotic and remote
    control (``catalogue.TAKES_OUT_OF_CONTROL``, a plan label before it ignored) and none yet hands it back."""
    plain = {unlabelled(line).strip() for line in lines}
    return [*lines, HAND_BACK] if plain & TAKES_OUT_OF_CONTROL and HAND_BACK not in plain else lines


def _out_of_control_once(run: list[tuple[ServicePlan, str]], labels: dict[int, str], several: bool) -> list[str]:
    """The steps under power (``_shared_once``), taking the observatory out of robotic and remote control once: where
    they would say it more than once (plans in different words of the catalogue's, "... and close the enclosure" and
    "... and park the telescope", or on different telescopes), ``catalogue.OUT_OF_CONTROL`` comes first, before any
    plan's steps, and each plan keeps what its step did besides where it had it (``catalogue.OUT_OF_CONTROL_AND``),
    parking or closing written once for the telescope. ``HAND_BACK`` stays the one step that returns it, at the end.
    Only the catalogue's wordings are taken apart: a step the site wrote in words of its own stays as it was."""
    lines = _shared_once(run, labels, several)
    if sum(unlabelled(line).strip() in TAKES_OUT_OF_CONTROL for line in lines) < 2:
        return lines
    at_service = {plan.subsystem.telescope_id for plan, step in run if step == PARK_AT_SERVICE}

    def parts(plan, step):
        for rest in OUT_OF_CONTROL_AND.get(step, (step,)):
            yield PARK_AT_SERVICE if rest == PARK_PLAIN and plan.subsystem.telescope_id in at_service else rest

    apart = [(plan, rest) for plan, step in run for rest in parts(plan, step)]
    return [OUT_OF_CONTROL, *_shared_once(apart, labels, several)]


def _labelled(run: list[tuple[ServicePlan, str]], labels: dict[int, str], several: bool) -> list[str]:
    return [f"[{labels[plan.pk]}] {step}" if several else step for plan, step in run]


def _shared_once(run: list[tuple[ServicePlan, str]], labels: dict[int, str], several: bool) -> list[str]:
    """The run's steps, a step that several plans share written once: one about the whole telescope
    (``catalogue.TELESCOPE_STEPS``) shared by plans on that telescope, without a plan's label, or with the
    telescope's name when the order spans several telescopes; any other step shared by plans on one subsystem, with
    the subsystem's name when the order covers several. Any other step stays one per plan, with its plan's label:
    "check that the brake holds" is each brake's own.

    Merged so that every plan's steps keep their own order (a plan that tests under power before parking
    still does): a topological order of the steps, each plan's sequence as the constraints, ties going to
    the step met first. Plans that order two shared steps the other way round get their steps as written,
    each with its plan's label.
    """
    def key(plan, step):
        whose = None if step in TELESCOPE_STEPS else plan.subsystem_id
        return plan.subsystem.telescope_id, whose, step

    sharing = Counter(key(plan, step) for plan, step in run)
    if len(sharing) == len(run):
        return _labelled(run, labels, several)
    first_met = {}
    for index, (plan, step) in enumerate(run):
        first_met.setdefault(key(plan, step), (index, plan, step))
    order = graphlib.TopologicalSorter({k: set() for k in first_met})
    last_of: dict[int, tuple] = {}  # each plan's previous step: its steps need not stand together in the run
    for plan, step in run:
        if plan.pk in last_of:
            order.add(key(plan, step), last_of[plan.pk])
        last_of[plan.pk] = key(plan, step)
    try:
        order.prepare()
    except graphlib.CycleError:
        return _labelled(run, labels, several)
    telescopes = len({plan.subsystem.telescope_id for plan, _ in run}) > 1
    subsystems = len({plan.subsystem_id for plan, _ in run}) > 1
    ready, lines = [(first_met[k][0], k) for k in order.get_ready()], []
    heapq.heapify(ready)
    while ready:
        _, k = heapq.heappop(ready)
        _, plan, step = first_met[k]
        if sharing[k] == 1:
            lines += _labelled([(plan, step)], labels, several)
        elif k[1] is not None:  # one subsystem's plans share it
            where = f"{plan.subsystem.telescope.name}: " if telescopes else ""
            lines.append(f"[{where}{plan.subsystem.name}] {step}" if subsystems else step)
        else:
            lines.append(f"[{plan.subsystem.telescope.name}] {step}" if telescopes else step)
        order.done(k)
        for after in order.get_ready():
            heapq.heappush(ready, (first_met[after][0], after))
    return lines


#: The longest title an order keeps (``WorkOrder.title``).
TITLE_MAX = 200


def estimate_basis_of_plans(plans: Sequence[ServicePlan]) -> str:
    """Where an order's estimated hours come from when it is made from the due list: its plans' own estimates,
    added up, as the page and the paper say beside them."""
    if len(plans) == 1:
        return "the plan's own estimate"
    return "the plans' own estimates, " + " + ".join(f"{p.estimated_hours:g} h" for p in plans)


def _title(labels: list[str]) -> str:
    """The plans' labels joined with "; ", as many whole ones as fit in ``TITLE_MAX``, then "and N more": never cut
    in the middle of a word."""
    for shown in range(len(labels), 0, -1):
        rest = len(labels) - shown
        title = "; ".join(labels[:shown]) + (f" and {rest} more" if rest else "")
        if len(title) <= TITLE_MAX:
            return title
    tail = f" and {len(labels) - 1} more" if len(labels) > 1 else ""  # one label longer than a title by itself
    return labels[0][: TITLE_MAX - len(tail) - 1].rsplit(" ", 1)[0] + "…" + tail


def work_order_from_due(plans: Sequence[ServicePlan], by, planned_date: dt.date | None = None) -> WorkOrder:
    """One work order covering the given plans (selected on the due list), with steps from their templates: its
    title and its steps take the plans in the order given (the due list's, as ticked there). Its items keep the due
    reasons of the day it is made (``sheet.WHY_AS_OF`` says that day): states computed on an earlier day are brought
    up to date first (a due list left open over midnight, with no worker to recompute at night)."""
    sites_bring_up_to_date(list({p.subsystem.telescope.site_id: p.subsystem.telescope.site for p in plans}.values()))
    given = {plan.pk: position for position, plan in enumerate(plans)}
    plans = sorted(
        ServicePlan.objects.filter(pk__in=given).select_related("subsystem__telescope__site", "status"),
        key=lambda plan: given[plan.pk],
    )
    if not plans:
        raise Refused("select at least one due item")
    sites = {p.subsystem.telescope.site_id for p in plans}
    if len(sites) > 1:
        raise Refused("the selected items are at different sites; make one work order per site")
    subsystems = list({p.subsystem_id: p.subsystem for p in plans}.values())
    telescopes = {s.telescope_id for s in subsystems}
    hazards = hazards_of(subsystems, plans)
    # Condition-based (EN 13306) when a measured condition is what made an item due: its governing trigger is a
    # reading; a plan that merely has a reading trigger among others is due by the calendar or by use.
    condition_based = any(_due_by(p, READING) for p in plans)
    site = plans[0].subsystem.telescope.site
    tools = list(dict.fromkeys(tool for p in plans for tool in p.tools.splitlines() if tool.strip()))
    labels = _plan_labels(plans)
    with transaction.atomic():
        order = WorkOrder.objects.create(
            site=site,
            telescope=subsystems[0].telescope if len(telescopes) == 1 else None,
            title=_title([labels[p.pk] for p in plans]),
            order_type=WorkOrder.Type.CONDITION_BASED if condition_based else WorkOrder.Type.PREVENTIVE,
            planned_date=planned_date,
            estimated_hours=sum(p.estimated_hours for p in plans),
            estimate_basis=estimate_basis_of_plans(plans),
            steps=_steps_for(plans, labels, hazards),
            tools="\n".join(tools),
            hazards=hazards,
            lift_inputs=_mirror_lift(subsystems, hazards),
            created_by=by,
        )
        for plan in plans:
            status = getattr(plan, "status", None)
            WorkOrderItem.objects.create(
                work_order=order, subsystem=plan.subsystem, plan=plan, why=status.reason if status else ""
            )
            _require_plan_readings(order, plan)
        # Parts the site's register holds go on the order's parts list, each plan's quantities added up; the others
        # are named on the order's page and paper (``selectors.parts_unregistered``).
        register = list(Part.objects.filter(site=site))
        planned: Counter[Part] = Counter()
        for plan in plans:
            for name, quantity in part_lines(plan.parts):
                if (part := register_part(name, register)) is not None:
                    planned[part] += quantity
        for part, quantity in planned.items():  # one by one, so the audit trail records each
            PartUse.objects.create(work_order=order, part=part, quantity_planned=quantity)
    return order


def _require_plan_readings(order: WorkOrder, plan: ServicePlan) -> None:
    """The readings an order doing ``plan``'s work records: those its condition triggers watch, with their limits, and
    those the plan asks for (``ServicePlan.readings``)."""
    for trig in plan.triggers.all():
        if trig.metric == READING:
            sign = "at most" if trig.direction == "above" else "at least"
            _require_reading(order, plan.subsystem, trig.quantity, f"{sign} {trig.limit:g}")
    for wanted in plan.readings:
        _require_reading(order, plan.subsystem, wanted["quantity"], wanted.get("limit", ""))


def _due_by(plan: ServicePlan, metric: str) -> bool:
    """The plan is due (or overdue) now, by its governing trigger, and that trigger counts ``metric``
    (``PlanStatus``, as the last recompute left it; a plan never computed is due by nothing)."""
    status = getattr(plan, "status", None)
    return status is not None and status.status in (DUE, OVERDUE) and status.metric == metric


def _mirror_lift(subsystems: Sequence[Subsystem], hazards: Sequence[str]) -> dict | None:
    """A lift of a registered mirror gets its figures from the mirror's geometry straight away."""
    mirror = next((getattr(s, "mirror", None) for s in subsystems if hasattr(s, "mirror")), None)
    return mirror.lift_inputs if mirror is not None and "suspended_load" in hazards else None


def _require_reading(order: WorkOrder, subsystem: Subsystem, quantity: str, limit_text: str) -> None:
    if not order.required_readings.filter(subsystem=subsystem, quantity=quantity).exists():
        if quantity == "reflectance" and RequiredReading(limit_text=limit_text).limit_value is None:
            limit_text = _with_recoat_line(subsystem, limit_text)  # a limit the finish form judges stays as it is
        RequiredReading.objects.create(
            work_order=order, subsystem=subsystem, quantity=quantity, unit=QUANTITIES[quantity][1],
            limit_text=limit_text,
        )


def _with_recoat_line(subsystem: Subsystem, limit_text: str) -> str:
    """A mirror's reflectance row as the order asks for it, with the mirror's recoat line when the order was made
    (``mirrors.services.mirror_forecast``): the technician who measures after a clean sees on the page and the paper
    whether the mirror is still above it. In words, so the finish form does not judge it (``RequiredReading
    .limit_value``): below the line the mirror wants a recoat, not a second look at the figure. Unchanged for a
    subsystem without a mirror record or a coating, or where the line would not fit the row."""
    from observatory_ops.mirrors.models import Mirror  # mirrors builds on work orders
    from observatory_ops.mirrors.services import mirror_forecast

    mirror = Mirror.objects.filter(subsystem=subsystem).first()
    threshold = mirror_forecast(mirror).threshold if mirror is not None else None
    if threshold is None:
        return limit_text
    line = f"recoat line {reflectance_text(threshold)} (when the order was made)"
    joined = f"{limit_text}; {line}" if limit_text else line
    return joined if len(joined) <= RequiredReading._meta.get_field("limit_text").max_length else limit_text


def work_order_ad_hoc(
    site: Site, subsystems: Sequence[Subsystem], title: str, by, order_type: str = WorkOrder.Type.CORRECTIVE,
    steps: str = "", powered: str = "", restore: str = "", hazards: Sequence[str] = (),
    planned_date: dt.date | None = None, plans: Sequence[ServicePlan] = (),
) -> WorkOrder:
    """A work order not driven by a due item (a fault, an upgrade); its telescope is the subsystems' own
    when they share one.

    Its steps come in three groups, one step a line each: ``powered`` (under power, before isolation:
    parking, closing the dome, live tests), ``steps`` (the work) and ``restore`` (after the locks are off),
    put together by ``steps_in_groups``. ``hazards`` are the work's own beyond its subsystems'. With a
    ``planned_date`` it can be issued as it is (``selectors.moves_held``). ``plans``: service plans of its subsystems
    its work also does (a review's new brake pads left the pads' check due): an item each, in place of their
    subsystem's plain one, so finishing restarts them, with their hazards and the readings they ask for, as an order
    made from the due list for them has (a corrective order still counts one failure a subsystem:
    ``reliability.selectors.failures_of_site``).

    Work where the telescope can move ("moving_machinery") starts by taking the observatory out of robotic and remote
    control as its first step, as a planned order does: with nothing under power written, and parking the telescope;
    before the steps written under power otherwise, the catalogue's wording among them
    (``catalogue.TAKES_OUT_OF_CONTROL``) moved to the front, or the order's own (a review's order with "Take the
    telescope out of robotic control" typed had neither its own step nor the hand-back, and held up the other crew's
    hand-back). An order that takes it out of that control hands it back at the end (``_handed_back``).
    """
    if any(s.telescope.site_id != site.pk for s in subsystems):
        raise Refused("every subsystem must belong to the work order's site")
    if stray := [p for p in plans if p.subsystem_id not in {s.pk for s in subsystems}]:
        raise Refused(f"the plan {stray[0].name} is not one of the chosen subsystems' plans")
    telescopes = {s.telescope for s in subsystems}
    telescope = telescopes.pop() if len(telescopes) == 1 else None
    hazards = [h for h in HAZARDS if h in set(hazards_of(subsystems, list(plans))) | set(hazards)]
    groups = [[s.strip() for s in text.splitlines() if s.strip()] for text in (powered, steps, restore)]
    if "moving_machinery" in hazards:
        # First, before any step under power typed (a slew typed before it would move the telescope under the remote
        # scheduler): the catalogue's step typed among them, moved to the front; else the order's own.
        typed = [step for step in groups[0] if step in TAKES_OUT_OF_CONTROL]
        rest = [step for step in groups[0] if step not in TAKES_OUT_OF_CONTROL]
        groups[0] = [*typed[:1], *rest] if typed else [OUT_OF_CONTROL, *rest] if rest else [OUT_OF_CONTROL_PARKED]
    tagged_out = any(is_tag_out_step(step) for step in groups[1])
    lines = _handed_back(steps_in_groups(hazards, *groups, release_step_for(subsystems, tagged_out),
                                         brake_air_back(subsystems, hazards, groups[2])))
    with transaction.atomic():
        order = WorkOrder.objects.create(
            site=site, telescope=telescope, title=title, order_type=order_type, planned_date=planned_date,
            steps="\n".join(lines), hazards=hazards, created_by=by,
        )
        for subsystem in subsystems:
            done = [plan for plan in plans if plan.subsystem_id == subsystem.pk]
            for plan in done or [None]:
                WorkOrderItem.objects.create(work_order=order, subsystem=subsystem, plan=plan)
                if plan is not None:  # its readings, as an order made from the due list for it records them
                    _require_plan_readings(order, plan)
    return order


def _check_move(order: WorkOrder, action: str, by) -> None:
    transition = TRANSITIONS.get(action)
    if transition is None:
        raise Refused(f"unknown action {action!r}")
    if order.state not in transition.sources:
        raise Refused(
            f"cannot {action} a work order that is {order.get_state_display()}; "
            f"it must be {' or '.join(str(State(s).label) for s in transition.sources)}"
        )
    if why := role_refusal(order, action, by):
        raise Refused(why)


def work_order_move(order: WorkOrder, action: str, by, reason: str = "") -> WorkOrder:
    """Issue, start, countersign or withdraw. Finishing has its own function (it records the work)."""
    if action == "finish":
        raise Refused("finishing records hours, findings and readings: use the finish form")
    _check_move(order, action, by)
    now = timezone.now()
    fields = {"state": TRANSITIONS[action].target}
    if action in ("issue", "start") and lockout_missing(order.hazards, order.step_list):
        named = ", ".join(HAZARDS[h].lower() for h in order.hazards if h in ISOLATION_HAZARDS)
        raise Refused(
            f"{order.number}'s hazards ({named}) call for energy isolation, but none of its steps is the lockout "
            "step: an engineer edits the steps and puts it in where the energy is isolated, after the steps done "
            "under power (the edit page gives its wording)"
        )
    if action in ("issue", "start") and (
        problem := lockout_sequence_problem(order.hazards, order.step_list, order_plans(order))
    ):
        done = {"issue": "issued", "start": "started"}[action]
        raise Refused(f"{order.number} cannot be {done}: {problem[:1].lower()}{problem[1:]} An engineer edits its "
                      "steps.")
    if action in ("issue", "start") and (missing := hazards_missing(order)):
        # Its cautions, protective equipment and isolation would be missing from the page and the paper.
        named = ", ".join(HAZARDS[h].lower() for h in missing)
        raise Refused(
            f"{order.number} lacks hazards its subsystems now carry ({named}): an engineer brings it up to date "
            "first (the button on its page), which adds them and their cautions"
        )
    if reasons := moves_held(order).get(action):
        raise Refused("; and ".join(reasons))
    if action == "issue":
        if not order.step_list:
            raise Refused("a work order needs at least one step before it is issued")
        fields["issued_at"] = now
        # A draft made before the lockout step was reworded goes out with its present words; an order already
        # issued keeps the words it was printed with (``cautions.EARLIER_LOCKOUT_STEPS``).
        if (steps := _present_lockout_wording(order.steps)) != order.steps:
            fields["steps"] = order.steps = steps
    elif action == "start":
        fields["started_at"] = now
        if order.lift_inputs:  # the cell mass it starts with stays its record, whatever the mirror's says later
            fields["lift_inputs"] = lift_inputs(order)
    elif action == "countersign":
        if why := countersign_refusal(order, by):
            raise Refused(why)
        fields.update(countersigned_at=now, countersigned_by=by)
    elif action == "withdraw":
        if why := withdraw_refusal(order):
            raise Refused(why)
        if not reason.strip():
            raise Refused("say why the work order is withdrawn")
        fields["withdrawn_reason"] = reason.strip()[:200]
    passed_to = (hand_back_on_withdrawal(order) or ([], []))[1] if action == "withdraw" else []
    with transaction.atomic():
        if action == "withdraw":
            # Read again under the row's lock, which a tick takes too (checklist_tick_set): a lock ticked on meanwhile
            # would otherwise be withdrawn with the order (a diff review).
            if why := withdraw_refusal(WorkOrder.objects.select_for_update().get(pk=order.pk)):
                raise Refused(why)
        claimed = WorkOrder.objects.filter(pk=order.pk, state=order.state).update(**fields)
        if not claimed:
            raise Refused("someone else changed this work order meanwhile; reload it")
        _record_history(order, by, action)
        if passed_to:
            order.hand_back_left_to.set(passed_to)
        if order.recoat_phase:
            # A withdrawn phase stops its recoat: the telescope's counters expect use on its nights again; a phase
            # begun holds the recoat's first day (planning.services.recoat_downtime).
            site_recompute(order.site)
    return order


def withdraw_refusal(order: WorkOrder) -> str:
    """Why ``order`` may not be withdrawn as it stands, "" when it may: underway with its crew's locks on (an isolation
    point or its lockout ticked as locked, the removal of its locks not: ``selectors.Alongside.locked_out``). Withdrawn,
    its locks would be on nobody's record: another crew on the telescope would no longer wait for them
    (``still_locked_out`` reads orders underway) and nothing would say who is to take them off (a review withdrew an
    order so, its lockout ticked). Each lock comes off by the person who put it on (OSHA 29 CFR 1910.147(e)(3)); the
    page says it before the button."""
    if order.state != State.UNDERWAY or not crew_state(order).locked_out:
        return ""
    steps, found = order.step_list, isolated_steps(order.step_list)
    release = steps[found[1].stop] if found is not None and found[1].stop < len(steps) else ""
    then = (f"tick \"{unlabelled(release)}\"; then withdraw it, or finish it" if release else
            "finish it, saying so in its findings (it has no step that removes the locks)")
    return (
        f"{order.number}'s locks are on: an isolation point or its lockout is ticked as locked, and their removal is "
        "not. Withdrawn, they would be on nobody's record and other crews would no longer wait for them. Those who "
        f"put the locks on take them off and {then}"
    )


def hand_back_on_withdrawal(order: WorkOrder) -> tuple[list[WorkOrder], list[WorkOrder]] | None:
    """For an order underway whose own hand-back to robotic and remote control is not ticked while some of its work
    is, or which holds another's: (the finished or withdrawn orders whose hand-back it holds, the other orders at work
    on the telescope with a hand-back of their own that it passes to when withdrawn); None when its withdrawal leaves
    no hand-back undone. A recoat's realignment still to do holds the hand-backs left to it before it starts
    (``recoat_hands_back``): withdrawn so, it passes them on too (a diff review withdrew one as a stopped recoat asks,
    and the hand-back it held was nobody's). Withdrawn with no order to pass it to, nobody's order hands the telescope
    back (``withdrawal_hand_back_text`` says so before the withdrawal)."""
    if order.state not in (State.DRAFT, State.ISSUED, State.UNDERWAY):
        return None
    held = hand_backs_held(order)
    if order.state != State.UNDERWAY:
        if not held:
            return None
    elif not crew_state(order).hands_back or not (held or order.ticks.filter(ticked=True).exists()):
        return None
    to = [a.order for a in still_working(order) if a.hands_back]
    if (realignment := recoat_hands_back(order)) is not None:  # it hands back last (``left_to_the_last_crew``)
        to.append(realignment)
    return held, to


def withdrawal_hand_back_text(order: WorkOrder) -> str:
    """What withdrawing ``order`` does to the hand-back to robotic and remote control (``hand_back_on_withdrawal``),
    as its page says it beside the withdrawal; "" when nothing."""
    found = hand_back_on_withdrawal(order)
    if found is None:
        return ""
    held, takers = found
    if order.recoat_phase == "realignment" and held:
        # Withdrawn, nothing holds the hand-back for the collimation any more (a safety walk-through): said first.
        return ("This is the recoat's realignment: withdrawn, its telescope is left without its collimation check, "
                "and the reinstall's last step keeps the observatory out of robotic and remote control until a "
                "realignment is finished: plan one before anyone hands it back. "
                + _withdrawal_hand_back_words(order, held, takers))
    return _withdrawal_hand_back_words(order, held, takers)


def _withdrawal_hand_back_words(order: WorkOrder, held: list, takers: list) -> str:
    named = ", ".join(o.number for o in held)
    if takers:
        also = f", and the one {named} left to it," if held else ""
        if order.state == State.UNDERWAY:
            own = f"its hand-back to robotic and remote control{also}"
        else:  # a realignment not begun has none of its own to pass on: only those left to it
            own = f"the hand-back to robotic and remote control {named} left to it"
        return (f"Withdrawn, {own} passes to " + "; ".join(f"{o.number} {o.title}" for o in takers)
                + f", {still_at_it(takers)} (their page says they hold it).")
    return ("Withdrawn, nobody's order hands the telescope back to robotic and remote control"
            f"{f' ({named} left its hand-back to this order)' if held else ''}: once nobody is at work on it, whoever "
            "withdraws this order hands it back or leaves it out of control, and says which in the reason.")


def still_at_it(orders: Sequence[WorkOrder]) -> str:
    """How the orders a hand-back is left to stand, in words: at work on the telescope, or for a recoat's realignment
    not begun yet (``recoat_hands_back``), still to do."""
    if all(o.state == State.UNDERWAY for o in orders):
        return "still at work on the telescope"
    return "still at work on the telescope or, for a recoat's realignment, still to do"


def countersign_refusal(order: WorkOrder, by) -> str:
    """Why ``by`` may not countersign ``order`` as it stands, "" when they may, in the words ``work_order_move``
    refuses it with: the role it needs (``lifecycle.role_refusal``: the engineer's when its isolation answer is put to
    review), then the second person's rule (``selectors.second_person_refusal``). The order's page leaves the button
    out and says why."""
    if why := role_refusal(order, "countersign", by):
        return why
    if why := second_person_refusal(order, by):
        whom = role_needed(order, "countersign")
        return (f"a second person must countersign: {why}. Someone else with the {whom} role or above who had no hand "
                "in the work countersigns it (where two people did it together, a third account: another site's "
                "engineer, or the administrator)")
    return ""


def crew_member_problem(member, by) -> str:
    """Why ``member`` cannot be chosen by account on the crew of work ``by`` finishes ("" when they can): the person
    finishing is not their own crew, and only an active account with the technician role or above
    (``access.roles.holders_of``, as the finish form lists them) did such work; anyone else is named among the others
    without an account."""
    if member.pk == by.pk:
        return f"{person(member)} is finishing the work; the crew are the others who did it with them"
    if not has_role(member, TECHNICIAN):
        return (f"{person(member)}'s account is not active or has no technician role or above; name them among the "
                "others without an account")
    return ""


def _present_lockout_wording(steps: str) -> str:
    """``steps`` (one a line) with the lockout step in an earlier wording put in its present one."""
    lines = steps.splitlines()
    reworded = [LOCKOUT_STEP if is_lockout_step(line) else line for line in lines]
    return steps if reworded == lines else "\n".join(reworded)


def _record_history(order: WorkOrder, by, reason: str) -> None:
    """The claim above is a plain UPDATE (it must be conditional); save once more so the audit trail
    records the move, by whom and why."""
    order.refresh_from_db()
    order._history_user = by
    order._change_reason = reason
    order.save()


class AlreadyFinished(Refused):
    """A finish that comes after the work order was finished: a second press of the button (``by_you``), or
    a second person."""

    def __init__(self, order: WorkOrder, by):
        when = dateformat.format(order.finished_at.astimezone(order.site.zone), "d M Y H:i")
        self.by_you = order.finished_by_id == by.pk
        if self.by_you:
            message = f"{order.number} is already finished (by you, at {when})"
        else:
            name = person(order.finished_by)
            message = f"this work order has already been finished by someone else ({name}, at {when})"
        super().__init__(message)


def _claim_refusal(order: WorkOrder, by) -> Refused:
    """Why an order could not be claimed for finishing: someone finished it first, or it was moved meanwhile."""
    current = WorkOrder.objects.select_related("site", "finished_by").get(pk=order.pk)
    if current.state in (State.FINISHED, State.COUNTERSIGNED) and current.finished_at is not None:
        return AlreadyFinished(current, by)
    return Refused(f"someone else changed this work order meanwhile: it is now {current.get_state_display()}")


def work_done_on_problem(order: WorkOrder, day: dt.date, today: dt.date | None = None) -> str:
    """Why ``day`` cannot be the day the order's work was done, "" when it can: it is after the site's today
    (``today``, read when not given), or before the day the order was issued, at the site.

    Not the day it was started: a technician working from the printed order presses Start on the system only when
    entering the work afterwards, so the work may well come before that. The paper exists from the day the order
    was issued, and no work on it comes before."""
    today = today or site_today(order.site)
    if day > today:
        return f"{day:%d %b %Y} is after today at the site ({today:%d %b %Y}); enter the day the work was done"
    issued = order.issued_at.astimezone(order.site.zone).date() if order.issued_at else None
    if issued is not None and day < issued:
        return (
            f"{day:%d %b %Y} is before {order.number} was issued ({issued:%d %b %Y}), and no work on it comes "
            "before that; enter the day the work was done"
        )
    return ""


def retired_underway_problem(order: WorkOrder, items: Sequence[WorkOrderItem], day: dt.date) -> str:
    """Why the order's work cannot be dated ``day``: a subsystem it works on was retired before that day, while the
    order was underway (an order not yet started is held: ``selectors.retired_refusal``). Its records would come after
    the retire day, which its page refuses (``registry.services.retired_work_problem``) and the reliability page leaves
    out. Retired before the order was issued, no day suits (``work_done_on_problem``): it is withdrawn. "" when none
    was."""
    late = {i.subsystem for i in items if i.subsystem.retired_on is not None and day > i.subsystem.retired_on}
    if not late:
        return ""
    late = sorted(late, key=lambda s: (s.retired_on, s.name))
    named = in_words([f"{s.name} (retired on {s.retired_on:%d %b %Y})" for s in late])
    first = late[0].retired_on
    issued = order.issued_at.astimezone(order.site.zone).date() if order.issued_at else None
    if issued is not None and first < issued:
        # Only those retired before the order was issued are why it is withdrawn; one retired while it was underway
        # is not named there.
        named = in_words([f"{s.name} (retired on {s.retired_on:%d %b %Y})" for s in late if s.retired_on < issued])
        return (f"{named} was taken out of service before {order.number} was issued ({issued:%d %b %Y}), so none of "
                "its work was done on this order: the site engineer withdraws it, and the work is made again for the "
                "replacement if there is one. If the retire day is wrong, the site engineer corrects it in the admin")
    return (f"{day:%d %b %Y} is after the retire day of {named}, taken out of service while {order.number} was "
            f"underway. Enter the day the work was done, on or before {first:%d %b %Y}; work done after it came out "
            "was done on its replacement: log that on the replacement's page. If the retire day is wrong, the site "
            "engineer corrects it in the admin first")


def _restarted_by_the_new_coating(order: WorkOrder) -> set[int]:
    """The plans of a recoat's realignment order that a record since the recoat began restarted (the new coating's,
    ``mirrors.services.coating_service_records_log``: the strip and coat is finished only once it is logged,
    ``selectors.coating_unlogged``), by id: they count from it. Read from the records in force, not taken for granted
    (a diff review made the recoat plan inactive while the coating was logged: it wrote no record of it). Empty for any
    other order."""
    if order.recoat_phase != "realignment":
        return set()
    plan = order.recoat_plans.select_related("mirror__subsystem__telescope__site").order_by("-pk").first()
    if plan is None:
        return set()
    since = recoat_began_on(plan)
    return set(ServiceRecord.objects.filter(
        plan__in=order.items.filter(plan__isnull=False).values("plan_id"), performed_on__gte=since, void=False,
        corrected_by__isnull=True,
    ).exclude(work_order=order).values_list("plan_id", flat=True))


def work_order_finish(
    order: WorkOrder,
    by,
    actual_hours: float,
    findings: str,
    readings: dict[int, float],
    parts_used: dict[int, float] | None = None,
    confirmed_unticked: Collection[str] = (),
    cleanings: dict[int, str] | None = None,
    confirmed_hazards: Collection[str] = (),
    work_done_on: dt.date | None = None,
    isolation_answer: str = "",
    crew: Sequence[str] = (),
    parts_added: Sequence[tuple[Part, float]] = (),
    crew_members: Sequence = (),
    not_measured: dict[int, str] | None = None,
) -> WorkOrder:
    """Record the work: service records for every item, readings, parts used; reset plans; recompute.

    ``work_done_on`` is the day the work was done at the site (default: the site's today; a paper order may be
    entered days later). The service records are dated it, so the plans count again from it; so are the
    cleanings, and the readings are taken at noon of it (now, when it is today). Refused when it is after today
    or before the day the order was issued (``work_done_on_problem``), or after the retire day of a subsystem it works
    on (``retired_underway_problem``).

    ``cleanings`` maps the id of a mirror the work cleaned -> the method (``CleaningEvent.Method``): each
    becomes a cleaning on the mirror's record, dated the day the work was done, so its decline fit sees the
    recovery.

    ``readings`` maps RequiredReading id -> value (a value beyond its limit is recorded as measured, and the record
    flags it); ``not_measured`` maps the id of each required reading not taken -> why (kept on it, never a made-up
    value): every required reading has one or the other, not both; ``parts_used`` maps PartUse id -> quantity used,
    one for every part the order plans (0 for a part not used: never the plan by default). A part used beyond what the
    parts register holds is recorded as used all the same (the work was done): the register is brought to zero, never
    below, and the difference kept on the order's part line (``PartUse.quantity_short``) for the site engineer to
    count the stock (``part_count_record``).
    ``parts_added``: parts of the site's register used though the order did not plan them, with how many; each
    gets a line of its own (planned 0) and is taken from the register as the planned ones are.

    ``confirmed_unticked`` holds the words of the checklist lines (isolation points and steps) that the person
    confirmed although nobody ticked them; every line not ticked when the work is finished must be among them, and
    none of the steps held while another crew on the telescope is still locked out (``moves_or_restores``,
    ``still_locked_out``).
    The lines of the energy isolation (the lockout step, the isolation points and the lock removal,
    ``selectors.isolation_lines``)
    are not confirmed with the others: ``isolation_answer`` must say, on its own, which of
    ``cautions.ISOLATION_UNTICKED`` is true (isolated, no isolation needed, not isolated), and the findings must say
    why; the order keeps those lines and the answer (``isolation_unticked_at_finish``,
    ``isolation_confirmed_at_finish``), and the other lines, confirmed as done or not applicable
    (``unticked_at_finish``). ``confirmed_hazards`` holds the codes of the hazards its subsystems gained
    after it was made (``selectors.hazards_missing``) that the person confirmed were controlled or did not
    arise; every one must be among them, the findings must say how, and the order keeps the list
    (``hazards_confirmed_at_finish``). Who did the work with the person finishing: ``crew_members``, the people
    chosen by their accounts (active, technician or above, not the person finishing: ``crew_member_problem``), whom
    the countersign rule knows (``selectors.on_the_crew``), and ``crew``, the names of others without an account
    (visitors, contractors). The order keeps the accounts (``crew_members``, ``crew_by_account``) and the names as
    printed on the paper's crew lines, the accounts' first (``crew``).

    Refused with a reason, changing nothing, when a reading is missing, a quantity of a part used is missing or not a
    number from 0 to ``PART_QUANTITY_MAX``, the day the work was done is out of bounds, an unticked line or a hazard the
    order lacks was not confirmed, an unticked isolation has no answer or no findings, a crew name is too long, a
    person chosen on the crew cannot be (``crew_member_problem``), or the order is no longer underway
    (``AlreadyFinished`` when it was finished meanwhile).
    """
    from observatory_ops.mirrors.models import Mirror  # mirrors builds on work orders
    from observatory_ops.mirrors.services import cleaning_log, measurement_from_reading

    if order.state in (State.FINISHED, State.COUNTERSIGNED):
        raise _claim_refusal(order, by)
    _check_move(order, "finish", by)
    if reasons := moves_held(order).get("finish"):
        raise Refused("; and ".join(reasons))
    if problem := _locks_left_on_refusal(order, by):
        raise Refused(problem)
    if actual_hours is None or actual_hours < 0:
        raise Refused("actual hours must be 0 or more")
    required = list(order.required_readings.select_related("subsystem"))
    why_not = {pk: why.strip()[:200] for pk, why in (not_measured or {}).items() if why and why.strip()}
    missing = [r for r in required if readings.get(r.pk) is None and r.pk not in why_not]
    if missing:
        names = ", ".join(f"{QUANTITIES[r.quantity][0]} on {r.subsystem.name}" for r in missing)
        raise Refused(f"record every required reading, or say why it was not measured, before finishing (missing: "
                      f"{names})")
    if both := [r for r in required if readings.get(r.pk) is not None and r.pk in why_not]:
        names = ", ".join(f"{QUANTITIES[r.quantity][0]} on {r.subsystem.name}" for r in both)
        raise Refused(f"a reading is either recorded or said not measured, not both ({names})")
    for r in required:
        if r.pk in why_not:
            continue
        problem = value_problem(r.quantity, readings[r.pk])
        if problem:
            raise Refused(f"{problem} ({r.subsystem.name})")
    parts_used = parts_used or {}
    uses = list(order.part_uses.select_related("part"))
    for use in uses:
        if use.pk not in parts_used:  # never the plan by default: the finish form asks each count (0 if none)
            raise Refused(f"{use.part.name} used: say how many were used (0 if none)")
        quantity = parts_used[use.pk]
        if not isinstance(quantity, int | float) or not math.isfinite(quantity) or quantity < 0:
            raise Refused(f"{use.part.name} used: enter a number of 0 or more, not {quantity!r}")
        if quantity > PART_QUANTITY_MAX:
            raise Refused(part_quantity_too_many(f"{use.part.name} used"))
        if problem := part_quantity_not_whole(use.part, quantity, f"{use.part.name} used"):
            raise Refused(problem)
    if problem := _parts_added_problem(order, uses, parts_added):
        raise Refused(problem)
    if isinstance(crew, str):  # one string would be read as a name per character
        raise ValueError("crew must be a sequence of names, not a single string")
    crew = [name.strip() for name in crew if name.strip()]
    if too_long := [name for name in crew if len(name) > CREW_NAME_MAX]:
        raise Refused(f"crew: {too_long[0][:40]!r}... is longer than {CREW_NAME_MAX} characters; "
                      "separate the names with commas")
    crew_members = list({member.pk: member for member in crew_members}.values())
    for member in crew_members:
        if problem := crew_member_problem(member, by):
            raise Refused(f"crew: {problem}")
    named = [person(member) for member in crew_members]  # one line each, though two share a name
    crew = [*named, *(name for name in dict.fromkeys(crew) if name not in named)]
    site = order.site
    today = site_today(site)
    day = work_done_on or today
    if problem := work_done_on_problem(order, day, today):
        raise Refused(f"work done on: {problem}")
    items = list(order.items.select_related("subsystem", "plan"))
    if problem := retired_underway_problem(order, items, day):
        raise Refused(f"work done on: {problem}")
    now = timezone.now()
    # A reading's time of day is not asked on the form. Today's is taken now, which is never in the future
    # and keeps its order among today's other readings. An earlier day's is taken at noon, site time: its
    # local date is that day whatever the zone's offset, so the mirror's measurement (dated by the local date)
    # and the plans' reading trends (counting readings from the local midnight of the last service day) both
    # see it on the day the work was done; noon also ends the night before (calc.night_of), so it comes after
    # that night's observing, as daytime work does.
    taken_at = now if day == today else dt.datetime.combine(day, dt.time(12), tzinfo=site.zone)
    with transaction.atomic():
        lacking = hazards_missing(order)  # read while the order is still underway
        claimed = WorkOrder.objects.filter(pk=order.pk, state=State.UNDERWAY).update(
            state=State.FINISHED, finished_at=now, finished_by=by, actual_hours=actual_hours, findings=findings,
            hazards_confirmed_at_finish=lacking,
        )
        if not claimed:
            raise _claim_refusal(order, by)
        if unconfirmed_hazards := [h for h in lacking if h not in set(confirmed_hazards)]:
            raise Refused(
                f"{order.number} lacks hazards its subsystems gained after it was made "
                f"({', '.join(HAZARDS[h].lower() for h in unconfirmed_hazards)}): confirm that they were controlled "
                "or did not arise in this work, and say how in the findings, or ask the site engineer"
            )
        if lacking and not findings.strip():
            raise Refused(
                "say in the findings how the hazards this order lacked "
                f"({', '.join(HAZARDS[h].lower() for h in lacking)}) were controlled, or why they did not arise"
            )
        # Read once the order is claimed: no tick can be recorded or taken back after this point. The isolation is
        # read as it stands (``order`` is still underway here) and kept with the record.
        points = isolation_points(order)
        kept = isolation_kept(points, isolation_gaps(order, points))
        unticked = unticked_lines(WorkOrder.objects.select_related("site").get(pk=order.pk))
        isolation = isolation_lines(unticked)
        hand_back, working = left_to_the_last_crew(order, unticked, day)
        others = [line for line in unticked if line not in isolation and line not in hand_back]
        seen = set(confirmed_unticked)
        answered = isolation_answer in ISOLATION_UNTICKED and all(line.text in seen for line in isolation)
        if isolation and not answered:
            raise Refused(ISOLATION_UNTICKED_REQUIRED.format(
                lines="; ".join(f"{line.label.lower()} ({line.text})" for line in isolation)
            ))
        if isolation and not findings.strip():
            raise Refused(ISOLATION_UNTICKED_FINDINGS)
        if isolation and isolation_answer != "isolated" and crew_state(order).locked_out:
            # Its own ticks say the locks went on: "no isolation was needed" or "not isolated" would contradict them,
            # and the order, finished, would no longer hold another crew for its locks (a diff review).
            raise Refused(
                "its isolation points or its lockout are ticked as locked on this order and the removal of the locks "
                "is not: the energy was isolated. Tick the removal of the locks once each person has taken their own "
                "off, or answer that the energy was isolated and say in the findings who removed the locks and when"
            )
        if waiting := finish_waits(order, unticked, day):
            raise Refused(waiting)
        if hand_back:
            # The last crew out hands the observatory back: this one, done, leaves it to them, and the record says so
            # (a walk-through's realignment could not be recorded while another order on the telescope stood paused),
            # not also that it was "done or did not apply" (a tablet walk-through's record said both).
            findings = (f"{findings}\n" if findings.strip() else "") + (
                f"{hand_back[0].label}, the hand-back to robotic and remote control, was left to the last crew out: "
                + "; ".join(f"{a.order.number} {a.order.title}" for a in working)
                + f", {still_at_it([a.order for a in working])} when this order was finished."
            )
        unconfirmed = [line for line in others if line.text not in seen]
        if unconfirmed:
            raise Refused(
                "these checklist lines are not ticked: "
                + "; ".join(f"{line.label.lower()} ({line.text})" for line in unconfirmed)
                + ". Tick them on the work order page, or confirm that they were done or did not apply"
            )
        WorkOrder.objects.filter(pk=order.pk).update(
            unticked_at_finish=[f"{line.label}: {line.text}" for line in others],
            isolation_unticked_at_finish=[f"{line.label}: {line.text}" for line in isolation],
            isolation_confirmed_at_finish=isolation_answer if isolation else "", isolation_at_finish=kept,
            crew=crew, crew_by_account=True, findings=findings,
        )
        # Rows written as such send no m2m signal, whose own history row would come before the finish's: the save
        # in _record_history records them with the rest.
        CrewMember.objects.bulk_create(CrewMember(work_order=order, person=member) for member in crew_members)
        if working:
            order.hand_back_left_to.set([a.order for a in working])  # their pages say they hold it
        _record_history(order, by, "finish")
        share = actual_hours / max(len(items), 1)
        restarted = _restarted_by_the_new_coating(order)
        for item in items:
            # A plan the recoat's new coating restarted keeps the coating's day: a second record of it here would read
            # as another recoat, days after the first (a recoat review's plans counted from the realignment).
            plan = None if item.plan_id in restarted else item.plan
            ServiceRecord.objects.create(
                subsystem=item.subsystem, plan=plan, performed_on=day, performed_by=by, hours_spent=share,
                summary=(plan.name if plan else order.title)[:200], findings=findings,
                work_order=order, created_by=by, **due_of_work(plan, day).kept(),
            )
        for r in required:
            if r.pk in why_not:
                r.not_measured = why_not[r.pk]
                r.save(update_fields=["not_measured"])
                continue
            r.reading = Reading.objects.create(
                subsystem=r.subsystem, quantity=r.quantity, unit=r.unit, value=readings[r.pk], taken_at=taken_at,
                taken_by=by, note=f"recorded on {order.number}",
            )
            r.save(update_fields=["reading"])
            measurement_from_reading(r.reading)  # a mirror's reflectance also reaches its decline fit
        on_order = {item.subsystem_id for item in items}
        for mirror in Mirror.objects.filter(pk__in=list(cleanings or {}), subsystem_id__in=on_order):
            cleaning_log(mirror, by, day, cleanings[mirror.pk], note=f"on {order.number}", work_order=order)
        # A part used that the order did not plan gets its line, planned 0, and is taken from the register as
        # the planned ones are.
        for part, quantity in parts_added:
            added = PartUse(work_order=order, part=part, quantity_planned=0)
            added._history_user = by
            added.save()
            uses.append(added)
            parts_used[added.pk] = quantity
        for use in uses:
            quantity = parts_used[use.pk]
            part = Part.objects.select_for_update().get(pk=use.part_id)
            # The register is short when the work used more than it held: the work was done, so it is recorded,
            # the register goes to zero (a stock is never negative) and the difference waits for a count. Rounded,
            # so that sums of decimal quantities (0.1 + 0.2 m of cable) leave no shortfall of a rounding error.
            short = round(max(quantity - part.quantity_on_hand, 0.0), 6)
            part.quantity_on_hand = max(part.quantity_on_hand - quantity, 0.0)
            part._history_user = by
            part.save(update_fields=["quantity_on_hand"])
            use.quantity_used, use.quantity_short = quantity, short
            use._history_user = by
            use.save(update_fields=["quantity_used", "quantity_short"])
        site_recompute(site)
    order.refresh_from_db()
    return order


def _parts_added_problem(order: WorkOrder, uses: Sequence[PartUse], parts_added: Sequence[tuple[Part, float]]) -> str:
    """Why parts used beyond the order's plan cannot be recorded as given ("" when they can): each one a part of the
    order's site, not on the order already (its own line says how many), given once, more than 0 and at most
    ``PART_QUANTITY_MAX``."""
    on_order = {use.part_id for use in uses}
    seen: set[int] = set()
    for part, quantity in parts_added:
        if part.site_id != order.site_id:
            return f"{part.name} is a part of another site's register"
        if part.pk in on_order:
            return f"{part.name} is on the order already: give how many were used on its own line"
        if part.pk in seen:
            return f"{part.name} is given twice among the other parts used: give it once, with the total"
        seen.add(part.pk)
        if not isinstance(quantity, int | float) or not math.isfinite(quantity) or quantity <= 0:
            return f"{part.name} used: enter a number above 0, not {quantity!r}"
        if quantity > PART_QUANTITY_MAX:
            return part_quantity_too_many(f"{part.name} used")
        if problem := part_quantity_not_whole(part, quantity, f"{part.name} used"):
            return problem
    return ""


def checklist_tick_set(
    order: WorkOrder, kind: str, key: int, ticked: bool, by, seen_text: str | None = None, result: str = "",
    in_place_of: str = "",
) -> ChecklistTick:
    """Record a tick (``ticked=True``) or take one back (``ticked=False``) on the checklist of an order underway.

    ``kind`` is ``"step"`` (``key`` = the step's position in ``order.step_list``, from 0) or ``"point"``
    (``key`` = the id of one of the isolation points of the order's telescopes). ``seen_text`` is the
    line as the person read it on their page: when it has been changed since, the tick is refused rather
    than recorded against words they did not see. Refused, storing nothing, when the order is not
    underway, the line does not exist, or the line is already in the state asked for.

    On an order whose hazards need energy isolated the record follows the sequence of the lockout (OSHA 29 CFR
    1910.147(d): the lockout devices on every isolating device, then stored energy, then the isolation verified,
    all before the work, and the locks removed only after it, (e)): a step done locked out (``isolated_steps``)
    is ticked only once the lockout step and every isolation point of the order are, the lockout step only once
    every point is, and the release step only once the lockout step is; a step under power that may move an axis,
    before the lockout, is not ticked while a point or the lockout is ticked and the release is not. Nor is the
    sequence undone afterwards: the tick on a point or on the lockout step is not taken back while a tick that needed
    it stands, nor the release's while a step done after the locks came off stands. Refused otherwise, naming what to
    tick or take back first (``_lockout_sequence_refusal``). Taking back the tick of locked-out work or of any step
    under power is always recorded.

    A step that asks for its result (``catalogue.asks_result``: the check of the collimation on a star) is ticked only
    with ``result``, what was found, kept on the tick; other lines keep none.

    A lock's line changed in place of whoever put the lock on (``_lock_holder_refusal``) is refused but to an engineer,
    who says why in ``in_place_of`` (kept on the tick): that person not at the site, how they were sought, how they
    will be told before they are back at work (OSHA 29 CFR 1910.147(e)(3)). An auditor's review: the override asked
    for nothing and recorded nothing of why.
    """
    if not has_role(by, TECHNICIAN):
        raise Refused(f"ticking the checklist needs the {TECHNICIAN} role or above")
    with transaction.atomic():
        # Locked and read again: a work order finished meanwhile takes no more ticks.
        current = WorkOrder.objects.select_for_update().get(pk=order.pk)
        if current.state != State.UNDERWAY:
            raise Refused(
                f"ticks are recorded only while the work is underway; {current.number} is "
                f"{current.get_state_display()}"
            )
        entry = ChecklistTick(work_order=current, kind=kind, ticked=ticked, recorded_by=by)
        if kind == ChecklistTick.Kind.STEP:
            steps = current.step_list
            if not 0 <= key < len(steps):
                raise Refused(f"there is no step {key + 1}: {current.number} has {len(steps)} step(s)")
            entry.step_index, entry.text, what = key, steps[key], f"step {key + 1}"
        elif kind == ChecklistTick.Kind.POINT:
            point = next((p for p in isolation_points(current) if p.pk == key), None)
            if point is None:
                raise Refused(f"isolation point #{key} is not one of the points of {current.number}'s telescope")
            entry.isolation_point, entry.text, what = point, point.description, f"isolation point {point.label!r}"
        else:
            raise Refused(f"unknown kind of checklist line {kind!r}; it must be 'step' or 'point'")
        if seen_text is not None and seen_text.strip() != entry.text:
            raise Refused(f"{what} has been changed since your page was loaded; reload it and check again")
        if ticked and kind == ChecklistTick.Kind.STEP and asks_result(entry.text):
            entry.result = " ".join(result.split())
            if not entry.result:
                raise Refused(f"{what} asks for its result: write what was found (a value with its unit, or what was "
                              "seen) in its box, then tick it")
            if len(entry.result) > RESULT_LONGEST:
                raise Refused(f"{what}'s result is {len(entry.result)} characters long: write it in at most "
                              f"{RESULT_LONGEST}, and the rest in the findings when you finish")
        ticks = latest_ticks(current)
        latest = ticks.get(entry.line)
        already = latest is not None and latest.ticked and latest.text == entry.text
        if already == ticked:
            raise Refused(f"{what} is {'already ticked' if ticked else 'not ticked'}")
        in_their_place = _lock_holder_refusal(current, entry, latest, ticks, by, what)
        if in_their_place and not has_role(by, ENGINEER):
            raise Refused(in_their_place)
        if refusal := _lockout_sequence_refusal(current, entry.line, ticked, what, ticks):
            raise Refused(refusal)
        if ticked and kind == ChecklistTick.Kind.STEP and (refusal := _others_locked_out_refusal(current, key)
                                                           or _telescope_out_refusal(current, key)
                                                           or _own_hand_back_refusal(current, key, ticks)):
            raise Refused(refusal)
        if in_their_place:  # an engineer, in the place of whoever put the lock on: asked last, once nothing else holds
            entry.in_place_of_holder = " ".join(in_place_of.split())
            if not entry.in_place_of_holder:
                raise Refused(f"{what} is {IN_PLACE_OF_WHOSE[entry.ticked]}: {IN_PLACE_OF_ASKED}")
            if len(entry.in_place_of_holder) > IN_PLACE_OF_LONGEST:
                raise Refused(f"why, in place of the lock's holder, is {len(entry.in_place_of_holder)} characters "
                              f"long: write it in at most {IN_PLACE_OF_LONGEST}")
        entry._history_user = by
        entry.save()
    return entry


def _lock_holder_refusal(order: WorkOrder, entry: ChecklistTick, latest: ChecklistTick | None, ticks: dict, by,
                         what: str) -> str:
    """Why ``by`` may not make ``entry`` on a lock's line: the tick of an isolation point or of the lockout is taken
    back only by whoever recorded it, and the removal of the locks is ticked only by someone who recorded this order's
    lockout or one of its points, and taken back only by whoever ticked it: each lock comes off by the person who put it
    on (OSHA 29 CFR 1910.147(e)(3), (f)(3)). An auditor's review took back another crew's lock ticks one by one, which
    let a second crew's brake air through, and ticked another order's lock removal with no part in it. An engineer may,
    where the one who put the lock on cannot be reached, under the site's own procedure for it ((e)(3): they are named
    on the tick, with why: ``checklist_tick_set``). "" when it may; said whatever ``by``'s role."""
    lock_line = entry.kind == ChecklistTick.Kind.POINT or is_lockout_step(entry.text)
    release = entry.kind == ChecklistTick.Kind.STEP and is_release_step(entry.text)
    if not entry.ticked and lock_line and latest is not None and latest.recorded_by_id != by.pk:
        return (f"{what} was recorded by {person(latest.recorded_by)}: only they take its tick back, since the lock is "
                "theirs. If they cannot be reached, the site engineer removes it under the site's procedure for a lock "
                "left on (OSHA 29 CFR 1910.147(e)(3))")
    if not entry.ticked and release and latest is not None and latest.recorded_by_id != by.pk:
        # Taken back by another, it could be ticked again only by a holder: the order would stall on a night shift.
        return (f"{what} was recorded by {person(latest.recorded_by)}, who took the locks off: only they take its tick "
                "back. If they cannot be reached, the site engineer does")
    if entry.ticked and release:
        holders = lock_holders(ticks)
        if holders and by.pk not in holders:
            return (f"{what} takes the locks off, and they were put on by "
                    f"{in_words(sorted(person(u) for u in holders.values()))}: one of them ticks it, once every lock "
                    "on this order is off. If none of them can be reached, the site engineer removes the locks under "
                    "the site's procedure for a lock left on (OSHA 29 CFR 1910.147(e)(3))")
    return ""


#: What an engineer writes to change a lock's line in another's place, and how long it may be.
IN_PLACE_OF_ASKED = ("as the site engineer you may, in their place, under the site's procedure for a lock left on: "
                     "open \"In place of the lock's holder\" under the line and say why (they are not at the site, "
                     "how you tried to reach them, how they will be told before they are back at work: OSHA 29 CFR "
                     "1910.147(e)(3)), then record it again")
#: Whose line it is, by whether it is being ticked (the removal of others' locks) or taken back (another's tick).
IN_PLACE_OF_WHOSE = {True: "the removal of locks others put on", False: "another's tick on a lock's line"}
IN_PLACE_OF_LONGEST = ChecklistTick._meta.get_field("in_place_of_holder").max_length


def lines_in_place_of_holder(order: WorkOrder, lines, by) -> set[str]:
    """The anchors of ``lines`` (``selectors.checklist``) whose tick, or take-back, ``by`` would record in place of
    whoever put the lock on (``_lock_holder_refusal``): an engineer's page gives each a box for why. One query."""
    if not has_role(by, ENGINEER):
        return set()
    ticks = latest_ticks(order)
    found = set()
    for line in lines.points + lines.steps:
        entry = ChecklistTick(work_order=order, kind=line.kind, ticked=not line.ticked, text=line.text)
        if line.kind == ChecklistTick.Kind.STEP:
            entry.step_index = line.key
        else:
            entry.isolation_point_id = line.key
        if _lock_holder_refusal(order, entry, ticks.get(entry.line), ticks, by, ""):
            found.add(line.anchor)
    return found


def lock_holders(ticks: dict) -> dict:
    """Whoever recorded a lock on an order, by user id: the newest tick of each of its isolation points and of its
    lockout step, still ticked (``ticks``: ``selectors.latest_ticks``)."""
    return {t.recorded_by_id: t.recorded_by for t in ticks.values() if t.ticked and (
        t.kind == ChecklistTick.Kind.POINT or is_lockout_step(t.text))}


def _locks_left_on_refusal(order: WorkOrder, by) -> str:
    """Why ``by`` may not finish ``order``: locks recorded on it by others, and its removal of the locks not ticked.
    Finishing would say for them that their locks came off, and an order finished no longer holds another crew's
    steps (a diff review finished so, its release unticked and answered "isolated", with no lock of its own). An
    engineer first ticks the removal in their place, saying why, under the site's procedure for a lock left on (OSHA 29
    CFR 1910.147(e)(3)): the why is kept on that tick, one record of it (a diff review finished as engineer with
    another's locks on and no why asked). "" when nothing holds it."""
    ticks = latest_ticks(order)
    holders = lock_holders(ticks)
    if not holders or by.pk in holders:
        return ""
    releases = [i for i, step in enumerate(order.step_list) if is_release_step(step)]
    left = [i for i in releases if not ((tick := ticks.get((ChecklistTick.Kind.STEP, i))) is not None and tick.ticked
                                         and tick.text == order.step_list[i])]
    if not left:
        return ""
    return (f"the locks on this order were put on by {in_words(sorted(person(u) for u in holders.values()))}, and "
            f"the removal of the locks (step {left[0] + 1}) is not ticked: one of them ticks it on the work order page "
            "once every lock is off, before the order is finished. If none of them can be reached, the site engineer "
            "removes the locks under the site's procedure for a lock left on (OSHA 29 CFR 1910.147(e)(3)) and ticks "
            "it in their place, saying why, then finishes it")


def _own_hand_back_refusal(order: WorkOrder, key: int, ticks: dict) -> str:
    """Why step ``key``, the order's own hand-back to robotic and remote control, may not be ticked yet: a step of the
    order other than a hand-back is not ticked (in its present words). The hand-back is its crew's last act: a
    safety walk-through ticked a realignment's "only when the collimation check is recorded" before the check on a
    star. A step that did not apply is confirmed so at the finish, which then records the hand-back left undone or
    done with it. "" when nothing holds it."""
    steps = order.step_list
    if key >= len(steps) or not is_hand_back(steps[key]):
        return ""
    left = [i for i, step in enumerate(steps) if i != key and not is_hand_back(step) and not (
        (tick := ticks.get((ChecklistTick.Kind.STEP, i))) is not None and tick.ticked and tick.text == step)]
    if not left:
        return ""
    named = in_words([f"{i + 1}" for i in left])
    return (f"step {key + 1} hands the observatory back to robotic and remote control, the crew's last act, and "
            f"step{'s' if len(left) > 1 else ''} {named} {'are' if len(left) > 1 else 'is'} not ticked yet: tick "
            f"{'them' if len(left) > 1 else 'it'} first (a step that did not apply is said so at the finish, where "
            "this step is confirmed with it)")


def finish_waits(order: WorkOrder, unticked: Sequence, day: dt.date | None = None) -> str:
    """Why ``order`` may not be finished yet with its ``unticked`` lines (``selectors.unticked_lines``) confirmed "done
    or did not apply", or "" when nothing waits: a step held while another crew is locked out
    (``moves_or_restores``: a move under power, energy brought back, the return to service;
    ``_others_locked_out_refusal`` refuses their ticks), a hand-back while another crew is at work with no hand-back
    of its own to leave it to (``left_to_the_last_crew``), or while the telescope's mirror is out
    (``telescope_out_notices``). The record would otherwise say the tube moved under power with another crew inside (a
    walk-through finished a recoat's removal so, its slew to the zenith refused a minute before), or that a test under
    power and the hand-back were done on an unbalanced telescope (a diff review). The finish refuses it
    (``work_order_finish``); the finish form says it before it is filled in. ``day``: the day the work was done, when
    not today: the other crews are those at work by then (``_alongside_by``; a review's overhaul entered from paper
    months later was held by a crew that started today), and the mirror out or in as it was that day
    (``selectors.mirror_out_on``)."""
    steps = [line for line in unticked if line.kind == ChecklistTick.Kind.STEP]
    waiting = moves_or_restores(order.step_list) if steps else set()
    after = [line for line in steps if line.key in waiting]
    if after and (held := still_locked_out(order, day)):
        return (
            "steps that wait for the other crew's locks to come off are not ticked ("
            + "; ".join(line.label.lower() for line in after)
            + ") while another crew is still locked out on this telescope: "
            + "; ".join(f"{a.order.number} {a.order.title}" for a in held)
            + ". Finish once they have removed their locks and ticked that on their order, and these steps are "
            "done"
        )
    hand_back = [line for line in steps if is_hand_back(line.text)]
    left = bool(hand_back) and bool(left_to_the_last_crew(order, unticked, day)[0])
    if hand_back and not left and (working := still_working(order, day)):
        return (
            f"{hand_back[0].label.lower()}, the hand-back to robotic and remote control, is not ticked while another "
            "crew is still at work on this telescope with no hand-back of its own to leave it to: "
            + "; ".join(f"{a.order.number} {a.order.title}" for a in working)
            + ". Finish once they are done and it is ticked"
        )
    if left:  # a hand-back left to others holds nothing here
        after = [line for line in after if not is_hand_back(line.text)]
    if after and day is not None and day < site_today(order.site):  # entered from paper: as the mirror stood then
        if (then := mirror_out_on(order, day)) is not None:
            # Not done that day: they are done and ticked once the mirror is back, and the order finished with the
            # day the rest of its work was done (a diff review: "check the day" steered to dating it today).
            todo = ("Do them now that it is back and tick them on this page" if then.back
                    else "Do them once the reinstall is finished and tick them on this page")
            return (
                "steps that wait while the telescope's mirror is out are not ticked ("
                + "; ".join(line.label.lower() for line in after)
                + f"), and {then.text}: they were not done then. {todo}, then finish with the day the rest of the "
                "work was done"
            )
    elif after and (mirror_out := telescope_out_notices(order)):
        return (
            "steps that wait while the telescope's mirror is out are not ticked ("
            + "; ".join(line.label.lower() for line in after)
            + f"): {mirror_out[0][0]}. Finish this order once the reinstall is finished and they are done"
        )
    return ""


def left_to_the_last_crew(order: WorkOrder, unticked: Sequence, day: dt.date | None = None) -> tuple[list, list]:
    """(the hand-back lines of ``unticked`` that ``order`` leaves to the last crew out, the other orders still at work
    on the telescope that have a hand-back of their own to tick: ``still_working``, ``Alongside.hands_back``), or
    ([], []) when there is none to leave it to. A finish records the hand-back left to them in the findings, and does
    not ask it confirmed "done or did not apply". A crew still at work with no hand-back of its own would never hand
    the observatory back (a diff review left it to an order swapping a UPS battery): the finish then waits
    (``finish_waits``). ``day``: as there."""
    hand_back = [line for line in unticked if line.kind == ChecklistTick.Kind.STEP and is_hand_back(line.text)]
    if not hand_back:
        return [], []
    working = [a for a in still_working(order, day) if a.hands_back]
    if (realignment := recoat_hands_back(order, day)) is not None:  # it hands back last, whoever else is at work
        working.append(Alongside(realignment, [], None, hands_back=True))
    return (hand_back, working) if working else ([], [])


def still_locked_out(order: WorkOrder, day: dt.date | None = None) -> list:
    """The other orders underway on a telescope ``order`` works on (``selectors.work_alongside``) whose crews are still
    locked out (``Alongside.locked_out``): an isolation point of theirs or their lockout step is ticked and the step
    that removes their locks is not (an order without one, whose locked-out work runs to its end, counts as locked out
    until it is finished). ``day``: those started by then (``_alongside_by``)."""
    return [other for other in _alongside_by(order, day) if other.locked_out]


def still_working(order: WorkOrder, day: dt.date | None = None) -> list:
    """The other orders underway on a telescope ``order`` works on whose crews still have work to do there
    (``Alongside.work_left``: a step other than their own hand-back not ticked), locked out or not. The observatory
    goes back to robotic and remote control only when they are done: remote users would otherwise move a telescope
    with a crew at it (a safety review: one order handed it back while another crew, under power, had only taken it
    out of control). The last crew out hands it back; common practice, no published source. ``day``: those started
    by then (``_alongside_by``)."""
    return [other for other in _alongside_by(order, day) if other.work_left]


def _alongside_by(order: WorkOrder, day: dt.date | None) -> list:
    """``selectors.work_alongside(order)``, or with ``day`` (the day ``order``'s work was done, entered later) the
    orders among them started on or before it, at the site: one started after the work was done was not there."""
    alongside = work_alongside(order)
    if day is None:
        return alongside
    zone = order.site.zone
    return [a for a in alongside if a.order.started_at is None or a.order.started_at.astimezone(zone).date() <= day]


def held_for_other_crews(steps: Sequence[str]) -> set[int]:
    """The steps of an order that wait while another crew on its telescope is still locked out
    (``still_locked_out``): with a lockout step and a release, every step after the release (restoring brake air or
    power, a test under power, the return to service or to robotic control); without a lockout step, the steps that
    put the telescope back in service or hand it back to robotic control (``catalogue.RETURNS_TO_SERVICE``,
    ``catalogue.HAND_BACK``, a plan label before them ignored). The other crew's locks keep the energy they isolated
    off, but these steps take it for granted that nobody is in the telescope's swept volume or at the isolated
    equipment, and the return to robotic control hands the telescope to remote users who would move it the moment
    the other crew restores power. Waiting for the other crew is common practice, no published source."""
    found = isolated_steps(steps)
    if found is not None:
        release = found[1].stop
        return set(range(release + 1, len(steps))) if release < len(steps) else set()
    return {index for index, step in enumerate(steps)
            if unlabelled(step).strip() in RETURNS_TO_SERVICE or is_hand_back(step)}


def _others_locked_out_refusal(order: WorkOrder, key: int) -> str:
    """Why step ``key`` of ``order`` may not be ticked yet: it hands the observatory back to robotic control
    (``catalogue.is_hand_back``) while another crew still has work to do on the telescope (``still_working``), or it
    moves an axis, needs power or brings energy back (``moves_or_restores``) while another crew is still locked out
    (``still_locked_out``).
    Removing one's own locks stays free: each person removes their own (OSHA 29 CFR 1910.147(e)(3) and (f)(3),
    group lockout). "" when nothing holds it."""
    steps = order.step_list
    if key >= len(steps):
        return ""
    hand_back = is_hand_back(steps[key])
    if hand_back:
        held, why = still_working(order), "hands the observatory back to robotic and remote control"
    elif key in moves_or_restores(steps):
        # The other crew's locks keep the drives off: a move under power, or energy brought back, would either fail
        # or mean their locks are not on (a walk-through ticked a slew under power before this order's own lockout).
        held, why = still_locked_out(order), _why_held(steps, key)
    else:
        return ""
    if not held:
        return ""
    named = "; ".join(f"{a.order.number} {a.order.title} (on {', '.join(a.telescopes)})" for a in held)
    one = len(held) == 1
    if hand_back:
        state = f"{'its' if one else 'their'} work not all ticked"
        wait = "they have ticked all their work (the last crew out hands the observatory back)"
    else:
        state = f"{'its' if one else 'their'} lockout ticked and the removal of {'its' if one else 'their'} locks not"
        wait = "they have removed their locks and ticked that on their order"
    return (
        f"step {key + 1} {why}, and {'another crew is' if one else 'other crews are'} still "
        f"{'at work' if hand_back else 'locked out'} on this telescope: {named}, {state}. Agree with "
        f"{'that crew' if one else 'those crews'}; tick this once {wait}, with everyone clear"
    )


def moves_or_restores(steps: Sequence[str]) -> set[int]:
    """The steps of an order that move an axis, need power or bring energy back: those after the release or that
    hand the telescope back (``held_for_other_crews``), every step under power before the lockout except those that
    move no axis (``catalogue.MOVES_NO_AXIS``: out of robotic control, closing the enclosure, reading the records),
    and any parking (``catalogue.PARKINGS``). They wait while another crew on the telescope is locked out
    (``_others_locked_out_refusal``: the hand-back waits for every other crew's work, ``still_working``) and while its
    primary mirror is out for a recoat (out of balance, its axes pinned, its drives on the site's long-term locks:
    ``_telescope_out_refusal``). A safety review ticked brake air, a test under power and the hand-back on such a
    telescope, a diff review a slew under power, a walk-through a slew before its own lockout beside another crew's.
    Common practice, no published source; the site's lockout and mirror-removal procedures and the maker's
    instructions come first."""
    found = isolated_steps(steps)
    powered = range(found[0]) if found is not None else range(0)
    return (held_for_other_crews(steps)
            | {i for i in powered if unlabelled(steps[i]).strip() not in MOVES_NO_AXIS}
            | {i for i, step in enumerate(steps) if unlabelled(step).strip() in PARKINGS})


def _why_held(steps: Sequence[str], key: int) -> str:
    """What step ``key`` does that holds it (``moves_or_restores``), in the words of a refusal."""
    found = isolated_steps(steps)
    if found is not None and key < found[0]:
        return "is done under power before the lockout and may move an axis"
    if found is not None and key > found[1].stop:
        return "is done after the locks come off"
    if unlabelled(steps[key]).strip() in PARKINGS:
        return "moves the telescope"
    return "puts the telescope back in service or under robotic control"


def _telescope_out_refusal(order: WorkOrder, key: int) -> str:
    """Why step ``key`` of ``order`` may not be ticked yet: it is one that waits while its telescope's mirror is out
    (``moves_or_restores``), or it hands the telescope back before the recoat's realignment is done
    (``recoat_hands_back``). "" when nothing holds it."""
    if key < len(order.step_list) and is_hand_back(order.step_list[key]) and (
            realignment := recoat_hands_back(order)) is not None:
        whose = realignment.telescope.name if realignment.telescope_id else "the telescope"
        plan = realignment.recoat_plans.order_by("-pk").first()
        removal = plan.removal() if plan is not None else None
        out_on = came_out_on(removal) if removal is not None else None
        # Work done on paper before the mirror came out handed back then (``recoat_hands_back`` with its day).
        before = (f". If this work was done on paper before the mirror came out ({out_on:%d %b %Y}), finish the order "
                  "with the day it was done: its hand-back is then confirmed as done that day") if out_on else ""
        return (f"step {key + 1} hands the observatory back to robotic and remote control, and the recoat of "
                f"{whose} is not done: {realignment.number} ({realignment.title}) is "
                f"{realignment.get_state_display()}, and its crew hands the observatory back at its end, once the "
                f"collimation is recorded. Leave this step to them: finishing this order leaves it to that order"
                f"{before}")
    if key not in moves_or_restores(order.step_list):
        return ""
    notices = telescope_out_notices(order)
    if not notices:
        return ""
    title, body, _todo = notices[0]
    why = "hands the telescope back" if is_hand_back(order.step_list[key]) else _why_held(order.step_list, key)
    return (f"step {key + 1} {why}, and {title}: {body} Leave this step until the reinstall is finished, and ask "
            "the site engineer")


def _lockout_sequence_refusal(order: WorkOrder, line: tuple, ticked: bool, what: str, ticks: dict) -> str:
    """Why the tick asked for on ``line`` (``ChecklistTick.line``; ``ticked`` False to take it back) would break
    the sequence of the lockout, or "" when it would not. ``what`` names the line ("step 5"); ``ticks`` are the
    order's newest entries (``selectors.latest_ticks``); a tick on a line whose words have changed since counts
    for nothing, as on the page."""
    if not needs_isolation(order.hazards):
        return ""
    steps = order.step_list
    found = isolated_steps(steps)
    if found is None:
        return ""
    lockout, locked = found
    # The locked-out work ends at the release step (catalogue.RELEASE) where there is one (isolated_steps).
    release = locked.stop if locked.stop < len(steps) else None
    kind, key = line
    is_point = kind == ChecklistTick.Kind.POINT

    def done(line, text: str) -> bool:
        tick = ticks.get(line)
        return tick is not None and tick.ticked and tick.text == text

    def step_done(index: int) -> bool:
        return done((ChecklistTick.Kind.STEP, index), steps[index])

    restored = [index for index in range(release + 1, len(steps)) if step_done(index)] if release is not None else []
    if not ticked:
        if key == release and release is not None and step_done(release):
            # Restoring is done under power again, after the locks came off, and so is a move under power from before
            # the lockout ticked since the release (a diff review took the release back from under one): the record
            # keeps the release before them.
            released_at = ticks[(ChecklistTick.Kind.STEP, release)].recorded_at
            moved = [index for index in range(lockout) if index in moves_or_restores(steps) and step_done(index)
                     and ticks[(ChecklistTick.Kind.STEP, index)].recorded_at > released_at]
            if after_release := sorted(moved + restored):
                return _take_back_refusal(what, [(after_release, "was done after the locks came off",
                                                  "were done after the locks came off")])
        if not (is_point or key == lockout):
            return ""
        # The release and the locked-out work stand on the lockout step, and through it on every point.
        lockout_stands = is_point and step_done(lockout)
        standing = []
        if release is not None and step_done(release) and (key == lockout or lockout_stands):
            standing.append(([release], "says the locks were removed", ""))
        if work := [index for index in locked if step_done(index)]:
            standing.append((work, "was done with the energy isolated", "were done with the energy isolated"))
        if lockout_stands:
            standing.append(([lockout], "is the lockout, which says every isolation point is locked", ""))
        return _take_back_refusal(what, standing)
    if is_point:
        return ""
    if key == release:
        # The locks come off after the locked-out work (1910.147(e)), so the record shows them put on before.
        if step_done(lockout):
            return ""
        return f"step {key + 1} removes the locks: tick the lockout (step {lockout + 1}) first"
    if release is not None and key > release and not step_done(release):
        # The steps after the release restore power and test under it: only once the locks are off (1910.147(e)).
        return f"step {key + 1} is done after the locks come off: tick step {release + 1}, which removes them, first"
    if key != lockout and key not in locked and not (key < lockout and key in moves_or_restores(steps)):
        return ""
    points = isolation_points(order)
    several = len({p.telescope_id for p in points}) > 1

    def point_named(point) -> str:
        return f"'{point.telescope.name}: {point.label}'" if several else f"'{point.label}'"

    open_points = [point_named(p) for p in points if not done((ChecklistTick.Kind.POINT, p.pk), p.description)]
    if key < lockout:
        # A step under power that may move an axis, ticked once locks are on: the record would show the telescope
        # slewed with its drives locked out (a tablet walk-through ticked every point, then the slew, then the
        # lockout). Either it was done before the locks went on, and is ticked in that place, or not done with them on.
        # Once the release is ticked the locks are off, and it may be done under power again (a step left while the
        # telescope's mirror was out, done after the reinstall).
        if release is not None and step_done(release):
            return ""
        on = [] if not step_done(lockout) else [f"the lockout (step {lockout + 1})"]
        if locked_points := [point_named(p) for p in points if done((ChecklistTick.Kind.POINT, p.pk), p.description)]:
            on.append(f"isolation point{'s' if len(locked_points) > 1 else ''} {', '.join(locked_points)}")
        if not on:
            return ""
        ticks_on = " and ".join(on)
        return (
            f"step {key + 1} is done under power before the lockout and may move an axis, but {ticks_on} "
            f"{'are' if len(on) > 1 or len(locked_points) > 1 else 'is'} ticked as locked: if it was done before the "
            "locks went on, take back those ticks first, tick this one, then tick them again; if not, it is not done "
            "with the locks on"
        )
    named = f"isolation point{'s' if len(open_points) > 1 else ''} {', '.join(open_points)}"
    if key == lockout:
        # The lockout step's own words ("Isolate, lock and tag every energy source listed under 'Energy isolation
        # points'; relieve or restrain stored energy ...; try to start the drives ...") take in locking each point:
        # each point is ticked as its lock goes on, and the step once all of them are locked, the stored energy
        # relieved or restrained and the drives tried (1910.147(d)(4) to (d)(6)). So the points come first, and the
        # step closes the lockout. An order made before the present wording is read the same (is_lockout_step).
        if open_points:
            return f"step {key + 1} is the lockout, which locks and tags every isolation point: tick {named} first"
        return ""
    first = [] if step_done(lockout) else [f"the lockout (step {lockout + 1})"]
    if open_points:
        first.append(named)
    if first:
        return f"step {key + 1} is done with the energy isolated: tick {' and '.join(first)} first"
    if release is not None and step_done(release):
        # The release says the locks are off: work ticked after it would show isolated work done without them.
        return (
            f"step {key + 1} is done with the energy isolated, but step {release + 1} says the locks were removed: "
            f"if it was done before the release, take back step {release + 1} first, tick this one, then tick the "
            "release again; if not, isolate again before doing it"
        )
    return ""


def _take_back_refusal(what: str, standing: list[tuple[list[int], str, str]]) -> str:
    """Why the tick on an isolation point or on the lockout step (``what``) stays, or "" when it can be taken back.
    ``standing`` holds the ticked steps that stand on it, as (step positions, what one of them is, what several
    are), in an order they can be taken back in: taken back first, they keep the record from showing work done
    locked out, or the locks removed, with no lockout before it."""
    if not standing:
        return ""
    taken = _step_numbers([index for indexes, _, _ in standing for index in indexes])
    if len(standing) == 1:
        indexes, one, several = standing[0]
        because = f"it {one}" if len(indexes) == 1 else f"they {several}"
    else:
        because = "; ".join(
            f"{_step_numbers(indexes)} {one if len(indexes) == 1 else several}" for indexes, one, several in standing
        )
    return f"the tick on {what} stays: take back {taken} first: {because}"


def _step_numbers(indexes: list[int]) -> str:
    """"step 6", "steps 7, 6 and 5": positions from 0 said as printed, highest first (an order to take back in)."""
    said = [str(index + 1) for index in sorted(indexes, reverse=True)]
    return f"step {said[0]}" if len(said) == 1 else f"steps {', '.join(said[:-1])} and {said[-1]}"


def part_add(order: WorkOrder, part: Part, quantity: float) -> PartUse:
    """Reserve ``quantity`` of ``part`` on an order not yet finished. Refused, adding nothing, for a part of another
    site or a quantity that is not a number above 0 and at most ``PART_QUANTITY_MAX``."""
    if order.state not in (State.DRAFT, State.ISSUED, State.UNDERWAY):
        raise Refused("parts can be added only before the work is finished")
    if part.site_id != order.site_id:
        raise Refused("that part is kept at another site")
    if not isinstance(quantity, int | float) or not math.isfinite(quantity) or quantity <= 0:
        raise Refused(f"quantity of {part.name}: enter a number above zero, not {quantity!r}")
    if quantity > PART_QUANTITY_MAX:
        raise Refused(part_quantity_too_many(f"quantity of {part.name}"))
    if problem := part_quantity_not_whole(part, quantity, f"quantity of {part.name}"):
        raise Refused(problem)
    return PartUse.objects.create(work_order=order, part=part, quantity_planned=quantity)


def part_count_record(part: Part, counted: float, by) -> list[PartUse]:
    """The stock of ``part`` as counted on the shelf: the register is set to it, and the shortfalls waiting for a
    count (finished work that used more than the register held, ``PartUse.quantity_short``) are marked counted.
    Returns the part lines marked. An engineer's; refused, changing nothing, for a count that is not a number from 0
    to ``PART_QUANTITY_MAX`` or a part with no shortfall waiting (other corrections of the register are made in the
    admin)."""
    if not has_role(by, ENGINEER):
        raise Refused(f"recording a count of the stock needs the {ENGINEER} role or above")
    if not isinstance(counted, int | float) or not math.isfinite(counted) or counted < 0:
        raise Refused(f"counted {part.name}: enter the number on the shelf, 0 or more")
    if counted > PART_QUANTITY_MAX:
        raise Refused(part_quantity_too_many(f"counted {part.name}"))
    if problem := part_quantity_not_whole(part, counted, f"counted {part.name}"):
        raise Refused(problem)
    with transaction.atomic():
        current = Part.objects.select_for_update().get(pk=part.pk)
        waiting = list(PartUse.objects.filter(part=current, quantity_short__gt=0, short_counted_at__isnull=True))
        if not waiting:
            raise Refused(f"no shortfall of {current.name} is waiting for a count; correct the register in the admin")
        now = timezone.now()
        current.quantity_on_hand = counted
        current._history_user = by
        current._change_reason = "counted after a shortfall"
        current.save(update_fields=["quantity_on_hand"])
        for use in waiting:  # one by one, so the audit trail records each
            use.short_counted_at = now
            use._history_user = by
            use.save(update_fields=["short_counted_at"])
    part.refresh_from_db()
    return waiting


def lift_set(order: WorkOrder, inputs: dict) -> lifting.LiftFigures:
    """Store the lifting inputs after checking them with ``calc.lifting`` (ValueError names the problem). Refused
    once the order is finished or withdrawn: its record stays as it was. Underway, the figures may still be corrected
    (the slings rigged are not those planned)."""
    if order.state in (State.FINISHED, State.COUNTERSIGNED, State.WITHDRAWN):
        raise Refused(f"{order.number} is {order.get_state_display()}: its record stays as it was, its lifting "
                      "figures included")
    figures = lifting.lift_figures(**inputs)
    order.lift_inputs = inputs
    hazards = set(order.hazards) | {"suspended_load"}
    order.hazards = [h for h in HAZARDS if h in hazards]
    order.save(update_fields=["lift_inputs", "hazards"])
    return figures


@dataclass(frozen=True)
class HazardsUpdate:
    """What ``work_order_hazards_update`` did: the hazards it added (codes), whether it put the lockout step and
    the release step into the steps, whether it took lifting figures from the mirror, and whether the steps still
    lack the lockout step the hazards now call for (the engineer must put it in: the order cannot be issued or
    started until then)."""

    added: list[str]
    steps_rebuilt: bool
    lift_added: bool
    lockout_missing: bool


def work_order_hazards_update(order: WorkOrder, by) -> HazardsUpdate:
    """Add the hazards the order's subsystems and plans carry now that it lacks (``selectors.hazards_missing``),
    and what the order stores from them; never remove one. Only before the work starts (draft or issued), by an
    engineer; the audit trail records who.

    The cautions and isolation points follow the hazards when read. The steps: where the added hazards call for
    isolation and the steps lack the lockout step, an order whose steps are still exactly those its plans give
    (``_steps_for``) gets them again from the plans' step groups, the lockout step and the step that removes the
    locks between them; other steps (edited since, or an ad hoc order, whose groups are not kept) are left as
    they are, since a step's words cannot say whether it is done under power, and ``lockout_missing`` is set: the
    engineer puts the step in, and until then the order cannot be issued or started (``work_order_move``). A
    suspended load added to an order without lifting figures takes them from its mirror, as a new order does.
    Refused, changing nothing, for another role, an order whose work has started or ended, or one that lacks none.
    """
    if not has_role(by, ENGINEER):
        raise Refused(f"bringing a work order's hazards up to date needs the {ENGINEER} role or above")
    with transaction.atomic():
        # Locked and read again: the work must not start, nor the hazards be added twice, meanwhile.
        current = WorkOrder.objects.select_for_update().select_related("site").get(pk=order.pk)
        if current.state not in (State.DRAFT, State.ISSUED):
            raise Refused(
                f"{current.number} is {current.get_state_display()}: only an order not yet started is brought up to "
                "date; withdraw it and make a new one, which carries its subsystems' hazards"
            )
        added = hazards_missing(current)
        if not added:
            raise Refused(f"{current.number} already carries every hazard of its subsystems")
        before = list(current.hazards)
        current.hazards = [h for h in HAZARDS if h in {*before, *added}]
        fields = ["hazards"]
        steps_rebuilt = False
        if lockout_missing(current.hazards, current.step_list):
            items = list(current.items.select_related("plan__subsystem__telescope"))
            plans = [i.plan for i in items]
            if plans and None not in plans:
                labels = _plan_labels(plans)
                if current.steps == _steps_for(plans, labels, before):
                    current.steps = _steps_for(plans, labels, current.hazards)
                    fields.append("steps")
                    steps_rebuilt = True
        lift_added = False
        if "suspended_load" in added and current.lift_inputs is None:
            current.lift_inputs = _mirror_lift([i.subsystem for i in current.items.select_related("subsystem")],
                                               current.hazards)
            if current.lift_inputs is not None:
                fields.append("lift_inputs")
                lift_added = True
        current._history_user = by
        current._change_reason = "hazards brought up to date"
        current.save(update_fields=fields)
    order.refresh_from_db()
    return HazardsUpdate(added, steps_rebuilt, lift_added, lockout_missing(order.hazards, order.step_list))
