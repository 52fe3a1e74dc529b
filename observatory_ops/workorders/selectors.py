"""Reads of work orders: the cautions, lifting figures and printable sheet of one work order."""
from __future__ import annotations

from django.db.models import F, Q, QuerySet
from django.utils import timezone

from observatory_ops.calc import lifting
from observatory_ops.registry.models import Site

from . import sheet as sheet_
from .cautions import PRECEDENCE_STATEMENT, SEVERITY_LABELS, Caution, cautions_for
from .models import IsolationPoint, Part, State, WorkOrder


def work_orders() -> QuerySet[WorkOrder]:
    return WorkOrder.objects.select_related("site", "telescope", "assignee")


def low_stock(site: Site) -> QuerySet[Part]:
    return Part.objects.filter(site=site, quantity_on_hand__lte=F("reorder_point"))


def cautions(order: WorkOrder) -> list[Caution]:
    return cautions_for(order.hazards)


def isolation_points(order: WorkOrder) -> list[IsolationPoint]:
    telescopes = {i.subsystem.telescope_id for i in order.items.select_related("subsystem")}
    if order.telescope_id:
        telescopes.add(order.telescope_id)
    return list(IsolationPoint.objects.filter(telescope_id__in=telescopes).select_related("telescope"))


#: Which registered isolation points answer a hazard: without one, the lockout step has nothing to lock.
_ISOLATES = {"electrical": {"ac", "dc", "servo"}, "pneumatic": {"air"}}


def isolation_gaps(order: WorkOrder) -> list[str]:
    """A warning for each telescope of the order with a hazard but no isolation point for its energy."""
    telescopes = {i.subsystem.telescope for i in order.items.select_related("subsystem__telescope")}
    gaps = []
    for telescope in sorted(telescopes, key=lambda t: t.name):
        energies = set(telescope.isolation_points.values_list("energy", flat=True))
        for hazard, answers in _ISOLATES.items():
            if hazard in order.hazards and not energies & answers:
                gaps.append(
                    f"No {'compressed-air' if hazard == 'pneumatic' else 'electrical'} isolation point is "
                    f"registered for {telescope.name}: find and lock the supply before work, and have an engineer "
                    "add it to the register."
                )
    return gaps


def lift(order: WorkOrder) -> lifting.LiftFigures | None:
    return lifting.lift_figures(**order.lift_inputs) if order.lift_inputs else None


def lift_rows(figures: lifting.LiftFigures) -> list[tuple[str, str]]:
    """The lifting figures as (label, value) pairs in kg and lb, as the page and the PDF show them."""
    rows = [
        ("Mirror mass", f"{figures.mirror_kg:,.1f} kg ({figures.mirror_kg / 0.45359237:,.1f} lb)"),
        ("Cell / fixture mass", f"{figures.fixture_kg:,.1f} kg ({figures.fixture_kg / 0.45359237:,.1f} lb)"),
        ("Total suspended load", f"{figures.total_kg:,.1f} kg ({figures.total_lb:,.1f} lb)"),
        ("Sling legs rigged / taken as bearing", f"{figures.legs_rigged} / {figures.legs_bearing}"),
        ("Leg angle from horizontal", f"{figures.angle_deg:g} deg (load factor {figures.load_factor:.3f})"),
        ("Tension per bearing leg", f"{figures.leg_tension_kg:,.1f} kg ({figures.leg_tension_lb:,.1f} lb)"),
    ]
    if figures.wll_kg is not None:
        rows.append(("Working load limit per leg (entered)", f"{figures.wll_kg:,.1f} kg"))
        rows.append(("Ratio of limit to leg tension", f"{figures.margin:.2f}"))
    return rows


def sheet(order: WorkOrder, url: str) -> sheet_.Sheet:
    """Everything the printed work order shows, in plain values for ``pdf.render_sheet``."""
    items = list(order.items.select_related("subsystem", "plan"))
    figures = lift(order)
    zone = order.site.zone
    return sheet_.Sheet(
        number=order.number,
        title=order.title,
        site=order.site.name,
        telescope=order.telescope.name if order.telescope else "several",
        subsystems=tuple(i.subsystem.name for i in items),
        order_type=order.get_order_type_display(),
        priority=order.get_priority_display(),
        state=order.get_state_display(),
        planned_date=order.planned_date,
        issued_on=order.issued_at.astimezone(zone).date() if order.issued_at else None,
        assignee=_name(order.assignee),
        estimated_hours=order.estimated_hours,
        why=tuple(f"{i.plan.name if i.plan else i.subsystem.name}: {i.why}" for i in items if i.why),
        cautions=tuple(
            sheet_.SheetCaution(c.title, c.text, c.standard, SEVERITY_LABELS[c.severity]) for c in cautions(order)
        ),
        precedence_statement=PRECEDENCE_STATEMENT,
        isolation_points=tuple(f"WARNING: {gap}" for gap in isolation_gaps(order))
        + tuple(
            f"{p.telescope.name}: {p.get_energy_display()}: {p.label}"
            + (f" ({p.location})" if p.location else "")
            + (f"; prove dead: {p.verify}" if p.verify else "")
            for p in isolation_points(order)
        ),
        steps=tuple(order.step_list),
        parts=tuple(
            sheet_.SheetPart(u.part.name, u.part.part_number, u.quantity_used or u.quantity_planned)
            for u in order.part_uses.select_related("part")
        ),
        tools=tuple(order.tool_list),
        readings=tuple(
            sheet_.SheetReading(
                f"{r.quantity_label} ({r.subsystem.name})", r.unit, r.limit_text,
                recorded=f"{r.reading.value:g}" if r.reading else "",
            )
            for r in order.required_readings.select_related("subsystem", "reading")
        ),
        lifting=sheet_.SheetLifting(tuple(lift_rows(figures)), figures.warnings, figures.checks) if figures else None,
        url=url,
        findings=order.findings,
        generated_at=timezone.now().astimezone(zone),
        actual_hours=order.actual_hours,
        performed_by=_name(order.finished_by),
        performed_on=order.finished_at.astimezone(zone).date() if order.finished_at else None,
        checked_by=_name(order.countersigned_by),
        checked_on=order.countersigned_at.astimezone(zone).date() if order.countersigned_at else None,
    )


def _name(user) -> str:
    return (user.get_full_name() or user.username) if user else ""


def issued_between(site: Site, start, end) -> QuerySet[WorkOrder]:
    """Issued (not draft, not withdrawn) work orders of a site planned for [start, end], or, when they
    have no planned date, issued in it."""
    planned = Q(planned_date__gte=start, planned_date__lte=end)
    unplanned = Q(planned_date__isnull=True, issued_at__date__gte=start, issued_at__date__lte=end)
    return (
        WorkOrder.objects.filter(Q(site=site) & (planned | unplanned))
        .exclude(state__in=[State.DRAFT, State.WITHDRAWN])
        .order_by("planned_date", "pk")
    )
