"""Reads of work orders: the cautions, lifting figures, checklist and printable sheet of one work order."""
from __future__ import annotations

import datetime as dt
from collections.abc import Collection, Iterable, Sequence
from dataclasses import astuple, dataclass
from typing import NamedTuple

from django.db.models import F, OuterRef, Prefetch, Q, QuerySet, Subquery
from django.db.models.functions import Coalesce
from django.urls import reverse
from django.utils import dateformat, timezone

from observatory_ops.archive.history import Change, changes, person
from observatory_ops.calc import lifting
from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.planning.metrics import RECOAT_LINE
from observatory_ops.planning.models import ServicePlan, part_lines
from observatory_ops.planning.services import site_today
from observatory_ops.registry import catalogue
from observatory_ops.registry.catalogue import unlabelled
from observatory_ops.registry.models import Site, Subsystem, name_key
from observatory_ops.registry.selectors import crew_days_off

from . import sheet as sheet_
from .cautions import (
    ALONGSIDE_ADVICE,
    ALONGSIDE_START_QUESTION,
    ALONGSIDE_TITLE_ON_PAPER,
    ENERGY_ALSO,
    ENERGY_HAZARDS,
    HAND_BACKS_HELD_ADVICE,
    HAND_BACKS_HELD_TITLE,
    HAZARDS,
    HAZARDS_MISSING_BEFORE_START,
    HAZARDS_MISSING_ON_PAPER,
    HAZARDS_MISSING_STARTED,
    HAZARDS_MISSING_TITLE,
    HAZARDS_UNRECORDED,
    HAZARDS_UNRECORDED_BEFORE_START,
    HAZARDS_UNRECORDED_HELD,
    HAZARDS_UNRECORDED_ON_PAPER,
    HAZARDS_UNRECORDED_STARTED,
    HAZARDS_UNRECORDED_TITLE,
    ISOLATION_POINTS_MISSING_HELD,
    ISOLATION_REVIEW,
    ISOLATION_UNTICKED,
    ISOLATION_UNTICKED_RECORD,
    ISOLATION_UNTICKED_SHORT,
    LIFT_CELL_ON_LIFT_PAGE,
    LIFT_CELL_ON_MIRROR,
    LIFT_INPUTS_INVALID,
    LIFT_NO_CELL,
    LIFT_NO_CELL_REFUSED,
    LIFT_NO_FIGURES_REFUSED,
    LIFT_NO_LIMIT,
    LIFT_NO_LIMIT_REFUSED,
    LIFT_OVER_LIMIT,
    LIFT_REFUSED,
    LIFT_TOO_FLAT,
    LOCKOUT_STEP_MISSING,
    NO_LIFT_FIGURES_NOTE,
    PRECEDENCE_STATEMENT,
    PREPARED_APART_NOTE,
    RECOAT_HOLDS_HAND_BACK,
    SEVERITY_LABELS,
    TELESCOPE_OUT,
    TELESCOPE_OUT_TITLE,
    TELESCOPE_OUT_TODO,
    WORK_STOPPED_PART_WAY,
    Caution,
    cautions_for,
    hazards_missing_notice,
    in_words,
    is_lockout_step,
    isolation_statement,
    needs_isolation,
)
from .models import (
    ChecklistTick,
    EnergyControlInspection,
    IsolationPoint,
    Part,
    PartUse,
    State,
    WorkOrder,
    WorkOrderItem,
    amount_text,
)


def work_orders() -> QuerySet[WorkOrder]:
    return WorkOrder.objects.select_related("site", "telescope", "assignee")


def work_orders_listed() -> QuerySet[WorkOrder]:
    """``work_orders`` with each order's items and their telescopes, fetched in one more query for all the rows
    read: the list names the telescopes of an order over several."""
    items = WorkOrderItem.objects.select_related("subsystem__telescope")
    return work_orders().prefetch_related(Prefetch("items", queryset=items))


#: Columns of the work orders' CSV (``work_orders_csv_rows``); dates are the site's, in ISO form.
WORK_ORDERS_CSV_HEADER = (
    "number", "state", "type", "site", "telescope", "title", "subsystems", "planned", "started", "work_done_on",
    "estimated_hours", "actual_hours", "assignee", "crew", "countersigned_by",
)


def work_orders_csv_rows(orders: QuerySet[WorkOrder]):
    """The rows of the work orders' CSV: ``orders`` (from ``work_orders_listed``), each with the day its work was done
    (``work_done_on``, one subquery for all) and its actual hours, empty while it is to do."""
    for order in orders.annotate(done_on=work_done_on_of("pk")).select_related("countersigned_by"):
        zone = order.site.zone
        telescopes = sorted({i.subsystem.telescope.name for i in order.items.all()})
        yield (
            order.number, order.get_state_display(), order.get_order_type_display(), order.site.name,
            order.telescope.name if order.telescope_id else ", ".join(telescopes),
            order.title, "; ".join(f"{i.subsystem.telescope.name}: {i.subsystem.name}" for i in order.items.all()),
            order.planned_date.isoformat() if order.planned_date else "",
            order.started_at.astimezone(zone).date().isoformat() if order.started_at else "",
            order.done_on.isoformat() if order.done_on else "",
            "" if order.estimated_hours is None else order.estimated_hours,
            "" if order.actual_hours is None else order.actual_hours,
            person(order.assignee) if order.assignee_id else "", ", ".join(order.crew or ()),
            person(order.countersigned_by) if order.countersigned_by_id else "",
        )


#: States of a work order whose work is still to do.
TO_DO = (State.DRAFT, State.ISSUED, State.UNDERWAY)


def orders_for_plans(plan_ids) -> dict[int, list[WorkOrder]]:
    """The work orders still to do that cover each of the plans (one query), soonest planned first: the due
    list says when an item is already on one, so nobody plans it twice."""
    found: dict[int, list[WorkOrder]] = {}
    items = (
        WorkOrderItem.objects.filter(plan_id__in=list(plan_ids), work_order__state__in=TO_DO)
        .select_related("work_order")
        .order_by(F("work_order__planned_date").asc(nulls_last=True), "work_order_id")
    )
    for item in items:
        orders = found.setdefault(item.plan_id, [])
        if item.work_order not in orders:
            orders.append(item.work_order)
    return found


@dataclass(frozen=True)
class TelescopeOut:
    """A telescope whose mirror (``mirror``, its name; ``kind``, its kind in words) a recoat removed: the finished
    ``removal`` order, and the ``reinstall`` order still to do (None when none is planned)."""

    telescope_id: int
    telescope: str
    mirror: str
    kind: str
    removal: WorkOrder
    reinstall: WorkOrder | None
    subsystem_id: int

    def notice(self) -> tuple[str, str, str]:
        """Title, what stands, what not to do: for the pages and the paper of other work at this telescope. The day
        it came out is ``came_out_on``."""
        done = came_out_on(self.removal)
        if self.reinstall is None:
            reinstall = "no reinstall order is planned yet: the site engineer plans one"
        else:
            day = self.reinstall.planned_date
            planned = dateformat.format(day, "d M Y") if day else "a day not set"
            reinstall = f"it goes back with {self.reinstall.number}, planned for {planned}"
        body = TELESCOPE_OUT.format(mirror=self.mirror, removed_on=dateformat.format(done, "d M Y"),
                                    removal=self.removal.number, reinstall=reinstall)
        return TELESCOPE_OUT_TITLE.format(telescope=self.telescope, kind=self.kind), body, TELESCOPE_OUT_TODO


def telescopes_out(sites: Sequence[Site] | None = None) -> list[TelescopeOut]:
    """Each mirror (at ``sites``, or anywhere) that a recoat removed and no reinstall has put back since, its
    telescope's first: for each mirror, its newest finished removal or reinstall order decides. One entry a mirror:
    a telescope with two out has two (a diff review: one kept a telescope's entry, and a secondary's removal hid the
    primary's). Three queries at most, whatever the number of orders."""
    finished = WorkOrder.objects.filter(
        recoat_phase__in=("removal", "reinstall"), state__in=(State.FINISHED, State.COUNTERSIGNED)
    )
    if sites is not None:
        finished = finished.filter(site__in=list(sites))
    newest: dict[int, tuple[WorkOrder, Subsystem]] = {}
    items = Prefetch("items", queryset=WorkOrderItem.objects.select_related("subsystem__telescope"))
    finished = finished.select_related("site").prefetch_related(items)
    for order in finished.order_by("finished_at", "pk"):
        for item in order.items.all():
            newest[item.subsystem_id] = (order, item.subsystem)
    # A mirror retired while out (replaced, say) is no longer out of its telescope: nothing could put it back (a diff
    # review: the forecasts counted its telescope out for good, and its other work stayed held).
    removed = {pk: pair for pk, pair in newest.items()
               if pair[0].recoat_phase == "removal" and pair[1].retired_on is None}
    if not removed:
        return []
    to_do: dict[int, WorkOrder] = {}
    pending = WorkOrderItem.objects.filter(
        subsystem_id__in=list(removed), work_order__recoat_phase="reinstall", work_order__state__in=TO_DO
    ).select_related("work_order").order_by(F("work_order__planned_date").asc(nulls_last=True), "work_order__pk")
    for item in pending:
        to_do.setdefault(item.subsystem_id, item.work_order)
    out = [
        TelescopeOut(subsystem.telescope_id, subsystem.telescope.name, subsystem.name, subsystem.kind_label.lower(),
                     order, to_do.get(pk), pk)
        for pk, (order, subsystem) in removed.items()
    ]
    return sorted(out, key=lambda o: (name_key(o.telescope), o.removal.finished_at, o.removal.pk))


#: The recoat phases whose orders are written for a telescope without its mirror (the reinstall puts it back): they
#: carry no notice that it is out. A removal still to do is written for a mirror in its cell, its telescope balanced
#: (it moves the telescope under power to the removal position), so it carries the notice like any other work: a
#: hand-back walk-through planned a second recoat with the mirror still out, and its removal's slews were not held.
#: The realignment is written for the mirror back in its cell, so it carries the notice too.
_WRITTEN_FOR_MIRROR_OUT = ("coating", "reinstall")


def telescope_out_notices(order: WorkOrder) -> list[tuple[str, str, str]]:
    """The notices for an order still to do at a telescope whose mirror is out (``telescopes_out``); none for the
    recoat's own orders written for a telescope without its mirror (``_WRITTEN_FOR_MIRROR_OUT``), nor for the removal
    that took it out."""
    if order.state not in TO_DO or order.recoat_phase in _WRITTEN_FOR_MIRROR_OUT:
        return []
    out = telescopes_out([order.site])
    if not out:
        return []
    at = {order.telescope_id} if order.telescope_id else set(
        order.items.values_list("subsystem__telescope_id", flat=True)
    )
    # Not the removal that took its own mirror out (its finish reads it as finished, once claimed).
    return [o.notice() for o in out if o.telescope_id in at and o.removal.pk != order.pk]


def recoat_planned_notices(order: WorkOrder) -> list[tuple[str, str, str]]:
    """For an order still to do planned on a day a recoat in hand is planned to have its telescope's mirror out
    (``planning.services.recoat_downtime``; from its first day on, any day, while its removal is underway), the
    mirror not out yet (its removal not finished: once it is, ``telescope_out_notices`` holds the work): title, what
    is planned, what to do. At a site whose telescopes share one enclosure, a recoat of any of them counts (its dome
    moves over the telescope, as ``recoat_hands_back`` has it). Paper printed days ahead (a weekly batch) said nothing
    of a removal coming on those days (a paper review). [] for the recoat's own orders, an order with no planned
    date, or none planned then. Said, never refused."""
    if order.state not in TO_DO or order.planned_date is None:
        return []
    from observatory_ops.planning.services import recoat_downtime, recoats_in_hand

    at = {order.telescope_id} if order.telescope_id else set(
        order.items.values_list("subsystem__telescope_id", flat=True))
    today = site_today(order.site)
    said = []
    for plan in recoats_in_hand(order.site, today):
        telescope = plan.mirror.subsystem.telescope
        removal = plan.removal()
        if (telescope.pk not in at and not order.site.shared_enclosure) or removal is None \
                or removal.state not in TO_DO or any(o.pk == order.pk for o in plan.work_orders.all()):
            continue
        out = recoat_downtime(plan, today)
        underway = removal.state == State.UNDERWAY
        if not (out.first <= order.planned_date and (underway or order.planned_date <= out.last)):
            continue
        reinstall = next((o for o in plan.work_orders.all()
                          if o.recoat_phase == "reinstall" and o.state in TO_DO), None)

        def when(o: WorkOrder) -> str:
            return f"planned for {dateformat.format(o.planned_date, 'd M Y')}" if o.planned_date else "not dated"

        back = f", its reinstall {reinstall.number} {when(reinstall)}" if reinstall else ""
        todo = ("Its removal is underway: the mirror may already be out. Ask the site engineer before starting"
                if underway else "Before starting, ask the site engineer whether the removal has begun")
        said.append((
            f"{telescope.name}'s {plan.mirror.subsystem.name} is planned to be out for its recoat",
            f"This order is planned for {dateformat.format(order.planned_date, 'd M Y')}, while the recoat is "
            f"planned to have the mirror out: its removal {removal.number} is {when(removal)} "
            f"({removal.get_state_display().lower()}){back}.",
            f"{todo}. Once the mirror is out, do no step that moves an axis, releases a brake or takes the site's "
            "long-term locks off until the reinstall is finished.",
        ))
    return said


class MirrorOutThen(NamedTuple):
    """A mirror out on a past day (``mirror_out_on``): what stood, in words, and whether it is back since."""

    text: str
    back: bool


def mirror_out_on(order: WorkOrder, day: dt.date) -> MirrorOutThen | None:
    """For work of ``order`` done on a past ``day`` (entered from paper), how a telescope it works on stood that day
    with its mirror out (None when every mirror was in, or for the recoat's own orders written for a telescope without
    it, ``_WRITTEN_FOR_MIRROR_OUT``): a removal's work done on or before that day and no reinstall's done by then (one
    done that day puts it back), by the days their work was done (``work_done_on_of``). A walk-through entered work
    dated while the mirror was out once it was back, its slews confirmed done, and had work done before the removal
    held until the reinstall (``telescope_out_notices`` tells today's state). ``back``: no mirror of its telescopes
    is out today. Five queries at most."""
    if order.recoat_phase in _WRITTEN_FOR_MIRROR_OUT:
        return None
    at = {order.telescope_id} if order.telescope_id else set(
        order.items.values_list("subsystem__telescope_id", flat=True))
    items = (WorkOrderItem.objects.filter(
        subsystem__telescope_id__in=at, work_order__recoat_phase__in=("removal", "reinstall"),
        work_order__state__in=(State.FINISHED, State.COUNTERSIGNED)).exclude(work_order=order)
        .annotate(done_on=work_done_on_of("work_order_id")).select_related("work_order", "subsystem__telescope"))
    moves: dict[int, list] = {}
    for item in items:
        if item.done_on is not None:
            moves.setdefault(item.subsystem_id, []).append(item)
    said = []
    for subsystem_id in sorted(moves):  # every mirror out that day, in a steady order (a diff review)
        found = moves[subsystem_id]
        # By the day the work was done, a removal before a reinstall of the same day (the mirror is back that day).
        found.sort(key=lambda i: (i.done_on, i.work_order.recoat_phase == "reinstall", i.work_order.finished_at))
        then = [i for i in found if i.done_on <= day]
        if not then or then[-1].work_order.recoat_phase != "removal":
            continue
        removal = then[-1]
        back = next((i for i in found if i.done_on > day and i.work_order.recoat_phase == "reinstall"), None)
        returned = (f"{back.work_order.number} put it back on {back.done_on:%d %b %Y}" if back is not None
                    else "it is not back yet")
        said.append(f"the {removal.subsystem.name} of {removal.subsystem.telescope.name} was out "
                    f"({removal.work_order.number} took it out on {removal.done_on:%d %b %Y}; {returned})")
    if not said:
        return None
    # Back only when no mirror of these telescopes is out today (a diff review: "now that it is back" was said of the
    # primary with the secondary still out).
    out_now = any(o.telescope_id in at for o in telescopes_out([order.site]))
    return MirrorOutThen(
        f"on {day:%d %b %Y}, the day the work was done, {'; and '.join(said)}: the telescope was out of balance, "
        "its axes pinned and its drives on the site's long-term locks", not out_now)


#: The recoat phases whose work takes more than a day and may pause over the crew's days off with the mirror off its
#: cell or the telescope out of balance (mirrors.services._PHASE_WORK): their orders carry ``WORK_STOPPED_PART_WAY``.
_MAY_PAUSE_PART_WAY = ("removal", "reinstall")


def recoat_hands_back(order: WorkOrder, day: dt.date | None = None) -> WorkOrder | None:
    """The realignment still to do of a recoat whose mirror has come out (its removal finished, or the earlier
    recoat's it goes on from: ``RecoatPlan.removal``), on a telescope
    ``order`` works on (any of the site's, where they share one enclosure), ``order`` not being it: the telescope
    goes back to robotic and remote control with its last step, once the collimation is recorded
    (``catalogue.HAND_BACK_AFTER_REALIGNMENT``), and the reinstall's last step says to keep it out until then.
    Another order's hand-back waits for it (``_telescope_out_refusal``) and is left to it at the finish
    (``left_to_the_last_crew``): a recoat review handed the telescope back from another order between the reinstall
    and the realignment. None when there is none. ``day``: the day ``order``'s work was done, when not today (entered
    from paper): work done before the mirror came out handed the telescope back then (a diff review left a hand-back
    dated before the removal to the realignment)."""
    if order.recoat_phase == "realignment":
        return None
    realignments = WorkOrder.objects.filter(
        site=order.site_id, recoat_phase="realignment", state__in=(State.DRAFT, State.ISSUED, State.UNDERWAY),
    ).exclude(pk=order.pk).order_by(F("planned_date").asc(nulls_last=True), "pk")
    if not order.site.shared_enclosure:  # one enclosure over all: its dome moves over the telescope out (a diff review)
        telescopes = {order.telescope_id} if order.telescope_id else set(
            order.items.values_list("subsystem__telescope_id", flat=True))
        realignments = realignments.filter(telescope_id__in=telescopes)
    for realignment in realignments:
        plan = realignment.recoat_plans.order_by("-pk").first()
        removal = plan.removal() if plan is not None else None
        if removal is None or removal.state not in (State.FINISHED, State.COUNTERSIGNED):
            continue
        if day is not None and day < came_out_on(removal):
            continue
        return realignment
    return None


def standing_notes(order: WorkOrder) -> tuple[str, ...]:
    """What the page and the paper of an order still to do say to keep in mind throughout its work, above its steps
    and not among them, so nobody ticks it: how to leave a recoat's removal or reinstall if the work stops part way,
    and the same for a whole recoat in one order (made from the due list: an order over a plan with a recoat-line
    trigger, not one of the planner's phase orders); that a suspended load has no lifting figures on the order
    (``NO_LIFT_FIGURES_NOTE``; one lifting a registered mirror waits for them instead: ``lift_refusal``).
    Orders made before it became a note keep it among their steps as they were, except those still draft or issued
    (migration ``workorders.0013``), so it may read twice on an old order underway."""
    if order.state not in TO_DO:
        return ()
    notes = []
    if len(plans := prepared_apart(order)) > 1:
        notes.append(PREPARED_APART_NOTE.format(n=len(plans), plans="; ".join(plans)))
    if order.recoat_phase in _MAY_PAUSE_PART_WAY or (
        not order.recoat_phase and order.items.filter(plan__triggers__metric=RECOAT_LINE).exists()
    ):
        notes.append(WORK_STOPPED_PART_WAY)
    if "suspended_load" in order.hazards and not order.lift_inputs and lift_mirror(order) is None:
        notes.append(NO_LIFT_FIGURES_NOTE)
    if any(catalogue.is_hand_back(step) for step in order.step_list) and (realignment := recoat_hands_back(order)):
        # On paper too: the tick is refused online, but a crew working from the printed order would hand back an
        # uncollimated telescope (a safety walk-through).
        whose = realignment.telescope.name if realignment.telescope_id else "the telescope"
        notes.append(RECOAT_HOLDS_HAND_BACK.format(telescope=whose, number=realignment.number))
    return tuple(notes)


def prepared_apart(order: WorkOrder) -> dict[str, list[int]]:
    """The plans whose steps before the lockout prepare one telescope each their own way, on an order over several
    plans: plan label -> the positions (from 1) of its preparing steps, for each telescope with more than one such
    plan. Read from the steps' "[plan label] " prefixes (``services._labelled``; "[T1: ...]" when the order spans
    several telescopes, each compared with its own) and the lockout step; the step every plan begins with, reading the
    subsystem's records (``catalogue.READ_RECORDS``), prepares nothing. Empty without a lockout or with one plan."""
    steps = order.step_list
    lockout = next((i for i, step in enumerate(steps) if is_lockout_step(step)), None)
    if lockout is None:
        return {}
    by_plan: dict[str, list[int]] = {}
    for index, step in enumerate(steps[:lockout]):
        if unlabelled(step) != step and unlabelled(step).strip() != catalogue.READ_RECORDS:
            by_plan.setdefault(step[1:step.index("] ")], []).append(index + 1)
    names = set(order.items.values_list("subsystem__telescope__name", flat=True))
    if len(names) > 1:  # labels begin with their telescope's name
        where = {label: label.split(": ", 1)[0] for label in by_plan}
    else:
        where = dict.fromkeys(by_plan, "")
    crowded = {place for place in where.values() if list(where.values()).count(place) > 1}
    return {label: places for label, places in by_plan.items() if where[label] in crowded}


def parts_low_or_short(site: Site) -> list[OpenPlanned]:
    """The site's parts to see to, for the dashboard: those at or below their reorder point, and those the orders
    still to do plan more of than the register holds (``parts_planned_open``), by name. Two queries."""
    found = parts_planned_open(Part.objects.filter(site=site).order_by("name"))
    return [row for row in found.values() if row.part.low or row.short_by > 0]


def cautions(order: WorkOrder, points: Sequence[IsolationPoint] | None = None) -> list[Caution]:
    """The cautions the order prints: one for each of its hazards, and one for each energy its lockout touches (the
    kinds of its isolation points, ``cautions.ENERGY_HAZARDS``), so a lockout that closes and bleeds the brake air
    prints the pneumatic caution on an axis drive's order too, and one that locks the servo drives the moving
    telescope's (``cautions.ENERGY_ALSO``). ``points``: ``isolation_points(order)``, read when not given."""
    points = isolation_points(order) if points is None else points
    touched = [hazard for point in points for table in (ENERGY_HAZARDS, ENERGY_ALSO)
               if (hazard := table.get(point.energy))]
    return cautions_for([*order.hazards, *touched])


def hazards_of(subsystems: Sequence[Subsystem], plans: Sequence[ServicePlan]) -> list[str]:
    """The hazards of work on these subsystems under these plans, in the caution library's order: what an
    order copies when it is made (``services.work_order_from_due``, ``services.work_order_ad_hoc``)."""
    found = {h for s in subsystems for h in s.hazards} | {h for p in plans for h in p.hazards}
    return [h for h in HAZARDS if h in found]


def hazards_missing(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> list[str]:
    """The hazards the order's subsystems, and the service plans it covers, carry now that the order does not
    (codes, in the library's order), for an order still to do; [] once it is finished or withdrawn.

    An order copies its hazards when it is made, so one added later to a subsystem (in the admin, or by an
    upgrade that adds catalogue hazards) leaves the orders made before without its cautions. Work away from the
    telescope (``WorkOrder.at_telescope`` False: a mirror at a coating plant) carries its own hazards only, so
    nothing is compared. The phase orders of a recoat (``mirrors.services``) are compared with their mirror's
    hazards but not with those of the recoat service plans the realignment covers: it covers them only to
    restart their counting, and their hazards are the coating's.
    """
    if order.state not in TO_DO or not order.at_telescope:
        return []
    items = order_items(order) if items is None else items
    recoat = order.recoat_plans.exists()  # recoat_plans: mirrors.RecoatPlan.work_orders
    now = hazards_of([i.subsystem for i in items], [] if recoat else [i.plan for i in items if i.plan_id])
    return [h for h in now if h not in order.hazards]


def hazards_unrecorded(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> list[Subsystem]:
    """For an order still to do: its subsystems whose hazards nobody has recorded, neither a hazard nor an engineer's
    record that there are none (``Subsystem.hazards_recorded``), in the order of its items; [] otherwise. Until an
    engineer records them, the order cannot know its cautions or whether its energy must be isolated."""
    if order.state not in TO_DO:
        return []
    items = order_items(order) if items is None else items
    found = {i.subsystem_id: i.subsystem for i in items if not i.subsystem.hazards_recorded}
    return list(found.values())


def hazards_notice(order: WorkOrder, missing: Sequence[str], paper: bool = False,
                   unrecorded: Sequence[Subsystem] | None = None) -> tuple[str, ...]:
    """The notice on an order that lacks the ``missing`` hazards, or covers subsystems whose hazards nobody has
    recorded (``hazards_unrecorded``): its title, what the order lacks, and what to do (on the page: an engineer
    records them or brings it up to date before the work starts, or, once started, the technician stops and asks;
    on paper: ask the engineer). () when there is neither."""
    unrecorded = hazards_unrecorded(order) if unrecorded is None else unrecorded
    if not missing and not unrecorded:
        return ()
    from .services import lockout_missing  # services reads this module

    if unrecorded:
        title, (paper_todo, started, before) = HAZARDS_UNRECORDED_TITLE, (
            HAZARDS_UNRECORDED_ON_PAPER, HAZARDS_UNRECORDED_STARTED, HAZARDS_UNRECORDED_BEFORE_START
        )
    else:
        title, (paper_todo, started, before) = HAZARDS_MISSING_TITLE, (
            HAZARDS_MISSING_ON_PAPER, HAZARDS_MISSING_STARTED, HAZARDS_MISSING_BEFORE_START
        )
    if paper:
        todo = paper_todo
    elif order.state == State.UNDERWAY:
        todo = started
    else:
        todo = before.format(moves="issued or started" if order.state == State.DRAFT else "started")
    lines = []
    if missing:
        lockout = lockout_missing([*order.hazards, *missing], order.step_list)
        lines.append(hazards_missing_notice(missing, lockout))
    if unrecorded:
        lines.append(HAZARDS_UNRECORDED.format(subsystems=in_words([str(s) for s in unrecorded])))
    return title, *lines, todo


def order_isolation_statement(order: WorkOrder, missing: Sequence[str] | None = None,
                              unrecorded: Sequence[Subsystem] | None = None) -> str:
    """What the order's page and paper say under "Energy isolation" when its hazards need nothing isolated, and ""
    when they do (its isolation points are listed instead): ``cautions.isolation_statement`` with what the order
    lacks (``missing``, ``hazards_missing(order)`` read when not given) and the subsystems whose hazards nobody has
    recorded (``hazards_unrecorded``). Never that the work needs no isolation while either stands."""
    missing = hazards_missing(order) if missing is None else missing
    unrecorded = hazards_unrecorded(order) if unrecorded is None else unrecorded
    return isolation_statement(order.hazards, missing, [str(s) for s in unrecorded])


def register_part(name: str, register: Sequence[Part]) -> Part | None:
    """The part of a site's ``register`` that a plan's parts line names (``part_lines``): the one whose name is the
    line's exactly (surrounding spaces aside), else the only one whose name is the line's but for capitals. None when
    no part is, or when several are but for capitals and none exactly: which one is meant is not guessed (the register
    refuses such names since, ``Part.clean``), and the line is named on the order for the engineer
    (``parts_unregistered``)."""
    exact = [part for part in register if part.name.strip() == name.strip()]
    if len(exact) == 1:
        return exact[0]
    alike = [part for part in register if name_key(part.name) == name_key(name)]
    return alike[0] if len(alike) == 1 else None


def parts_unregistered(order: WorkOrder, items: list[WorkOrderItem] | None = None,
                       uses: Sequence[PartUse] | None = None) -> list[str]:
    """For an order still to do: the parts its service plans name that are not on its parts list (the site's parts
    register did not hold them when it was made, or held two that differ only in capitals (``register_part``), and
    none was added since), as "2 x Brake pad set", each plan's quantities added up; [] otherwise. ``items`` and
    ``uses`` (the order's part uses): when the caller has them already."""
    if order.state not in TO_DO:
        return []
    held = ({use.part_id for use in uses} if uses is not None
            else set(order.part_uses.values_list("part_id", flat=True)))
    register = list(Part.objects.filter(site_id=order.site_id).only("name"))
    wanted: dict[str, float] = {}
    for plan in order_plans(order, items):
        for name, quantity in part_lines(plan.parts):
            part = register_part(name, register)
            if part is None or part.pk not in held:
                wanted[name] = wanted.get(name, 0.0) + quantity
    return [f"{quantity:g} x {name}" for name, quantity in wanted.items()]


def second_person_refusal(order: WorkOrder, user) -> str:
    """Why ``user`` took part in the order's work and so may not countersign it, "" when they took none.

    Countersigning is a second person's check of work they had no hand in (common practice, no published source):
    not the one who finished it, nor anyone on its crew (``on_the_crew``), nor anyone who ticked a line of its
    checklist or took a tick back (``ChecklistTick.recorded_by``), for the finisher may leave them off the crew.
    Starting it is not a hand in the work: at a small site the engineer often starts the order the technician then
    works, and barred for that, an order whose isolation answer is put to the engineer could have nobody left to
    countersign it. Every reason that holds is given. Three queries at most, whatever the order."""
    reasons = []
    if order.finished_by_id is not None and order.finished_by_id == user.pk:
        reasons.append("you finished this work order yourself")
    if on_the_crew(order, user):
        reasons.append(_crew_why(order, user))
    ticks = set(order.ticks.filter(recorded_by=user).values_list("ticked", flat=True).distinct())
    if True in ticks:
        reasons.append("you ticked its lines")
    elif ticks:
        reasons.append("you took back a tick of its lines")
    return "; and ".join(reasons)


def _crew_why(order: WorkOrder, user) -> str:
    """Why ``user``, on the crew of ``order`` (``on_the_crew``), is taken to have done its work."""
    if order.crew_by_account:
        return (f"you are on the crew that did the work: {person(order.finished_by)} chose your account on it when "
                "finishing")
    return (f"you are named on the crew that did the work (\"{crew_name_of(order, user)}\", typed when it was "
            "finished before the crew was chosen by account, is your name)")


def on_the_crew(order: WorkOrder, user) -> bool:
    """``user`` did the order's work with the person who finished it, so may not countersign it.

    An order finished since the finish form chose the crew's people by account (``WorkOrder.crew_by_account``) goes
    by those accounts alone (``crew_members``): a name typed for someone without one (a visitor, a contractor) blocks
    nobody, whatever account it resembles. An order finished before has only the names as typed, and keeps the rule
    it was finished under: one of them is the user's full name or user name, case and spaces aside
    (``crew_name_of``); a typo, a nickname or initials escape it there, and a namesake is caught."""
    if order.crew_by_account:
        return order.crew_members.filter(pk=user.pk).exists()
    return bool(crew_name_of(order, user))


def crew_name_of(order: WorkOrder, user) -> str:
    """For an order finished before the crew was chosen by account: the crew name as typed that is one of ``user``'s
    names (``names_of``), "" when none is."""
    mine = names_of(user)
    return next((name for name in order.crew or [] if name.strip().casefold() in mine), "")


def names_of(user) -> set[str]:
    """The names a crew name typed for ``user`` is matched to: full name and user name, case and spaces aside."""
    return {name.strip().casefold() for name in (user.get_full_name(), user.username) if name.strip()}


def order_plans(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> list[ServicePlan]:
    """The service plans an order covers (from its due items), each once, in the order they were added.
    ``items``: ``order_items(order)`` when the caller has them (no query then)."""
    if items is None:
        return list(ServicePlan.objects.filter(pk__in=order.items.values("plan_id")).order_by("pk"))
    return sorted({i.plan_id: i.plan for i in items if i.plan_id}.values(), key=lambda plan: plan.pk)


def served_since(order: WorkOrder, items: list[WorkOrderItem]) -> dict[int, ServiceRecord]:
    """Item pk -> the service record, not of this order, entered after the order was made that serves its plan, for
    an order still to do: its item may be done already (a recoat review's cleaning order still read "limit reached"
    after the new coating restarted the cleaning plan; the due list said "On WO-00012"). Entered after, not dated
    after: work done on Saturday and entered from paper on Tuesday, the order made on Monday, counts (a diff review).
    Not for a recoat's realignment, whose plans the new coating restarts by design
    (``services._restarted_by_the_new_coating``). The newest of each; one query."""
    if order.state not in TO_DO or order.recoat_phase == "realignment":
        return {}
    plans = {i.plan_id: i.pk for i in items if i.plan_id}
    if not plans:
        return {}
    newest: dict[int, ServiceRecord] = {}
    for record in ServiceRecord.objects.filter(
            plan__in=list(plans), created_at__gt=order.created_at, void=False, corrected_by__isnull=True).exclude(
            work_order=order).order_by("performed_on", "pk"):
        newest[plans[record.plan_id]] = record
    return newest


def lockout_step_warning(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> str:
    """For an order still to do whose hazards call for isolation but whose steps lack the lockout step, or do not
    isolate in sequence (it cannot be issued or started until an engineer puts that right), or leave the brake air
    the lockout vents unrestored (``services.brake_air_problem``: steps written or edited by hand): the warning the
    page and the printed steps show. ``items``: ``order_items(order)`` when the caller has them."""
    from .services import brake_air_problem, lockout_missing, lockout_sequence_problem  # services reads this module

    if order.state not in TO_DO:
        return ""
    if lockout_missing(order.hazards, order.step_list):
        return LOCKOUT_STEP_MISSING
    items = order_items(order) if items is None else items
    problem = lockout_sequence_problem(order.hazards, order.step_list, order_plans(order, items)) or brake_air_problem(
        [i.subsystem for i in items], order.hazards, order.step_list)
    return f"{problem} Do not start the work until the site engineer has put that right." if problem else ""


#: Kinds fed from a supply of their own (a dome's rotation and shutter drives): the telescope's points leave them live.
_SEPARATE_SUPPLY = tuple(code for code, kind in catalogue.KINDS.items() if kind.separate_supply)


def order_items(order: WorkOrder) -> list[WorkOrderItem]:
    """The order's items with their subsystems, telescopes and plans. The selectors below that read them take them
    as ``items`` when the caller has them already: the order's page and its paper read them once for all."""
    return list(order.items.select_related("subsystem__telescope", "plan"))


def _telescopes(order: WorkOrder, items: list[WorkOrderItem]) -> set[int]:
    telescopes = {i.subsystem.telescope_id for i in items}
    if order.telescope_id:
        telescopes.add(order.telescope_id)
    return telescopes


class RecordedPoint(NamedTuple):
    """An isolation point as a finished order recorded it (``WorkOrder.isolation_at_finish``): what its checklist, its
    cautions and its gaps read of a point, kept as it stood when the work was finished."""
    pk: int
    energy: str
    telescope_id: int
    subsystem_id: int | None
    description: str


def isolation_kept(points: Sequence[IsolationPoint], gaps: Sequence[str]) -> dict:
    """What a finished order keeps of its energy isolation (``WorkOrder.isolation_at_finish``): its points and the
    warnings of points the register lacked, as ``isolation_points`` and ``isolation_gaps`` read them at finishing."""
    return {
        "points": [{"id": p.pk, "energy": p.energy, "telescope": p.telescope_id, "subsystem": p.subsystem_id,
                    "text": p.description} for p in points],
        "gaps": list(gaps),
    }


def _kept(order: WorkOrder) -> dict | None:
    """The isolation a finished order kept; None while it is not finished, and for one finished before it was kept."""
    finished = order.state in (State.FINISHED, State.COUNTERSIGNED)
    return order.isolation_at_finish if finished else None


def isolation_points(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> list[IsolationPoint]:
    """The points the order's lockout step locks: each of its telescopes' points for all work there, and
    the points registered for one of its subsystems (a dome's own drives). Work with a moving telescope or
    dome among its hazards also locks the points of every subsystem in service on those telescopes that has
    a supply of its own: a dome turning over people on a platform is a danger to any of that work, not only
    to work on the dome; at a site whose telescopes share one enclosure (``Site.shared_enclosure``), those of every
    telescope of the site. None when its hazards need no energy isolated (the order has no lockout step).

    A finished order's points are those it kept when the work was finished (``RecordedPoint``), whatever the register
    says now: the record does not change when a point is added, edited or moved."""
    if (kept := _kept(order)) is not None:
        return [RecordedPoint(p["id"], p["energy"], p["telescope"], p["subsystem"], p["text"]) for p in kept["points"]]
    if not needs_isolation(order.hazards):
        return []
    items = order_items(order) if items is None else items
    wanted = Q(subsystem__isnull=True) | Q(subsystem_id__in={i.subsystem_id for i in items})
    enclosure = Q(subsystem__kind__in=_SEPARATE_SUPPLY, subsystem__retired_on__isnull=True)
    if "moving_machinery" in order.hazards:
        wanted |= enclosure
    here = Q(telescope_id__in=_telescopes(order, items)) & wanted
    if "moving_machinery" in order.hazards and order.site.shared_enclosure:
        # One enclosure over every telescope, registered under one of them: it moves over work at any of them.
        here |= Q(telescope__site=order.site_id) & enclosure
    return list(IsolationPoint.objects.filter(here).select_related("telescope", "subsystem"))


def orders_underway_locking(point: IsolationPoint) -> list[WorkOrder]:
    """The orders underway at the point's site whose lockout locks it (``isolation_points``), oldest first: the
    admin neither deletes it nor moves it to another telescope or subsystem while they are underway."""
    underway = WorkOrder.objects.filter(state=State.UNDERWAY, site_id=point.telescope.site_id).order_by("pk")
    return [order for order in underway if any(p.pk == point.pk for p in isolation_points(order))]


#: Which registered isolation point answers a hazard of the work (``IsolationPoint.Energy``): without one, the lockout
#: step has nothing to lock. Electrical energy asks for the telescope's AC mains point: a DC supply's or the servo
#: drives' breaker, locked too where registered (their cautions: ``cautions.ENERGY_HAZARDS``), leaves the mains side
#: live, the drives' power stage and the supplies feeding them among it.
_ISOLATES = {"electrical": {"ac"}, "pneumatic": {"air"}, "hydraulic": {"hydraulic"}}
_SOURCE = {"electrical": "AC mains", "pneumatic": "compressed-air", "hydraulic": "hydraulic"}
#: What a gap's warning asks for: the hold (``moves_held``) keeps a draft or issued order from going on until the
#: point is registered; work already underway (a point's need that arose after the start) locks the supply by hand.
_ADD_THE_POINT = ("Have an engineer add {what} to the register before work; if the work is already underway, "
                  "find and lock {supply} before going on.")
_ISOLATED_AT_THE_SUBSYSTEM = ("hydraulic", "pneumatic")
#: Kinds whose work needs an isolation point registered for the subsystem itself (``catalogue.Kind.own_point``), with
#: why, as the warning says when none is: a dome's own drives, the AC distribution's incoming supply.
_OWN_POINT = {code: kind.own_point for code, kind in catalogue.KINDS.items() if kind.own_point}


def _hazards_by_telescope(order: WorkOrder, items: list[WorkOrderItem]) -> dict[int, set[str]]:
    """Telescope id -> the order's hazards that concern work there: those its items on that telescope carry
    (their subsystems' and plans', ``hazards_of``), and the hazards no item carries (given by hand, or added
    with the lifting figures), which the order's telescopes share as nothing says whose they are."""
    by_telescope: dict[int, list[WorkOrderItem]] = {pk: [] for pk in _telescopes(order, items)}
    for item in items:
        by_telescope[item.subsystem.telescope_id].append(item)
    own = {
        pk: set(hazards_of([i.subsystem for i in there], [i.plan for i in there if i.plan_id]))
        for pk, there in by_telescope.items()
    }
    anyone = set().union(*own.values())
    unplaced = {h for h in order.hazards if h not in anyone}
    return {pk: (found & set(order.hazards)) | unplaced for pk, found in own.items()}


def isolation_gaps(order: WorkOrder, points: list[IsolationPoint] | None = None,
                   items: list[WorkOrderItem] | None = None) -> list[str]:
    """A warning for each telescope of the order with a hazard but no isolation point for its energy (``_ISOLATES``:
    electrical energy asks for an AC mains point; one for the whole telescope; for hydraulic pressure and compressed
    air, also one registered for a subsystem the order works on there, a lift's pump and valve, a brake's own air
    valve), and
    for each subsystem whose work needs a point of its own (``catalogue.Kind.own_point``) with none registered for
    it: a dome fed from a supply of its own, whose drives the telescope's points do not make safe, or the AC
    distribution, whose incoming side they leave live. That is each such subsystem the order works on with
    electrical energy among its telescope's hazards and, when a moving telescope or dome is among them, each one in
    service on that telescope with a supply of its own, or on any telescope of a site whose telescopes share one
    enclosure (as ``isolation_points`` lists them), and each such telescope
    whose brakes are released by air with no air point locked (``_brake_air_gaps``).

    Each telescope is judged by the hazards of the work there (``_hazards_by_telescope``): an order over two
    telescopes whose brake work on one involves compressed air asks for no air point on the other. ``points`` and
    ``items``: ``isolation_points(order)`` and ``order_items(order)`` when the caller has them. A finished order's
    warnings are those it kept when the work was finished (``isolation_kept``)."""
    if (kept := _kept(order)) is not None:
        return [f"When the work was finished: {gap}" for gap in kept["gaps"]]
    if not needs_isolation(order.hazards):
        return []
    items = order_items(order) if items is None else items
    points = isolation_points(order, items) if points is None else points
    hazards = _hazards_by_telescope(order, items)
    worked = {i.subsystem_id for i in items}
    gaps = []
    for telescope in sorted({i.subsystem.telescope for i in items}, key=lambda t: t.name):
        whole = {p.energy for p in points if p.telescope_id == telescope.pk and p.subsystem_id is None}
        own = {p.energy for p in points if p.telescope_id == telescope.pk and p.subsystem_id in worked}
        for hazard, answers in _ISOLATES.items():
            if hazard not in hazards[telescope.pk] or whole & answers:
                continue
            # The telescope's electrical supply is locked at its own points, for all work there. A hydraulic system
            # is one subsystem's (a lift's pump and valve), and compressed air may be (a brake's own supply valve):
            # without a point for the whole telescope, each subsystem worked on whose work carries the hazard needs
            # one of its own (a site review's brake valve had been reported missing beside itself; one brake's valve
            # must not answer for the other brake's air). A hazard no item carries takes any of theirs.
            if hazard in _ISOLATED_AT_THE_SUBSYSTEM:
                lacking = _subsystems_without_own_point(telescope.pk, hazard, answers, items, points)
                if lacking is not None and not lacking:
                    continue
                if lacking is None and own & answers:
                    continue
                if lacking and own & answers:  # some have a point of their own, these not
                    gaps.append(f"No {_SOURCE[hazard]} isolation point is registered for {telescope.name}, nor for "
                                f"{in_words([s.name for s in lacking])}. "
                                + _ADD_THE_POINT.format(what="one", supply="the supply"))
                    continue
            gaps.append(f"No {_SOURCE[hazard]} isolation point is registered for {telescope.name}. "
                        + _ADD_THE_POINT.format(what="it", supply="the supply"))
    worked_on = {i.subsystem_id: i.subsystem for i in items if i.subsystem.kind in _OWN_POINT}
    own_supply = {pk: s for pk, s in worked_on.items() if "electrical" in hazards[s.telescope_id]}
    moving = [pk for pk, found in hazards.items() if "moving_machinery" in found]
    if moving:
        # As ``isolation_points`` locks them: at a site whose telescopes share one enclosure, registered under any.
        where = Q(telescope__site=order.site_id) if order.site.shared_enclosure else Q(telescope_id__in=moving)
        nearby = Subsystem.objects.in_service().filter(where, kind__in=_SEPARATE_SUPPLY)
        own_supply.update({s.pk: s for s in nearby.select_related("telescope")})
        gaps += _brake_air_gaps(brake_air_vented(hazards, [i.subsystem for i in items], points), hazards)
    for subsystem in sorted(own_supply.values(), key=lambda s: (s.telescope.name, s.name)):
        if any(p.subsystem_id == subsystem.pk for p in points):
            continue
        if subsystem.pk in worked_on:
            why = _OWN_POINT[subsystem.kind]
        else:
            why = ("which has a supply of its own: it can move during this work, and the telescope's points do not "
                   "stop it")
        gaps.append(f"No isolation point is registered for {subsystem.telescope.name}: {subsystem.name}, {why}. "
                    + _ADD_THE_POINT.format(what="its point, for this subsystem,", supply="its supply"))
    return gaps


@dataclass(frozen=True)
class BrakeAir:
    """One of an order's telescopes whose lockout vents the air of its air-released brakes (``brake_air_vented``)."""

    telescope_id: int
    brakes: tuple[Subsystem, ...]  # its air-released brakes in service (``catalogue.AIR_BRAKE``)
    worked_on: tuple[Subsystem, ...]  # the order's own air brakes there, in service or not
    moving: bool  # the work there has a moving telescope among its hazards
    air_point: bool  # the lockout locks a compressed-air point there

    @property
    def telescope(self):
        return (self.brakes or self.worked_on)[0].telescope


def brake_air_vented(hazards: dict[int, Collection[str]], subsystems: Sequence[Subsystem],
                     points: Sequence[IsolationPoint]) -> list[BrakeAir]:
    """The one place that decides whose brake air an order's lockout vents: its telescopes (the keys of ``hazards``,
    each with the hazards of the work there) with air-released brakes whose air it vents, each with those brakes, the
    order's own among them (of ``subsystems``, the ones it works on), and whether the lockout locks a compressed-air
    point there (of ``points``, those it locks). The order of the telescopes is not defined.

    The lockout vents the brake air of a telescope where it locks an air point there: the air there releases the
    brakes, whichever subsystem the work is on. Work on an air-released brake vents its air too, point or not, and with
    it that of every air brake on its telescope, which share their supply; and so does work there with a moving
    telescope among its hazards: with the drives locked and the air on, the brakes stay released and an unbalanced
    tube can swing, so the air must be vented (``isolation_gaps`` warns to bleed it where no air point is registered).

    What reads it: the step that brings the air back (``services.brake_air_back``) and the warning of a moving
    telescope whose air point is missing (``isolation_gaps``)."""
    air = {p.telescope_id for p in points if p.energy == IsolationPoint.Energy.AIR}
    worked: dict[int, list[Subsystem]] = {}
    for subsystem in subsystems:
        if subsystem.kind == catalogue.AIR_BRAKE:
            worked.setdefault(subsystem.telescope_id, []).append(subsystem)
    moving = {pk for pk, found in hazards.items() if "moving_machinery" in found}
    vented = {pk for pk in hazards if pk in air or pk in worked or pk in moving}
    if not vented:
        return []
    brakes: dict[int, list[Subsystem]] = {}
    for brake in (Subsystem.objects.in_service().filter(telescope_id__in=vented, kind=catalogue.AIR_BRAKE)
                  .select_related("telescope").order_by("pk")):
        brakes.setdefault(brake.telescope_id, []).append(brake)
    return [
        BrakeAir(pk, tuple(brakes.get(pk, ())), tuple(worked.get(pk, ())), pk in moving, pk in air)
        for pk in vented if pk in brakes or pk in worked
    ]


def _subsystems_without_own_point(telescope_id: int, hazard: str, answers: set[str], items: list[WorkOrderItem],
                                  points: Sequence[IsolationPoint]) -> list[Subsystem] | None:
    """Of the subsystems the order works on at ``telescope_id`` whose work carries ``hazard`` (``hazards_of``: theirs
    and their plans'), those with no point of theirs for its energy (``answers``), by name; None when no item there
    carries the hazard (it was given to the order by hand)."""
    carriers = {i.subsystem.pk: i.subsystem for i in items if i.subsystem.telescope_id == telescope_id
                and hazard in hazards_of([i.subsystem], [i.plan] if i.plan_id else [])}
    if not carriers:
        return None
    covered = {p.subsystem_id for p in points if p.subsystem_id in carriers and p.energy in answers}
    return sorted((s for pk, s in carriers.items() if pk not in covered), key=lambda s: s.name)


def _brake_air_gaps(vented: list[BrakeAir], hazards: dict[int, set[str]]) -> list[str]:
    """For work with a moving telescope whose brakes are released by air (``brake_air_vented``: the lockout vents their
    air): a warning for each such telescope whose lockout locks no compressed-air point, unless it was warned of
    already (its work's own air hazard). With the drives locked and the air on, its brakes stay released and an
    unbalanced tube can swing; venting the air sets them, so the lockout needs the air's point."""
    gaps = []
    for found in sorted(vented, key=lambda found: found.telescope.name):
        if not (found.moving and found.brakes) or found.air_point:
            continue
        if "pneumatic" in hazards[found.telescope_id]:
            continue  # warned above when no point answers it
        gaps.append(
            f"The lockout locks no compressed-air point of {found.telescope.name}, whose brakes are released by air: "
            "with its drives locked and the air on, the brakes stay off and the tube can swing. Have an engineer add "
            "its point, for the whole telescope, to the register before work; if the work is already underway, find, "
            "close and bleed the brake supply before going on."
        )
    return gaps


STEP, POINT = ChecklistTick.Kind.STEP, ChecklistTick.Kind.POINT


@dataclass(frozen=True)
class ChecklistLine:
    """One line of a work order's checklist as it reads now, with the newest tick or untick recorded for it."""

    kind: str
    key: int  # the step's position in the step list (from 0), or the isolation point's id
    text: str
    latest: ChecklistTick | None
    note: str  # who ticked it, or took the tick back, and when in the site's time; "" when never ticked

    @property
    def ticked(self) -> bool:
        """Ticked, and ticked as the line reads now (a tick on a step changed since counts for nothing)."""
        return self.latest is not None and self.latest.ticked and self.latest.text == self.text

    @property
    def is_lockout(self) -> bool:
        """The lockout step: set apart on the page and on paper, so it does not read as one step among the others."""
        return self.kind == STEP and is_lockout_step(self.text)

    @property
    def confirm_tick(self) -> str:
        """What ticking this line asks first on a touch screen, where a tap on its words ticks it: the lockout and the
        removal of the locks, whose ticks let other steps go on (a safety review recorded a lock removal by an
        accidental tap, which let another crew's brake air be ticked). "" for any other line."""
        if self.kind != STEP:
            return ""
        if is_lockout_step(self.text):
            return ("Record the lockout: every isolation point locked and tagged by each of you, and the energy "
                    "proved to be off?")
        if catalogue.is_release_step(self.text):
            return ("Record that every lock and tag on this order is off, yours and the others': the work is done and "
                    "everyone is clear? The steps after this bring energy back.")
        return ""

    @property
    def asks_result(self) -> bool:
        """A step that asks for its result with its tick (``catalogue.asks_result``): the page gives it a box."""
        return self.kind == STEP and catalogue.asks_result(self.text)

    @property
    def anchor(self) -> str:
        return line_anchor(self.kind, self.key)

    @property
    def label(self) -> str:
        """"Isolation point", or "Step n" (counted from 1, as printed)."""
        return f"Step {self.key + 1}" if self.kind == STEP else "Isolation point"


@dataclass(frozen=True)
class Checklist:
    steps: list[ChecklistLine]
    points: list[ChecklistLine]
    steps_note: str = ""  # for the engineer before the work starts: how the steps were put together


def line_anchor(kind: str, key: int) -> str:
    """The id of a checklist line on the work order page (step numbers count from 1, as printed)."""
    return f"step-{key + 1}" if kind == STEP else f"point-{key}"


def latest_ticks(order: WorkOrder) -> dict[tuple[str, int | None], ChecklistTick]:
    """The newest tick or untick of each line of the order's checklist, read in one query."""
    return {tick.line: tick for tick in order.ticks.select_related("recorded_by").order_by("pk")}


def in_place_words(tick: ChecklistTick) -> str:
    """", in place of the lock's holder: <why>" for an engineer's tick in the place of whoever put the lock on
    (``services.checklist_tick_set``); "" for any other tick. The line's note and the tick trail say it alike."""
    return f", in place of the lock's holder: {tick.in_place_of_holder}" if tick.in_place_of_holder else ""


def tick_note(tick: ChecklistTick, text: str, zone: dt.tzinfo) -> str:
    """Who ticked the line (or took the tick back) and when, in the site's time, as the page shows it."""
    said = f"{person(tick.recorded_by)}, {dateformat.format(tick.recorded_at.astimezone(zone), 'd M Y H:i')}"
    said += in_place_words(tick)
    if not tick.ticked:
        return f"tick taken back by {said}"
    result = f"; result: {tick.result}" if tick.result else ""
    if tick.text != text:
        return f"ticked by {said} when it read \"{tick.text}\"{result}; changed since: check it again"
    return f"ticked by {said}{result}"


#: How often a telescope's energy control procedure is inspected: at least once a year (OSHA 29 CFR 1910.147(c)(6)).
INSPECTION_EVERY_DAYS = 365


@dataclass(frozen=True)
class InspectionDue:
    """A telescope's energy control procedure: its ``last`` inspection (None when none is recorded) and the day the
    next is due by (None: none recorded, due now)."""

    telescope: object  # registry.Telescope
    last: EnergyControlInspection | None
    due_by: dt.date | None
    overdue: bool  # none recorded, or the day it was due by has passed


def energy_control_inspections(site: Site, today: dt.date) -> list[InspectionDue]:
    """Each of ``site``'s telescopes with isolation points (those with an energy control procedure here), its newest
    inspection and when the next is due (``INSPECTION_EVERY_DAYS`` after it), overdue on ``today`` or not. Two
    queries."""
    telescopes = [t for t in site.telescopes.filter(isolation_points__isnull=False).distinct()]
    newest: dict[int, EnergyControlInspection] = {}
    for inspection in EnergyControlInspection.objects.filter(telescope__site=site).select_related("inspector"):
        newest.setdefault(inspection.telescope_id, inspection)  # ordered newest first
    due = []
    for telescope in sorted(telescopes, key=lambda t: name_key(t.name)):
        last = newest.get(telescope.pk)
        due_by = last.inspected_on + dt.timedelta(days=INSPECTION_EVERY_DAYS) if last else None
        due.append(InspectionDue(telescope, last, due_by, due_by is None or due_by < today))
    return due


@dataclass(frozen=True)
class TickRecorded:
    """One row of an order's tick trail (``tick_trail``): when (the site's time), who, which line as it read then,
    and what was recorded ("ticked", "ticked; result: ...", "tick taken back")."""

    when: str
    who: str
    line: str
    recorded: str


def tick_trail(order: WorkOrder) -> list[TickRecorded]:
    """Every tick and every tick taken back on ``order``'s checklist, in the order recorded: what the page's lines show
    only the newest of (an auditor's review found the full trail only in the staff's admin, in UTC). One query."""
    zone = order.site.zone
    steps = order.step_list
    rows = []
    for tick in order.ticks.select_related("recorded_by").order_by("pk"):
        if tick.kind == STEP:  # its words beside it above; here only where they have changed since
            same = tick.step_index < len(steps) and steps[tick.step_index] == tick.text
            line = f"Step {tick.step_index + 1}" + ("" if same else f", when it read: {tick.text}")
        else:  # the point's words as they read when it was ticked (its label may have changed since)
            line = f"Isolation point: {tick.text}"
        recorded = ("ticked" + (f"; result: {tick.result}" if tick.result else "")) if tick.ticked else \
            "tick taken back"
        recorded += in_place_words(tick)
        rows.append(TickRecorded(dateformat.format(tick.recorded_at.astimezone(zone), "d M Y H:i T"),
                                 person(tick.recorded_by), line, recorded))
    return rows


def checklist(order: WorkOrder, points: list[IsolationPoint] | None = None,
              items: list[WorkOrderItem] | None = None) -> Checklist:
    """The order's steps and isolation points, each with its newest tick, and the note on its steps, in a
    fixed number of queries (one for the ticks, plus two for the points unless ``isolation_points(order)``
    is passed in, plus one for the note while the order is a draft or issued unless ``order_items(order)`` is)."""
    points = isolation_points(order) if points is None else points
    lines = _checklist(order, points, latest_ticks(order))
    return Checklist(lines.steps, lines.points, merged_steps_note(order, items))


def merged_steps_note(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> str:
    """What the engineer should know before issuing an order over several plans: their steps were merged
    (``workorders.services``: a powered or restoring step they share written once, the locked-out work of
    all of them together), which no plan's author saw. "" for one plan, and once the work has started."""
    if order.state not in (State.DRAFT, State.ISSUED):
        return ""
    plans = (order.items.filter(plan__isnull=False).values("plan_id").distinct().count() if items is None
             else len({i.plan_id for i in items if i.plan_id}))
    if plans < 2:
        return ""
    before = "issuing it" if order.state == State.DRAFT else "the work starts"
    return (
        f"The steps of {plans} plans were merged into this order (steps they share written once). Read them "
        f"through in order before {before}: parking positions, covers and the order of restoring may need "
        "moving so that they suit every plan."
    )


def _checklist(order: WorkOrder, points: list[IsolationPoint], latest: dict) -> Checklist:
    zone = order.site.zone

    def line(kind: str, key: int, text: str) -> ChecklistLine:
        tick = latest.get((kind, key))
        return ChecklistLine(kind, key, text, tick, tick_note(tick, text, zone) if tick else "")

    return Checklist(
        steps=[line(STEP, index, text) for index, text in enumerate(order.step_list)],
        points=[line(POINT, point.pk, point.description) for point in points],
    )


def unticked_lines(order: WorkOrder) -> list[ChecklistLine]:
    """The checklist lines not ticked (as they read now): isolation points first, then steps in order."""
    lines = checklist(order)
    return [line for line in lines.points + lines.steps if not line.ticked]


def isolation_lines(lines: Sequence[ChecklistLine]) -> list[ChecklistLine]:
    """Of ``lines``, those of the energy isolation: the isolation points, the lockout step and the step that removes
    the locks. Not ticked when the work is finished, they are answered for on their own
    (``cautions.ISOLATION_UNTICKED``: "isolated" says the locks came off only after the work), not with the others,
    which may be confirmed as "did not apply": a reviewer finished an order with its lock removal unticked that way."""
    return [line for line in lines
            if line.kind == POINT or is_lockout_step(line.text) or catalogue.is_release_step(line.text)]


def finished_line_notes(order: WorkOrder, lines: Sequence[ChecklistLine]) -> list[str]:
    """For each of a finished order's checklist ``lines``, what its paper prints beside it: who ticked it and when
    (``tick_note``), or, for a line not ticked, what the person finishing confirmed for it: the answer for the energy
    isolation (``isolation_confirmed_at_finish``), or that it was done or did not apply (``unticked_at_finish``);
    "not ticked when the work was finished" for an order finished before those were kept."""
    by = person(order.finished_by)
    isolation = set(order.isolation_unticked_at_finish)
    others = set(order.unticked_at_finish)
    notes = []
    for line in lines:
        if line.ticked:
            notes.append(line.note)
            continue
        kept = f"{line.label}: {line.text}"
        if kept in isolation and order.isolation_confirmed_at_finish in ISOLATION_UNTICKED_SHORT:
            said = f"not ticked; at finishing {by} confirmed: " + ISOLATION_UNTICKED_SHORT[
                order.isolation_confirmed_at_finish
            ]
        elif kept in others:
            said = f"not ticked; at finishing {by} confirmed it was done or did not apply"
        else:
            said = "not ticked when the work was finished"
        notes.append(f"{line.note}; {said}" if line.note else said)
    return notes


def checklist_record(order: WorkOrder, points: list[IsolationPoint]) -> tuple[str, ...]:
    """What the finished record confirms beyond the notes beside its checklist lines (``finished_line_notes``): the
    answer given for an energy isolation nobody ticked (``isolation_confirmed_at_finish``), the hazards the order
    lacked when it was finished, confirmed as controlled (``hazards_confirmed_at_finish``), and ticks on lines no
    longer on the order (an isolation point moved to another telescope since, say), by whom and when (site time). A
    tick on a line whose words changed since is said beside that line (``tick_note``)."""
    zone = order.site.zone
    latest = latest_ticks(order)
    lines = _checklist(order, points, latest)
    record = []
    if order.isolation_confirmed_at_finish in ISOLATION_UNTICKED:
        record.append(ISOLATION_UNTICKED_RECORD.format(
            person=person(order.finished_by), answer=ISOLATION_UNTICKED[order.isolation_confirmed_at_finish]
        ))
        if review := ISOLATION_REVIEW.get(order.isolation_confirmed_at_finish):
            record.append(review)
    if order.hazards_confirmed_at_finish:
        record.append(
            "Finished without the cautions for hazards its subsystems gained after it was made ("
            + ", ".join(HAZARDS[h].lower() for h in order.hazards_confirmed_at_finish)
            + f"); {person(order.finished_by)} confirmed that they were controlled or did not arise, and the findings "
            "say how."
        )
    on_order = {(line.kind, line.key) for line in lines.steps + lines.points}
    elsewhere = sorted(
        (tick for tick in latest.values() if tick.ticked and tick.line not in on_order),
        key=lambda tick: (tick.kind != STEP, tick.step_index or 0, tick.pk),
    )
    for tick in elsewhere:
        what = f"Step {tick.step_index + 1}" if tick.kind == STEP else "Isolation point"
        when = dateformat.format(tick.recorded_at.astimezone(zone), "d M Y H:i")  # as tick_note words it
        record.append(f"{what} (no longer on this order): {tick.text} \N{EM DASH} ticked by "
                      f"{person(tick.recorded_by)}, {when}")
    return tuple(record)


#: The finish form's answer that a mirror on the order was not cleaned in its work, and its words.
NOT_CLEANED = ("none", "not cleaned in this work")
#: Rows on the finish form, and blank rows on the paper, for parts of the register used that the order did not plan.
OTHER_PART_ROWS = 3


def mirrors_asked_about(order: WorkOrder) -> list:
    """The mirrors whose cleaning finishing the order asks about, by name: each mirror it works on, except on a
    recoat's phase orders (removal, coating, reinstall, realignment), whose work is no cleaning. Asked with no default
    on the finish form and as a choice to tick on paper: a forgotten cleaning would drop out of the mirror's record and
    its reflectance forecast."""
    if order.recoat_phase:
        return []
    from observatory_ops.mirrors.models import Mirror  # mirrors builds on work orders

    return list(Mirror.objects.filter(subsystem__in=order.items.values("subsystem_id"))
                .select_related("subsystem").order_by("subsystem__name"))


def cleaning_choices() -> list[tuple[str, str]]:
    """The answers to "how was this mirror cleaned in this work", not cleaned first, as the form and the paper give
    them."""
    from observatory_ops.mirrors.models import CleaningEvent  # mirrors builds on work orders

    return [NOT_CLEANED, *CleaningEvent.Method.choices]


def cleanings_at_finish(order: WorkOrder) -> list[str]:
    """For a finished order that worked on mirrors (not a recoat's phase order, whose finish form asks nothing of
    it), what its finishing recorded of each one's cleaning: the method and the day (``mirrors.CleaningEvent``, on
    the mirror's record), or that none was recorded; [] otherwise."""
    if order.state not in (State.FINISHED, State.COUNTERSIGNED) or order.recoat_phase:
        return []
    from observatory_ops.mirrors.models import Mirror  # mirrors builds on work orders

    mirrors = Mirror.objects.filter(subsystem__in=order.items.values("subsystem_id")).select_related("subsystem")
    lines = []
    for mirror in mirrors.order_by("subsystem__name"):
        done = [
            f"cleaned by {c.get_method_display()} on {dateformat.format(c.cleaned_on, 'd M Y')}"
            for c in mirror.cleanings.filter(work_order=order).order_by("pk")
        ]
        lines.append(f"{mirror.subsystem.name}: {'; '.join(done) if done else 'no cleaning recorded in this work'}")
    return lines


#: The parts-used CSV (``parts_used_csv_rows``): one row a part line of a finished order.
PARTS_USED_CSV_HEADER = (
    "work_done_on", "work_order", "order_type", "telescope", "part", "part_number", "unit", "planned", "used",
    "short_of_the_register",
)


def parts_used_csv_rows(site: Site, first: dt.date, last: dt.date):
    """The part lines of the site's finished (or countersigned) orders whose work was done from ``first`` to ``last``
    (local dates, both included; the day the finish form gave, as the order's service records are dated), oldest
    first: what was used, against the plan, and how many the register did not hold."""
    uses = (
        PartUse.objects.filter(work_order__site=site, work_order__state__in=(State.FINISHED, State.COUNTERSIGNED))
        .annotate(done_on=work_done_on_of("work_order_id"))
        .filter(done_on__gte=first, done_on__lte=last)
        .select_related("part", "work_order__telescope")
        .order_by("done_on", "work_order_id", "pk")
    )
    for use in uses:
        order = use.work_order
        yield (
            use.done_on.isoformat(), order.number, order.get_order_type_display(),
            order.telescope.name if order.telescope else "", use.part.name, use.part.part_number, use.part.unit,
            use.quantity_planned, use.quantity_used, use.quantity_short,
        )


def parts_to_count(site: Site) -> list[tuple[Part, list[PartUse]]]:
    """The site's parts that finished work used beyond what the register held, the stock not counted since, each
    with the part lines of those orders (newest first): the register stands at zero for them, so the site engineer
    counts the stock (``services.part_count_record``). Two queries."""
    uses = (
        PartUse.objects.filter(part__site=site, quantity_short__gt=0, short_counted_at__isnull=True)
        .select_related("part", "work_order").order_by("part__name", "-work_order__finished_at", "-pk")
    )
    found: dict[int, tuple[Part, list[PartUse]]] = {}
    for use in uses:
        found.setdefault(use.part_id, (use.part, []))[1].append(use)
    return list(found.values())


@dataclass(frozen=True)
class OpenPlanned:
    """What the orders still to do (``TO_DO``: draft, issued, underway) plan of one part and have not yet recorded as
    used (``PartUse.quantity_used`` empty). Finishing takes what was used from the register, so a finished order's
    lines are in ``Part.quantity_on_hand`` already and are not counted again; a withdrawn order's are not counted.
    ``lines``: those part lines, each with its order, oldest order first."""

    part: Part
    lines: tuple[PartUse, ...]

    @property
    def planned(self) -> float:
        """The open orders' planned quantities added up."""
        return sum(line.quantity_planned for line in self.lines)

    @property
    def free(self) -> float:
        """In stock less ``planned``: below zero when the open orders plan more than the register holds."""
        return self.part.quantity_on_hand - self.planned

    @property
    def short_by(self) -> float:
        """How much more the open orders plan than the register holds (0 when it holds enough)."""
        return max(0.0, -self.free)


def parts_planned_open(parts: Iterable[Part]) -> dict[int, OpenPlanned]:
    """``OpenPlanned`` of each of ``parts``, by part id in their order (a part no open order plans has no lines): the
    parts register's planned and free columns, and the other orders on an order's page. One query (the open orders'
    lines of the parts), and one more when ``parts`` is a queryset, whatever the number of parts and orders."""
    found: dict[int, tuple[Part, list[PartUse]]] = {part.pk: (part, []) for part in parts}
    lines = (
        PartUse.objects.filter(part__in=list(found), work_order__state__in=TO_DO, quantity_used__isnull=True,
                               quantity_planned__gt=0)
        .select_related("work_order").order_by("work_order_id", "pk")
    )
    for line in lines:
        part, its_lines = found[line.part_id]
        line.part = part  # the one already read
        its_lines.append(line)
    return {pk: OpenPlanned(part, tuple(its_lines)) for pk, (part, its_lines) in found.items()}


@dataclass(frozen=True)
class PartRow:
    """One part line on an order's page, with ``open_planned`` (``parts_planned_open``) while the order is still to
    do and the line not yet used; None otherwise (a finished order's parts are already taken from the stock)."""

    use: PartUse
    open_planned: OpenPlanned | None

    @property
    def others(self) -> tuple[PartUse, ...]:
        """The other open orders' lines of the part."""
        lines = self.open_planned.lines if self.open_planned else ()
        return tuple(line for line in lines if line.work_order_id != self.use.work_order_id)

    @property
    def others_planned(self) -> float:
        return sum(line.quantity_planned for line in self.others)

    @property
    def open_orders_short(self) -> bool:
        """This order and the others together plan more than the register holds (this order alone is "short of the
        planned" on the page)."""
        return bool(self.others) and self.open_planned.short_by > 0

    @property
    def stock_note(self) -> str:
        """For the paper, which shows no stock: how the register stands against this line when printed, "" when it
        holds enough for it and for the other open orders' lines of the part."""
        use, part = self.use, self.use.part
        held = amount_text(part.quantity_on_hand, part.unit)
        if self.open_planned is None:
            return ""
        if use.quantity_planned > part.quantity_on_hand:
            return f"{held} in stock, {amount_text(use.quantity_planned, part.unit)} planned on this order"
        if self.open_orders_short:
            others = ", ".join(f"{amount_text(line.quantity_planned, part.unit)} on {line.work_order.number}"
                               for line in self.others)
            return (f"{held} in stock, {amount_text(self.open_planned.planned, part.unit)} planned on open orders "
                    f"({amount_text(use.quantity_planned, part.unit)} on this one, {others})")
        return ""


def part_rows(order: WorkOrder, uses: Sequence[PartUse]) -> list[PartRow]:
    """The rows of an order's parts table (``uses``: its part uses, with their parts): what other open orders plan
    of each part still to use, and whether all of them together plan more than is held. One query, none when the
    order is not still to do or has used its parts."""
    still_to_use = [use.part for use in uses if use.quantity_used is None] if order.state in TO_DO else []
    planned = parts_planned_open(still_to_use) if still_to_use else {}
    return [PartRow(use, planned.get(use.part_id) if use.quantity_used is None else None) for use in uses]


def work_done_on(order: WorkOrder) -> dt.date | None:
    """The day a finished order's work was done, as its service records stand: the earliest date of those in force (a
    date corrected in the logbook moves it, as it moves the failure on the reliability page: a review corrected an
    order's record and its page kept the first date), else as the finish form gave it (``work_done_at_finish``: its
    records all withdrawn); None before it is finished. Two queries at most."""
    in_force = (order.service_records.filter(corrected_by__isnull=True, void=False).order_by("performed_on", "pk")
                .values_list("performed_on", flat=True).first())
    return in_force or work_done_at_finish(order)


def came_out_on(removal: WorkOrder) -> dt.date:
    """The day a finished removal took its mirror out: the day its work was done (``work_done_on``: entered from
    paper, not the day it was entered), else the site's day it was finished."""
    return work_done_on(removal) or timezone.localtime(removal.finished_at, removal.site.zone).date()


def recoat_began_on(plan) -> dt.date:
    """The day a recoat (``mirrors.RecoatPlan``) began, from which a coating or a record counts as its own: for one
    going on from an earlier recoat's removal with the mirror out (``continues_from``), the day that removal's work
    was done; otherwise the earlier of its first day and the day it was planned (a coating done at the plant and
    entered later keeps its true date, and the coating it replaces is older than the plan). One rule for the coating
    refused before the removal (``mirrors.services.coating_before_removal``), the strip and coat's finish
    (``coating_unlogged``) and the realignment's restarts (``services._restarted_by_the_new_coating``)."""
    if plan.continues_from is not None:
        return came_out_on(plan.continues_from)
    return min(plan.starts_on, timezone.localtime(plan.created_at, plan.mirror.subsystem.telescope.site.zone).date())


def work_done_at_finish(order: WorkOrder) -> dt.date | None:
    """The day a finished order's work was done as the finish form gave it: the date of the service records it wrote
    (``services.work_order_finish``); None before it is finished."""
    return (
        order.service_records.filter(corrects__isnull=True).order_by("pk").values_list("performed_on", flat=True)
        .first()
    )


def hours_corrected(order: WorkOrder) -> float | None:
    """A finished order's person-hours as its service records stand once one of them was corrected or withdrawn in the
    logbook (a correction carries its order: ``logbook.services.service_record_correct``), the sum of the records in
    force; None while none was, when the hours entered at finish stand. One query."""
    rows = list(order.service_records.filter(corrected_by__isnull=True)
                .values_list("corrects_id", "void", "hours_spent"))
    if not any(corrects for corrects, _, _ in rows):
        return None
    return sum(hours or 0.0 for _, void, hours in rows if not void)


def work_done_on_of(order_id_field: str) -> Coalesce:
    """``work_done_on`` as an expression over the rows of a query, whose ``order_id_field`` holds the order's id: for
    lists of many orders' rows (the parts-used CSV) in one query."""
    in_force = ServiceRecord.objects.filter(work_order=OuterRef(order_id_field), corrected_by__isnull=True,
                                            void=False).order_by("performed_on", "pk")
    first = ServiceRecord.objects.filter(work_order=OuterRef(order_id_field), corrects__isnull=True).order_by("pk")
    return Coalesce(Subquery(in_force.values("performed_on")[:1]), Subquery(first.values("performed_on")[:1]))


#: The work of a recoat's phase orders in the order it is done (``calc.windows.RECOAT_PHASES``), and each one's name
#: as the planner gives it ("strip and coat" for the coating).
RECOAT_SEQUENCE = tuple(phase.work for phase in RECOAT_PHASES if phase.work)
_PHASE_NAMES = {phase.work: phase.name for phase in RECOAT_PHASES if phase.work}


def _recoat_neighbours(order: WorkOrder) -> tuple[int | None, WorkOrder | None, WorkOrder | None]:
    """For a phase order of a recoat: its mirror's id, and the phase orders just before and just after it in its
    recoat plan (the newest that holds it), in the order of their work, withdrawn ones included. (None, None, None)
    for any other order. Two queries."""
    plan = order.recoat_plans.order_by("-pk").first() if order.recoat_phase in RECOAT_SEQUENCE else None
    if plan is None:
        return None, None, None
    orders = sorted(
        (o for o in plan.work_orders.all() if o.recoat_phase in RECOAT_SEQUENCE),
        key=lambda o: (RECOAT_SEQUENCE.index(o.recoat_phase), o.pk),
    )
    at = next(i for i, o in enumerate(orders) if o.pk == order.pk)
    return plan.mirror_id, orders[at - 1] if at else None, orders[at + 1] if at + 1 < len(orders) else None


@dataclass(frozen=True)
class RecoatPhase:
    """Where one phase order of a recoat stands in its plan (``mirrors.RecoatPlan.work_orders``): the kind of its
    work (``WorkOrder.recoat_phase``), the plan's next phase order (withdrawn or not: a withdrawn one stops the
    plan), the mirror (its id, for its recoat planner), and the mirror's state when it is the removal that took
    the mirror out and no reinstall has put it back (``telescopes_out``)."""

    work: str
    next_order: WorkOrder | None
    mirror_id: int | None
    mirror_out: TelescopeOut | None


def recoat_phase(order: WorkOrder) -> RecoatPhase | None:
    """For a phase order of a recoat, where it stands in its plan; None for any other order."""
    if not order.recoat_phase:
        return None
    mirror_id, _, after = _recoat_neighbours(order)
    out = [o for o in telescopes_out([order.site]) if o.removal.pk == order.pk] if order.recoat_phase == "removal" \
        else []
    return RecoatPhase(order.recoat_phase, after, mirror_id, out[0] if out else None)


#: How an earlier phase order that holds up the next one stands.
_NOT_YET_FINISHED = {
    State.DRAFT: "still a draft", State.ISSUED: "issued but not started", State.UNDERWAY: "underway, not finished",
}


def recoat_order_refusal(order: WorkOrder) -> str:
    """Why a recoat phase order may not start yet, "" when it may: the phase order before it in its recoat plan
    (``RECOAT_SEQUENCE``) is not finished. Each phase's steps take the one before as done: the coating needs the
    mirror out, the reinstall the new coating, and the realignment, which moves the telescope under power and takes
    the locks off, a reinstalled mirror with the balance restored; the locks stay on until then (OSHA 29 CFR
    1910.147(e)). A withdrawn one stops the plan: it is planned again."""
    _, before, _ = _recoat_neighbours(order)
    if before is None or before.state in (State.FINISHED, State.COUNTERSIGNED):
        return ""
    this, previous = _PHASE_NAMES[order.recoat_phase], _PHASE_NAMES[before.recoat_phase]
    if before.state == State.WITHDRAWN:
        return (
            f"the {previous} before this {this} ({before.number}, {before.title}) was withdrawn, so this recoat "
            "cannot go on as planned: withdraw its other orders still to do and plan the recoat again on the "
            "mirror's recoat planner"
        )
    return (
        f"a recoat's phases are done in their order ({', '.join(_PHASE_NAMES.values())}): this {this} starts only "
        f"once {before.number} ({before.title}) is finished, and it is {_NOT_YET_FINISHED[before.state]}"
    )


def coating_unlogged(order: WorkOrder) -> str:
    """Why an underway strip-and-coat order of a recoat may not be finished yet, "" when it may: its mirror has no
    coating logged dated on or after the day the recoat was planned or its first day, whichever is earlier (the
    coating it replaces is older than the plan made for it; a coating done at the plant and entered later keeps its
    true date). Its step "Log the new coating" could be ticked without one, and the realignment after it then
    restarts the recoat plans while the reflectance decline still runs from the old coating, whose fit the new
    coating's first measurement then spoils. Three queries."""
    if order.state != State.UNDERWAY or order.recoat_phase != "coating":
        return ""
    from observatory_ops.mirrors.models import CoatingEvent  # mirrors builds on work orders

    plan = order.recoat_plans.select_related("mirror__subsystem__telescope__site").order_by("-pk").first()
    if plan is None:
        return ""
    since = recoat_began_on(plan)
    newest = CoatingEvent.objects.filter(mirror=plan.mirror).order_by("-coated_on").first()
    if newest is not None and newest.coated_on >= since:
        return ""
    logged = (f"its newest logged coating is of {newest.coated_on:%d %b %Y}" if newest is not None
              else "no coating of it is logged")
    return (
        f"{plan.mirror.subsystem.name} has no new coating logged: {logged}, before this recoat was planned or began "
        f"({since:%d %b %Y}). Log the new coating on the mirror's page (New coating, with the day it was coated and "
        "its recipe) before finishing this order, so the reflectance decline and the recoat plans start again from it"
    )


def planned_date_notes(order: WorkOrder) -> list[str]:
    """What to check about an order's planned date, as its edit says after saving: a date before the site's today
    (kept: work done from paper is entered afterwards), a day the crew does not work (the site's working weekdays
    and its listed days off), and, for a recoat's phase order, a phase now planned before the one it follows or after
    the one that follows it (they are started in their order, ``recoat_order_refusal``). [] when nothing is."""
    day = order.planned_date
    if day is None:
        return []
    notes, site = [], order.site
    today = site_today(site)
    if day < today:
        days = (today - day).days
        notes.append(f"The planned date, {day:%d %b %Y}, is {days} day{'s' if days != 1 else ''} before today at the "
                     "site: if the work is still to be done, give the day it will be done.")
    off = crew_days_off(site, day, day)
    if off:
        notes.append(f"{day:%a %d %b %Y} is listed as a crew day off ({off[day] or 'no note'}).")
    elif day.isoweekday() not in site.crew_days:
        notes.append(f"{day:%a %d %b %Y} is not one of the crew's working days ({site.crew_days_text}).")
    _, before, after = _recoat_neighbours(order)
    this = _PHASE_NAMES.get(order.recoat_phase, "")
    for other, wrong, said in ((before, lambda d: d > day, "before the {other} it follows"),
                               (after, lambda d: d < day, "after the {other} that follows it")):
        if other is not None and other.state != State.WITHDRAWN and other.planned_date and wrong(other.planned_date):
            name = _PHASE_NAMES[other.recoat_phase]
            notes.append(
                f"This {this} is now planned {said.format(other=name)} ({other.number}, planned "
                f"{other.planned_date:%d %b %Y}): the phases are started in their order, and the recoat's days out "
                "of service (the dashboard, the forecasts) run from its first order's date to its last's. Give the "
                "phases dates in their order."
            )
    return notes


def lift_mirror(order: WorkOrder):
    """The registered mirror among the order's subsystems (``mirrors.Mirror``), None when it covers none."""
    from observatory_ops.mirrors.models import Mirror  # mirrors builds on work orders

    return Mirror.objects.filter(subsystem__in=order.items.values("subsystem_id")).order_by("subsystem__name").first()


def lift_inputs(order: WorkOrder) -> dict | None:
    """The order's stored lifting inputs, with a cell / fixture mass not entered on the order (empty) taken from its
    mirror's record once it is entered there: that is where ``lift_refusal`` sends the engineer. The order stores a copy
    of the mirror's inputs when it is made, and keeps what this gives once its work starts
    (``services.work_order_move``). None when the order has no lifting inputs."""
    inputs = order.lift_inputs
    if not isinstance(inputs, dict) or not inputs or inputs.get("fixture_kg") is not None:
        return inputs or None
    mirror = lift_mirror(order)
    if mirror is None or mirror.cell_mass_kg is None:
        return inputs
    return {**inputs, "fixture_kg": mirror.cell_mass_kg}


def lift_form_initial(order: WorkOrder) -> tuple[dict | None, str]:
    """What the lift page's form starts with, and where it came from: the order's own inputs (``lift_inputs``), or
    for an order that has none yet but covers a registered mirror, that mirror's record (to check and save)."""
    if inputs := lift_inputs(order):
        return inputs, ""
    mirror = lift_mirror(order)
    if mirror is None:
        return None, ""
    return mirror.lift_inputs, f"Filled in from the record of {mirror.subsystem}: check the figures, then save them."


def lift_cell_record(order: WorkOrder) -> str:
    """The address of the admin page where the cell mass of the order's mirror is entered; "" when the order covers no
    registered mirror (its cell or fixture mass is then entered on the lift page)."""
    mirror = lift_mirror(order)
    return "" if mirror is None else reverse("admin:mirrors_mirror_change", args=[mirror.pk])


def lift(order: WorkOrder) -> lifting.LiftFigures | None:
    """The figures of the order's lifting inputs (``lift_inputs``), None when it has none. ValueError names what is
    wrong with the inputs: a value ``calc.lifting`` refuses, or a field missing or unknown (they are stored as JSON)."""
    inputs = lift_inputs(order)
    if not inputs:
        return None
    try:
        return lifting.lift_figures(**inputs)
    except TypeError as exc:
        raise ValueError(f"they do not fit the lifting figures: {exc}") from None


def lift_refusal(order: WorkOrder, action: str = "issue") -> str:
    """Why the order's lift stops it being issued (``action`` "issue") or started ("start"), naming each figure and
    its limit; "" when nothing does. What stops both: a leg tension above the working load limit entered, or a sling
    angle flatter than rigging practice advises (the conditions of ``calc.lifting``'s warnings:
    ``LiftFigures.over_limit``, ``LiftFigures.too_flat``), or stored inputs that are not valid. What stops the start
    only: no working load limit entered (``LiftFigures.no_limit``), as a recoat order's lift has when it is made from
    the mirror's defaults, and no cell / fixture mass entered (``LiftFigures.fixture_not_entered``: the figures are the
    mirror alone), each said with where to enter it, as the figures also warn of them; the paper may go out before
    the slings are chosen, but the lift does not begin before their rated capacity is compared with the tension of
    the whole load (ASME B30.9). An order without lifting figures passes, unless its work lifts a registered mirror
    (a suspended load among its hazards, ``lift_mirror``): its start then waits for the figures
    (``LIFT_NO_FIGURES_REFUSED``)."""
    try:
        figures = lift(order)
    except ValueError as exc:
        problems = [LIFT_INPUTS_INVALID.format(problem=exc)]
    else:
        if figures is None:
            if action == "start" and "suspended_load" in order.hazards and (mirror := lift_mirror(order)):
                return LIFT_NO_FIGURES_REFUSED.format(number=order.number, mirror=mirror.subsystem.name)
            return ""
        problems = []
        if figures.over_limit:
            problems.append(LIFT_OVER_LIMIT.format(tension=figures.leg_tension_kg, limit=figures.wll_kg))
        if figures.too_flat:
            problems.append(LIFT_TOO_FLAT.format(
                angle=figures.angle_deg, factor=figures.load_factor, shallow=lifting.SHALLOW_ANGLE_DEG
            ))
        if action == "start":
            unentered = [
                (short, alone) for short, alone, missing in (
                    (LIFT_NO_LIMIT, LIFT_NO_LIMIT_REFUSED, figures.no_limit),
                    (LIFT_NO_CELL, LIFT_NO_CELL_REFUSED, figures.fixture_not_entered),
                ) if missing
            ]
            record = lift_cell_record(order) if figures.fixture_not_entered else ""
            where = LIFT_CELL_ON_MIRROR.format(url=record) if record else LIFT_CELL_ON_LIFT_PAGE
            if unentered and not problems:  # each said on its own with where to enter it
                return "; and ".join(alone.format(number=order.number, where=where) for _, alone in unentered)
            problems += [short.format(where=where) for short, _ in unentered]
    return LIFT_REFUSED.format(number=order.number, problems=" and ".join(problems)) if problems else ""


#: Why an order is not issued without a planned date.
NO_PLANNED_DATE = "set the planned date (Edit) before issuing: the calendar export and the weekly batch go by it"

def retired_refusal(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> str:
    """Why an order not yet started may not be issued or started: a subsystem it works on was retired since it was made
    (its work would be dated after the retire day, which the subsystem's page refuses and the reliability page leaves
    out: a review found orders of a retired tube's mirror still open). "" when none is. ``items``: ``order_items``,
    read (one query) when not given."""
    items = order_items(order) if items is None else items
    retired = sorted((i.subsystem for i in items if i.subsystem.retired_on is not None), key=lambda s: s.name)
    if not retired:
        return ""
    named = in_words([f"{s.name} (retired on {s.retired_on:%d %b %Y})" for s in dict.fromkeys(retired)])
    return (f"it works on {named}, taken out of service since it was made: withdraw it, and make the work again for "
            "the replacement if there is one")


def moves_held(order: WorkOrder, unrecorded: Sequence[Subsystem] | None = None,
               gaps: Sequence[str] | None = None, items: list[WorkOrderItem] | None = None) -> dict[str, list[str]]:
    """The moves (``lifecycle`` actions) the order may not take as it stands, whoever asks, each with the reasons:
    issuing without a planned date (the calendar export and the weekly batch go by it), issuing or starting
    while its lift stands in the way (``lift_refusal``: the start also while no working load limit is entered), while
    nobody has recorded its subsystems' hazards, or while an energy its work calls for isolating has no isolation
    point registered (``isolation_gaps``), and starting a recoat phase before the phase before it is finished
    (``recoat_order_refusal``), issuing or starting one whose subsystem was retired since (``retired_refusal``), and
    finishing a recoat's strip and coat before its new coating is logged (``coating_unlogged``).
    ``services.work_order_move`` (the finish: ``services.work_order_finish``) refuses them with these words, and the
    order's page leaves their buttons out and says why. ``unrecorded``, ``gaps`` and ``items``:
    ``hazards_unrecorded(order)``, ``isolation_gaps(order)`` and ``order_items(order)``, read when not given."""
    held: dict[str, list[str]] = {}
    if order.state == State.DRAFT and order.planned_date is None:
        held.setdefault("issue", []).append(NO_PLANNED_DATE)
    if order.state in (State.DRAFT, State.ISSUED):
        for action in ("issue", "start"):
            if why := lift_refusal(order, action):
                held.setdefault(action, []).append(why)
        unrecorded = hazards_unrecorded(order) if unrecorded is None else unrecorded
        if unrecorded:
            why = HAZARDS_UNRECORDED_HELD.format(subsystems=in_words([str(s) for s in unrecorded]))
            for action in ("issue", "start"):
                held.setdefault(action, []).append(why)
        gaps = isolation_gaps(order) if gaps is None else gaps
        if gaps:
            missing = "; ".join(gap.split(". ", 1)[0][:1].lower() + gap.split(". ", 1)[0][1:] for gap in gaps)
            for action in ("issue", "start"):
                held.setdefault(action, []).append(ISOLATION_POINTS_MISSING_HELD.format(missing=missing))
    if order.state in (State.DRAFT, State.ISSUED) and (why := retired_refusal(order, items)):
        for action in ("issue", "start"):
            held.setdefault(action, []).append(why)
    if order.state == State.ISSUED and (why := recoat_order_refusal(order)):
        held.setdefault("start", []).append(why)
    if why := coating_unlogged(order):
        held.setdefault("finish", []).append(why)
    return held


#: Starting this many days or fewer before the planned date is asked nothing; earlier, the person confirms first (a
#: week: common practice, no published source). It is a question, not a refusal: work is sometimes brought forward.
EARLY_START_DAYS = 7


def early_start_question(order: WorkOrder) -> str:
    """For an issued order planned more than ``EARLY_START_DAYS`` after the site's today, the question its start asks
    first ("... planned for 23 Mar 2027, 40 days from now: start anyway?"); "" otherwise, and while its start is held
    (``moves_held``: it is refused in those words, asked or not). A recoat's removal started weeks early takes the
    telescope out of service weeks before its window."""
    if order.state != State.ISSUED or order.planned_date is None:
        return ""
    days = (order.planned_date - site_today(order.site)).days
    if days <= EARLY_START_DAYS or "start" in moves_held(order):
        return ""
    return f"{order.number} is planned for {order.planned_date:%d %b %Y}, {days} days from now: start anyway?"


class Alongside(NamedTuple):
    """Another order underway on a telescope this order works on, as the page, the paper and its start say it."""
    order: WorkOrder
    telescopes: list[str]  # the telescopes the two share, by name
    lockout_ticked: bool | None  # its lockout step ticked; None when it has none
    released: bool = False  # the step that removes its locks ticked, in its present words
    work_left: bool = True  # a step other than the hand-back to robotic control (catalogue.is_hand_back) not ticked
    hands_back: bool = False  # a hand-back step of its own not ticked yet: a crew a hand-back can be left to
    points_locked: bool = False  # an isolation point of its own ticked as locked

    @property
    def locked_out(self) -> bool:
        """Its crew's locks are on: an isolation point of its own ticked as locked or its lockout ticked, and the
        removal of its locks not (an order without a release step, whose locked-out work runs to its end, stays locked
        out until it is finished). Another crew waits for them (``services.still_locked_out``), and the order is not
        withdrawn (``services.withdraw_refusal``): a lock on a point protects its crew from the moment it is on, before
        the lockout step that says all are on (a diff review: the two had read different rules)."""
        return (self.points_locked or bool(self.lockout_ticked)) and not self.released

    def text(self, zone: dt.tzinfo) -> str:
        started = self.order.started_at and dateformat.format(self.order.started_at.astimezone(zone), "d M Y H:i")
        if self.lockout_ticked is None:
            lockout = "it has no lockout" + ("; an isolation point is ticked as locked" if self.points_locked else "")
        elif not self.lockout_ticked:
            lockout = ("its lockout is not ticked yet, but an isolation point of its own is ticked as locked: its "
                       "crew's locks are going on" if self.locked_out else "its lockout is not ticked yet")
        elif self.locked_out:
            lockout = "its lockout is ticked: its crew is locked out"
        else:
            lockout = "its lockout is ticked and the removal of its locks too: its locks are off"
        who = f", assigned to {person(self.order.assignee)}" if self.order.assignee_id else ""
        return (f"{self.order.number} {self.order.title} (on {', '.join(self.telescopes)}; started {started}{who}; "
                f"{lockout})")


def work_alongside(order: WorkOrder, items: list[WorkOrderItem] | None = None,
                   starting: bool = False) -> list[Alongside]:
    """The other orders underway on any telescope this one works on, oldest first (for an order drafted, issued or
    underway; none once it is finished or withdrawn). Work at a site whose telescopes share one enclosure counts
    every telescope of the site: its dome moves over all of them. Work away from the telescope (``at_telescope``
    False: a mirror at a coating plant) shares no telescope with anyone, nor does an order with that work. An order
    drafted or issued for a later day than the site's today says nothing of today's work (it may be done by then);
    its start asks (``starting``: ``start_questions``), whenever it comes."""
    if order.state not in (State.DRAFT, State.ISSUED, State.UNDERWAY) or not order.at_telescope:
        return []
    later = order.planned_date is not None and order.planned_date > site_today(order.site)
    if order.state != State.UNDERWAY and later and not starting:
        return []
    others = list(WorkOrder.objects.filter(state=State.UNDERWAY, site_id=order.site_id, at_telescope=True)
                  .exclude(pk=order.pk)
                  .select_related("assignee", "telescope").prefetch_related("items__subsystem__telescope")
                  .order_by("pk"))
    if not others:  # the usual case: one query, and the order's own items are not read
        return []
    mine = _telescopes(order, order_items(order) if items is None else items)
    alongside = []
    for other in others:
        theirs = {i.subsystem.telescope for i in other.items.all()} | ({other.telescope} if other.telescope else set())
        shared = sorted(t.name for t in theirs if order.site.shared_enclosure or t.pk in mine)
        if not shared:
            continue
        alongside.append(crew_state(other, shared))
    return alongside


def hand_backs_held(order: WorkOrder) -> list[WorkOrder]:
    """The orders whose hand-back to robotic and remote control ``order`` holds (``WorkOrder.hand_back_left_to``),
    oldest first: those that left it to this one, and, through each of them that had passed on one it held (withdrawn
    or finished in its turn), those before (a diff review: a chain A to B to C named only B on C's page)."""
    held: dict[int, WorkOrder] = {}
    reached = list(order.hand_backs_held.all())
    while reached:
        other = reached.pop()
        if other.pk not in held and other.pk != order.pk:
            held[other.pk] = other
            reached.extend(other.hand_backs_held.all())
    return sorted(held.values(), key=lambda o: o.pk)


def crew_state(order: WorkOrder, shared: list[str] | None = None) -> Alongside:
    """Where the crew of ``order`` stands on its checklist, as ``work_alongside`` says it of another crew and a
    withdrawal reads it of the order's own (``locked_out``): its lockout ticked, the removal of its locks ticked, work
    left, a hand-back of its own still to tick."""
    steps = order.step_list
    ticks = latest_ticks(order)
    done = {key for (kind, key), tick in ticks.items()
            if kind == STEP and tick.ticked and key is not None and key < len(steps) and tick.text == steps[key]}
    lockout = next((i for i, step in enumerate(steps) if is_lockout_step(step)), None)
    ticked = released = None
    if lockout is not None:
        tick = ticks.get((STEP, lockout))
        ticked = bool(tick and tick.ticked)
        release = next((i for i in range(lockout + 1, len(steps)) if catalogue.is_release_step(steps[i])), None)
        released = release is not None and release in done
    work_left = any(i not in done and not catalogue.is_hand_back(step) for i, step in enumerate(steps))
    hands_back = any(i not in done and catalogue.is_hand_back(step) for i, step in enumerate(steps))
    points_locked = any(kind == POINT and tick.ticked for (kind, _key), tick in ticks.items())
    return Alongside(order, shared or [], ticked, bool(released), work_left, hands_back, points_locked)


class LateOrder(NamedTuple):
    """An order not yet started whose planned date has passed (``late_orders``), and what to say of it."""
    order: WorkOrder
    text: str


#: How many late orders are said with what holds them (``late_orders``): about five queries each, so a site of hundreds
#: of forgotten drafts does not cost its dashboard a thousand (a diff review); the dashboard lists ten orders.
LATE_ORDERS_SAID = 10


def late_orders(site: Site, today: dt.date) -> list[LateOrder]:
    """The site's orders drafted or issued whose planned date is before ``today``, oldest date first, each said with
    how late it is and what holds its next move (``moves_held``: issuing a draft, starting an issued order). A year's
    review found a draft held for a missing isolation point still listed in December for a planned date in January,
    with nothing saying it was late or why, and the digest never naming it. The dashboard marks them; the digest lists
    them. What holds them is read for the first ``LATE_ORDERS_SAID`` only."""
    orders = (WorkOrder.objects.filter(site=site, state__in=(State.DRAFT, State.ISSUED), planned_date__lt=today)
              .select_related("site").order_by("planned_date", "pk"))
    late = []
    for index, order in enumerate(orders):
        days = (today - order.planned_date).days
        move = "issue" if order.state == State.DRAFT else "start"
        held = moves_held(order).get(move, []) if index < LATE_ORDERS_SAID else []
        verb = "issued" if move == "issue" else "started"
        done, why = f"not {verb}", (f"; it cannot be {verb}: {held[0]}" if held else "")
        ago = f"{days} day{'s' if days != 1 else ''} ago"
        late.append(LateOrder(order, f"late: planned {order.planned_date:%d %b %Y}, {ago}, {done}{why}"))
    return late


#: The printed notice of an order whose start is held (``start_held_notice``): title and what to do.
START_HELD_TITLE = "NOT TO BE STARTED YET"
START_HELD_TODO = ("Do not begin this work from the paper: the work order page shows when it may start. Ask the site "
                   "engineer.")


def start_held_notice(order: WorkOrder, unrecorded: Sequence[Subsystem] | None = None,
                      gaps: Sequence[str] | None = None, items: list[WorkOrderItem] | None = None) -> tuple[str, ...]:
    """The printed order's notice that its start is held (``moves_held``: a lift without its figures or working load
    limit, an isolation point missing, hazards unrecorded, the recoat phase before it not finished): title, one line
    a reason, what to do; () when it may start, or has. Paper goes out before the work: a technician working from it
    would otherwise not know."""
    if order.state not in (State.DRAFT, State.ISSUED):
        return ()
    reasons = moves_held(order, unrecorded, gaps, items).get("start", [])
    if not reasons:
        return ()
    return (START_HELD_TITLE, *(f"{reason[0].upper()}{reason[1:]}." for reason in reasons), START_HELD_TODO)


def alongside_notice(order: WorkOrder, items: list[WorkOrderItem] | None = None) -> tuple[str, ...]:
    """The printed order's notice of other work underway on its telescopes when it was printed (``work_alongside``):
    title, one line an order, what to agree. () when there is none."""
    alongside = work_alongside(order, items)
    if not alongside:
        return ()
    return (ALONGSIDE_TITLE_ON_PAPER.format(telescopes=shared_telescopes(alongside)),
            *(a.text(order.site.zone) for a in alongside), ALONGSIDE_ADVICE)


def hand_backs_held_notice(order: WorkOrder) -> tuple[str, ...]:
    """The printed order's notice of the other orders whose hand-back to robotic and remote control its crew holds
    (``hand_backs_held``), as its page lists them: title, one line an order, what to do. () when none, or once the
    order is no longer to do (a paper review: the realignment's page named them, its paper not)."""
    held = hand_backs_held(order) if order.state in TO_DO else []
    if not held:
        return ()
    return (HAND_BACKS_HELD_TITLE, *(f"{o.number} {o.title} ({o.get_state_display().lower()})" for o in held),
            HAND_BACKS_HELD_ADVICE)


def shared_telescopes(alongside: Sequence[Alongside]) -> str:
    """The telescopes the orders of ``alongside`` share with the order, by name: "R40, T70"."""
    return ", ".join(sorted({name for a in alongside for name in a.telescopes}))


def start_questions(order: WorkOrder) -> list[str]:
    """What starting ``order`` asks first, on a page of its own, before it starts: an early start
    (``early_start_question``), a telescope whose primary mirror is out (``telescope_out_notices``) and other work
    underway on its telescopes (``work_alongside``). Empty when nothing is
    asked (or while its start is held: it is refused in those words)."""
    if order.state != State.ISSUED or "start" in moves_held(order):
        return []
    questions = [question] if (question := early_start_question(order)) else []
    # A telescope out of balance (its primary out for a recoat): the page and paper say so; starting asks too.
    questions += [f"{title}. {body} Its steps that move an axis (under power before the lockout, parking), bring "
                  "energy back or hand the telescope back wait until the reinstall is finished, and so does its "
                  "finish. Start anyway?" for title, body, _todo in telescope_out_notices(order)]
    if alongside := work_alongside(order, starting=True):
        questions.append(ALONGSIDE_START_QUESTION.format(
            orders=", ".join(a.order.number for a in alongside), verb="is" if len(alongside) == 1 else "are",
            telescopes=shared_telescopes(alongside), whose="its" if len(alongside) == 1 else "their",
        ))
    return questions


def lift_rows(figures: lifting.LiftFigures, inputs: dict | None = None) -> list[tuple[str, str]]:
    """The lifting figures as (label, value) pairs in kg and lb, as the page and the PDF show them, each traceable: the
    mirror's inputs first (``inputs``: the order's stored ``lift_inputs``, read for the size and the material only,
    so no query; without them the figures stand alone), the material's density with its source as ``calc.lifting``
    names it, then each figure with its formula (``calc.lifting.mirror_mass`` and ``sling_leg_tension``). A cell /
    fixture mass not entered is said to be, and the load then to be the mirror alone; an entered 0 is said to be
    entered."""
    if figures.fixture_not_entered:
        fixture, alone = "not entered", ", the mirror alone"
    elif figures.fixture_kg == 0:
        fixture, alone = "0 kg, entered (nothing lifted with the mirror)", ""
    else:
        fixture, alone = f"{figures.fixture_kg:,.1f} kg ({figures.fixture_kg / 0.45359237:,.1f} lb)", ""
    rows = []
    if inputs:
        density = lifting.DENSITY[inputs["material"]]
        hole = float(inputs.get("hole_mm") or 0)
        removed = float(inputs.get("lightweighting_fraction") or 0)
        rows += [
            ("Mirror diameter D", f"{float(inputs['diameter_mm']):,g} mm"),
            ("Edge thickness t", f"{float(inputs['thickness_mm']):,g} mm"),
            ("Central hole H", f"{hole:,g} mm" if hole else "none (H = 0)"),
            ("Lightweighting f, fraction of the blank removed", f"{removed:g}" if removed else "none (f = 0)"),
            ("Material, density", f"{inputs['material'].replace('_', ' ')}, {density.g_cm3:g} g/cm³ "
                                  f"({density.source})"),
        ]
    rows += [
        ("Mirror mass m = pi/4 x (D² - H²) x t x (1 - f) x density",
         f"{figures.mirror_kg:,.1f} kg ({figures.mirror_kg / 0.45359237:,.1f} lb)"),
        ("Cell / fixture mass", fixture),
        ("Total suspended load", f"{figures.total_kg:,.1f} kg ({figures.total_lb:,.1f} lb){alone}"),
        ("Sling legs rigged / taken as bearing, n (at most 2: common practice, no published source)",
         f"{figures.legs_rigged} / {figures.legs_bearing}"),
        ("Leg angle from horizontal a",
         f"{figures.angle_deg:g} deg (load factor 1 / sin a = {figures.load_factor:.3f})"),
        ("Tension per bearing leg T = W / (n sin a), W the whole load above (ASME B30.9), as a load in kg, the way "
         "sling tags rate their working load limit",
         f"{figures.leg_tension_kg:,.1f} kg ({figures.leg_tension_lb:,.1f} lb); "
         f"as a force {figures.leg_tension_n:,.0f} N"),
    ]
    if figures.wll_kg is not None:
        rows.append(("Working load limit per leg (entered)", f"{figures.wll_kg:,.1f} kg"))
        rows.append(("Ratio of limit to leg tension", f"{figures.margin:.2f}"))
    return rows


def sheet(order: WorkOrder, url: str) -> sheet_.Sheet:
    """Everything the printed work order shows, in plain values for ``pdf.render_sheet``."""
    items = order_items(order)  # read once, for every selector below that needs them
    figures = lift(order)
    zone = order.site.zone
    points = isolation_points(order, items)
    readings = list(order.required_readings.select_related("subsystem__telescope", "reading"))
    telescopes = sorted({i.subsystem.telescope.name for i in items})
    subsystems = {i.subsystem_id: i.subsystem for i in items}.values()  # once each, in the order of the items
    finished = order.state in (State.FINISHED, State.COUNTERSIGNED)
    underway = order.state == State.UNDERWAY
    gaps = isolation_gaps(order, points, items)
    lines = checklist(order, points, items)
    missing = hazards_missing(order, items)
    uses = list(order.part_uses.select_related("part"))
    unrecorded = hazards_unrecorded(order, items)

    def ticks(checked: list[ChecklistLine]) -> tuple[sheet_.SheetTick, ...]:  # as the page shows them
        if underway:  # printed while the work goes on: the ticks so far, who and when
            return tuple(sheet_.SheetTick(line.ticked, line.note) for line in checked)
        if not finished:
            return ()
        notes = finished_line_notes(order, checked)
        return tuple(sheet_.SheetTick(line.ticked, note) for line, note in zip(checked, notes, strict=True))

    def where(subsystem) -> str:  # a subsystem as the sheet names it: with its telescope when there are several
        return f"{subsystem.telescope.name}: {subsystem.name}" if len(telescopes) > 1 else subsystem.name

    return sheet_.Sheet(
        number=order.number,
        title=order.title,
        site=order.site.name,
        telescope=order.telescope.name if order.telescope else ", ".join(telescopes) or "several",
        subsystems=tuple(where(s) for s in subsystems),
        order_type=order.get_order_type_display(),
        priority=order.get_priority_display(),
        state=order.get_state_display(),
        planned_date=order.planned_date,
        issued_on=order.issued_at.astimezone(zone).date() if order.issued_at else None,
        assignee=person(order.assignee),
        estimated_hours=order.estimated_hours,
        estimate_basis=order.estimate_basis,
        # Named as the page names them, subsystem and plan: two subsystems' alike plans stay apart on paper.
        why=tuple(
            f"{where(i.subsystem)}: {i.plan.name}: {i.why}" if i.plan else f"{where(i.subsystem)}: {i.why}"
            for i in items if i.why
        ),
        why_as_of=order.created_at.astimezone(zone).date() if order.created_at else None,
        cautions=tuple(
            sheet_.SheetCaution(c.title, c.text, c.standard, SEVERITY_LABELS[c.severity])
            for c in cautions(order, points)
        ),
        precedence_statement=PRECEDENCE_STATEMENT,
        hazards_notice=hazards_notice(order, missing, paper=True, unrecorded=unrecorded),
        start_held=start_held_notice(order, unrecorded, gaps, items),
        out_of_service=tuple(telescope_out_notices(order) + recoat_planned_notices(order)),
        alongside=alongside_notice(order, items),
        hand_backs_held=hand_backs_held_notice(order),
        lockout_step=next((i + 1 for i, line in enumerate(lines.steps) if is_lockout_step(line.text)), None),
        isolation_needed=needs_isolation(order.hazards),
        isolation_statement=order_isolation_statement(order, missing, unrecorded),
        isolation_points=(tuple(f"{sheet_.WARNING_PREFIX}{gap}" for gap in gaps)
                          + tuple(line.text for line in lines.points)),
        point_ticks=(None,) * len(gaps) + ticks(lines.points) if finished or underway else (),
        steps=tuple(line.text for line in lines.steps),
        step_ticks=ticks(lines.steps),
        steps_warning=lockout_step_warning(order, items),
        steps_note=lines.steps_note,
        standing_notes=standing_notes(order),
        parts_unregistered=tuple(parts_unregistered(order, items, uses)),
        parts=tuple(
            sheet_.SheetPart(row.use.part.name, row.use.part.part_number, row.use.quantity_planned, row.use.part.unit,
                             used=row.use.quantity_used, short=row.use.quantity_short, stock_note=row.stock_note)
            for row in part_rows(order, uses)
        ),
        tools=tuple(order.tool_list),
        readings=tuple(
            sheet_.SheetReading(
                f"{r.quantity_label} ({where(r.subsystem)})", r.unit, r.limit_text,
                recorded=(f"{r.reading.value:g}" if r.reading else f"not measured: {r.not_measured}" if r.not_measured
                          else ""),
                beyond_limit=r.recorded_beyond_limit,
            )
            for r in readings
        ),
        lifting=(sheet_.SheetLifting(tuple(lift_rows(figures, order.lift_inputs)), figures.warnings, figures.checks)
                 if figures else None),
        url=url,
        findings=order.findings,
        generated_at=timezone.now().astimezone(zone),
        actual_hours=order.actual_hours,
        hours_corrected=hours_corrected(order) if finished else None,
        work_done_on=work_done_on(order) if finished else None,
        rigging_check="suspended_load" in order.hazards or figures is not None,
        performed_by=person(order.finished_by),
        tick_trail=tuple(astuple(row) for row in tick_trail(order)) if finished else (),
        performed_on=order.finished_at.astimezone(zone).date() if order.finished_at else None,
        checked_by=person(order.countersigned_by),
        checked_on=order.countersigned_at.astimezone(zone).date() if order.countersigned_at else None,
        confirmations=checklist_record(order, points) if finished else (),
        crew=tuple(order.crew) if finished and order.crew is not None else None,
        cleanings=tuple(cleanings_at_finish(order)),
        # For the paper a technician fills in by hand before the finish form is typed from it: what that form asks.
        cleaning_to_record=() if finished else tuple(
            (mirror.subsystem.name, tuple(label for _, label in cleaning_choices()))
            for mirror in mirrors_asked_about(order)
        ),
        other_part_rows=0 if finished else OTHER_PART_ROWS,
    )




def history(order: WorkOrder, limit: int | None = None) -> list[Change]:
    """The order's recent changes, shown as every history is (``archive.history.changes``): times in the
    site's time to the minute, people by their full names."""
    return changes(order, limit=limit)


def issued_between(site: Site, start, end) -> QuerySet[WorkOrder]:
    """The work orders of a site issued and still to do (issued or underway) planned for [start, end], or, when they
    have no planned date, issued in it: the paper a crew takes out. Not those finished (a paper review found a week's
    batch printed after the day's work holding only countersigned orders), drafted or withdrawn."""
    planned = Q(planned_date__gte=start, planned_date__lte=end)
    unplanned = Q(planned_date__isnull=True, issued_at__date__gte=start, issued_at__date__lte=end)
    return (
        WorkOrder.objects.filter(Q(site=site) & (planned | unplanned))
        .filter(state__in=[State.ISSUED, State.UNDERWAY])
        .order_by("planned_date", "pk")
    )
