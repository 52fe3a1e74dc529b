import datetime as dt

from django import forms
from django.contrib import messages
from django.core.exceptions import NON_FIELD_ERRORS
from django.db import transaction
from django.http import HttpResponse, JsonResponse
from django.shortcuts import get_object_or_404, redirect, render
from django.urls import reverse
from django.utils import timezone
from django.utils.html import format_html, format_html_join
from django.utils.http import url_has_allowed_host_and_scheme
from django_tables2 import RequestConfig

from observatory_ops.access.decorators import posted_only, requires
from observatory_ops.access.roles import ENGINEER, TECHNICIAN, VIEWER, has_role
from observatory_ops.archive.history import person
from observatory_ops.exports import csv_response, download_refused, period
from observatory_ops.logbook.nights_csv import WRITTEN_DATE
from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.catalogue import BRAKE_AIR_BACK, is_tag_out_step, release_step_for
from observatory_ops.registry.forms import possible_id
from observatory_ops.registry.models import Site

from . import pdf, selectors, services
from .cautions import (
    ALONGSIDE_ADVICE,
    ALONGSIDE_TITLE,
    HAND_BACKS_HELD_ADVICE,
    HAND_BACKS_HELD_TITLE,
    HAZARDS,
    ISOLATION_REVIEW,
    ISOLATION_UNTICKED,
    ISOLATION_UNTICKED_QUESTION,
    ISOLATION_UNTICKED_RECORD,
    ISOLATION_UNTICKED_TITLE,
    PARTS_UNREGISTERED,
    PRECEDENCE_STATEMENT,
    PREPARED_APART_QUESTION,
    cautions_for,
    in_words,
    needs_isolation,
)
from .forms import (
    READINGS_CONFIRM,
    READINGS_QUESTIONED,
    AdHocForm,
    FinishForm,
    LiftForm,
    PartAddForm,
    PartCountForm,
    WithdrawForm,
    WorkOrderEditForm,
    planned_date_plausible,
)
from .lifecycle import TRANSITIONS, available
from .models import Part, State, WorkOrder
from .sheet import WHY_AS_OF
from .tables import WorkOrderFilter, WorkOrderTable

#: The session key of a tick refused on a plain post: (order id, line anchor, message), shown once at the line.
TICK_REFUSED = "workorders.tick_refused"


def _order(pk) -> WorkOrder:
    return get_object_or_404(WorkOrder.objects.select_related("site", "telescope", "assignee"), pk=pk)


def _tick_refused(request, order: WorkOrder) -> dict | None:
    """The tick refused on this order's page just before (``work_order_tick``), for its line to say why: read
    once, so the note is gone on the next page, whatever is done meanwhile."""
    refused = request.session.pop(TICK_REFUSED, None)
    return {"anchor": refused[1], "text": refused[2]} if refused and refused[0] == order.pk else None


@requires(VIEWER)
def work_order_list(request):
    filtered = WorkOrderFilter(request.GET, queryset=selectors.work_orders_listed(), request=request)
    # A filter that cannot be applied lists nothing, as the page says above the rows (a diff review's bad done date
    # listed every order under "No orders are listed"; django-filter skips such a filter).
    table = WorkOrderTable(filtered.queryset.none() if filtered.errors else filtered.qs)
    RequestConfig(request, paginate={"per_page": 50}).configure(table)
    return render(request, "workorders/list.html", {"filter": filtered, "table": table,
                                                    "query": request.GET.urlencode()})


@requires(VIEWER)
def work_orders_csv(request):
    """The orders the list's filters choose, every one (not a page), as CSV: each with the day its work was done and
    its actual hours, for a month's report (a manager's review had no record of finished work but the orders
    themselves). Filters that cannot be applied are refused, as the list says them."""
    filtered = WorkOrderFilter(request.GET, queryset=selectors.work_orders_listed(), request=request)
    if not filtered.is_valid():
        return download_refused(request, filtered.unapplied(), reverse("workorder-list"),
                                what="The filters cannot be applied")
    # Named by the site (when filtered to one) and the day it was made, that site's today, else UTC's: a handover
    # review's folder held several "work-orders.csv" that said neither.
    site = filtered.form.cleaned_data.get("site")
    named = f"work-orders-{site.slug}-{site_today(site)}" if site else f"work-orders-{timezone.now().date()}"
    return csv_response(f"{named}.csv", selectors.WORK_ORDERS_CSV_HEADER, selectors.work_orders_csv_rows(
        filtered.qs.order_by("pk")))


@requires(TECHNICIAN)
def work_order_from_due(request):
    if (visit := posted_only(request, reverse("due-list"))) is not None:
        return visit
    # A value no plan id can be is dropped, as one of no plan is found in none: an order of nothing is refused.
    ids = [plan_id for v in request.POST.getlist("plans") if (plan_id := possible_id(ServicePlan, v)) is not None]
    plans = sorted(ServicePlan.objects.filter(pk__in=ids).select_related("subsystem__telescope__site"),
                   key=lambda plan: ids.index(plan.pk))  # in the due list's order
    # The due list asks no date: the order is planned for the site's today, so it can be issued straight away. A
    # recoat's downtime offer (mirrors.services.due_in_downtime) sends the day it plans the work for, today or later.
    back = request.POST.get("back", "")
    if not (back and url_has_allowed_host_and_scheme(back, allowed_hosts={request.get_host()},
                                                     require_https=request.is_secure())):
        back = reverse("due-list")
    today = site_today(plans[0].subsystem.telescope.site) if plans else None
    planned = today
    if plans and (asked_for := request.POST.get("planned_on", "")):
        written = WRITTEN_DATE.fullmatch(asked_for)
        try:
            planned = planned_date_plausible(dt.date.fromisoformat(written.group()), today) if written else None
        except (ValueError, forms.ValidationError):
            planned = None
        if planned is None or planned < today:
            messages.error(request, f"No work order made: the planned day \"{asked_for}\" is not a date from today "
                                    "on, within the years work is planned ahead.")
            return redirect(back)
    try:
        order = services.work_order_from_due(plans, request.user, planned)
    except services.Refused as exc:
        messages.error(request, f"No work order made: {exc}.")
        return redirect(back)
    items = "1 due item" if len(plans) == 1 else f"{len(plans)} due items"
    # Drafting is a technician's to do, editing and issuing an engineer's: a technician is told who takes it on.
    held = selectors.moves_held(order).get("issue")
    then = ("Check the steps, change the planned date if the work is for another day (Edit), then issue it."
            if has_role(request.user, ENGINEER) and not held else
            f"It cannot be issued yet: {held[0]}." if held else
            "An engineer checks its steps and date and issues it; it is listed among the drafts on the work orders "
            "page.")
    when = f"today ({planned:%d %b %Y})" if planned == today else f"{planned:%d %b %Y}"
    messages.success(request, f"{order.number} drafted from {items}, planned for {when}. {then}")
    already = {
        other.number: other for orders in selectors.orders_for_plans(p.pk for p in plans).values()
        for other in orders if other.pk != order.pk
    }
    if already:
        messages.warning(request, "Some of these items are already on work orders still to do: " + ", ".join(
            f"{other.number} ({other.get_state_display()})" for other in already.values()
        ) + f". Withdraw {order.number} or the other if the work is the same.")
    return redirect(order)


@requires(TECHNICIAN)
def work_order_ad_hoc(request, slug):
    site = get_object_or_404(Site, slug=slug)
    form = AdHocForm(request.POST or None, site=site)
    if request.method == "POST" and form.is_valid():
        d = form.cleaned_data
        order = services.work_order_ad_hoc(
            site, list(d["subsystems"]), d["title"], request.user, order_type=d["order_type"], steps=d["steps"],
            powered=d["powered"], restore=d["restore"], hazards=d["hazards"], planned_date=d["planned_date"],
            plans=list(d["plans"]),
        )
        planned = f"planned for {order.planned_date:%d %b %Y}" if order.planned_date else (
            "with no planned date: set one (Edit) before issuing it")
        messages.success(request, f"{order.number} drafted, {planned}.")
        return redirect(order)
    return render(request, "workorders/ad_hoc.html", {"form": form, "site": site})


@requires(VIEWER)
def work_order_detail(request, pk):
    order = _order(pk)
    figures = None
    lift_error = ""
    try:
        figures = selectors.lift(order)
    except ValueError as exc:
        lift_error = str(exc)
    readings = list(order.required_readings.select_related("subsystem", "reading"))
    editable = order.state in (State.DRAFT, State.ISSUED) and has_role(request.user, ENGINEER)
    items = selectors.order_items(order)  # read once, for every selector below that needs them
    missing = selectors.hazards_missing(order, items)
    unrecorded = selectors.hazards_unrecorded(order, items)
    points = selectors.isolation_points(order, items)
    phase = selectors.recoat_phase(order) if order.state in (State.FINISHED, State.COUNTERSIGNED) else None
    # Moves refused as the order stands (no planned date, a lift that stands in the way), and a countersign refused to
    # this person (one who took part in the work; a technician, when the isolation answer is put to the engineer):
    # no buttons, and why.
    gaps = selectors.isolation_gaps(order, points, items)
    held = selectors.moves_held(order, unrecorded, gaps, items)
    if order.state == State.FINISHED and (why := services.countersign_refusal(order, request.user)):
        held["countersign"] = [why]
    held_notes: dict[str, list[str]] = {}
    for t in available(order.state):
        if has_role(request.user, t.role):
            for reason in held.get(t.action, []):
                held_notes.setdefault(reason, []).append(t.label)
    part_uses = list(order.part_uses.select_related("part"))
    served = selectors.served_since(order, items)
    for item in items:
        item.served_since = served.get(item.pk)
    return render(
        request,
        "workorders/detail.html",
        {
            "order": order,
            "site": order.site,
            "hazards_notice": selectors.hazards_notice(order, missing, unrecorded=unrecorded),
            "out_notices": selectors.telescope_out_notices(order) + selectors.recoat_planned_notices(order),
            "alongside": _alongside(order, items),
            "hazards_confirmed": [HAZARDS[h] for h in order.hazards_confirmed_at_finish],
            "isolation_record": _isolation_record(order),
            "cleanings": selectors.cleanings_at_finish(order),
            "can_update_hazards": bool(missing) and editable,
            "lockout_step_warning": selectors.lockout_step_warning(order, items),
            "standing_notes": selectors.standing_notes(order),
            "parts_unregistered": selectors.parts_unregistered(order, items, part_uses),
            "parts_unregistered_text": PARTS_UNREGISTERED,
            "items": items,
            "has_reasons": any(i.why for i in items),  # as the printed order says (pdf._why)
            "why_as_of": WHY_AS_OF.format(day=f"{timezone.localtime(order.created_at, order.site.zone):%d %b %Y}"),
            "cautions": selectors.cautions(order, points),
            "precedence": selectors.PRECEDENCE_STATEMENT,
            "checklist": (lines := selectors.checklist(order, points, items)),
            # An engineer's page asks why beside a lock's line they would change in its holder's place.
            "in_place": services.lines_in_place_of_holder(order, lines, request.user) if order.state == State.UNDERWAY
            else set(),
            "tick_trail": selectors.tick_trail(order),
            # The step that locks the points (1-based), said above them: a review ticked them first, top to bottom, and
            # the steps under power before it were then refused.
            "lockout_number": (found[0] + 1) if (found := services.isolated_steps(order.step_list)) else None,
            "refused": _tick_refused(request, order),
            "can_tick": order.state == State.UNDERWAY and has_role(request.user, TECHNICIAN),
            "isolation_gaps": gaps,
            "no_isolation_needed": selectors.order_isolation_statement(order, missing, unrecorded),
            "readings": readings,
            "beyond_limit": [r for r in readings if r.recorded_beyond_limit],
            "part_rows": selectors.part_rows(order, part_uses),
            "records": order.service_records.filter(corrected_by__isnull=True).select_related("subsystem"),
            "work_done_on": selectors.work_done_on(order),
            "work_done_at_finish": selectors.work_done_at_finish(order),
            "hours_corrected": selectors.hours_corrected(order),
            "recoat_phase": phase,
            "mirror_out": [phase.mirror_out] if phase and phase.mirror_out else [],
            "lift": figures,
            "lift_rows": selectors.lift_rows(figures, order.lift_inputs) if figures else [],
            "lift_error": lift_error,
            "cell_record": selectors.lift_cell_record(order) if figures else "",
            # An order behind its subsystems' hazards is neither issued nor started (services.work_order_move).
            "moves": [t for t in available(order.state) if t.action != "finish" and has_role(request.user, t.role)
                      and not (missing and t.action in ("issue", "start")) and t.action not in held],
            "moves_held": [(", ".join(labels), reason) for reason, labels in held_notes.items()],
            "can_finish": order.state == State.UNDERWAY and has_role(request.user, TECHNICIAN) and "finish" not in held,
            "mirror": selectors.lift_mirror(order) if order.recoat_phase else None,
            "editable": editable,
            # The lifting figures are offered where something is lifted: a suspended load, or figures already entered.
            "offers_lift": editable and (figures is not None or bool(lift_error) or "suspended_load" in order.hazards),
            "part_form": PartAddForm(site=order.site),
            "withdraw_form": WithdrawForm(),
            "withdraw_waits": services.withdraw_refusal(order),
            "withdraw_hand_back": services.withdrawal_hand_back_text(order) if has_role(request.user, ENGINEER) else "",
            # Said while it is to do (a recoat's realignment holds those left to it before it starts): once it is
            # finished or withdrawn, its record says where it went.
            "hand_backs_held": selectors.hand_backs_held(order) if order.state in selectors.TO_DO else [],
            "hand_backs_held_title": HAND_BACKS_HELD_TITLE,
            "hand_backs_held_advice": HAND_BACKS_HELD_ADVICE,
            "history": selectors.history(order, limit=8),
            "history_label": "workorders.workorder",
            "history_pk": order.pk,
        },
    )


def _alongside(order: WorkOrder, items: list) -> dict | None:
    """Other work underway on this order's telescopes, as its page warns of it (``selectors.work_alongside``)."""
    alongside = selectors.work_alongside(order, items)
    if not alongside:
        return None
    return {"title": ALONGSIDE_TITLE.format(telescopes=selectors.shared_telescopes(alongside)),
            "advice": ALONGSIDE_ADVICE, "orders": [(a.order, a.text(order.site.zone)) for a in alongside]}


def _isolation_record(order: WorkOrder) -> dict | None:
    """What the person finishing answered for an energy isolation nobody ticked, as the order's record shows it."""
    answer = order.isolation_confirmed_at_finish
    if answer not in ISOLATION_UNTICKED:
        return None
    return {
        "said": ISOLATION_UNTICKED_RECORD.format(person=person(order.finished_by), answer=ISOLATION_UNTICKED[answer]),
        "lines": order.isolation_unticked_at_finish,
        "review": ISOLATION_REVIEW.get(answer, ""),
    }


@requires(ENGINEER)
def work_order_edit(request, pk):
    order = _order(pk)
    if order.state not in (State.DRAFT, State.ISSUED):
        messages.error(request, f"{order.number} is {order.get_state_display()}: it can no longer be edited.")
        return redirect(order)
    form = WorkOrderEditForm(request.POST or None, instance=order)
    saved = False
    if request.method == "POST":
        with transaction.atomic():
            # The order's row locked while the form compares it with the page (LoadedAsMixin) and saves: another save
            # between the two would otherwise be written over.
            WorkOrder.objects.select_for_update().filter(pk=order.pk).exists()
            if saved := form.is_valid():
                form.save()
    if saved:
        messages.success(request, "Saved.")
        if "planned_date" in form.changed_data and order.recoat_phase:
            site_recompute(order.site)  # its recoat's nights follow its orders (planning.services.recoat_downtime)
        if "planned_date" in form.changed_data:
            for note in selectors.planned_date_notes(order):
                messages.warning(request, note)
        return redirect(order)
    return render(
        request, "workorders/edit.html",
        {"form": form, "order": order, "needs_lockout": needs_isolation(order.hazards),
         "lockout_step": services.LOCKOUT_STEP, "stale": form.has_error(NON_FIELD_ERRORS, "stale")},
    )


@requires(ENGINEER)
def work_order_hazards_update(request, pk):
    order = _order(pk)
    if (visit := posted_only(request, order.get_absolute_url())) is not None:
        return visit
    try:
        update = services.work_order_hazards_update(order, request.user)
    except services.Refused as exc:
        messages.error(request, f"Not updated: {exc}.")
        return redirect(order)
    cautions = "its caution" if len(update.added) == 1 else "their cautions"
    done = f"{order.number}: added {', '.join(HAZARDS[h] for h in update.added)}, with {cautions}."
    if update.steps_rebuilt:
        done += " The lockout step and the step that removes the locks were put into the steps from its plans."
    if update.lift_added:
        done += " Lifting figures were taken from the mirror's geometry."
    messages.success(request, done)
    if update.lockout_missing:
        subsystems = [item.subsystem for item in order.items.select_related("subsystem")]
        release = release_step_for(subsystems, tagged_out=any(is_tag_out_step(step) for step in order.step_list))
        # The brake air the lockout would vent, as an order made from its plans restores it (services.brake_air_back).
        air = (f", and right after it: \"{BRAKE_AIR_BACK}\""
               if services.brake_air_back(subsystems, order.hazards, []) else "")
        messages.warning(
            request, "Its hazards now call for energy isolation, but its steps are not those its plans give (edited "
            "since, written by hand, or the plans changed), so the lockout step was not placed by guess. Edit the "
            "steps and put it in after the steps done under power: "
            f"\"{services.LOCKOUT_STEP}\", and after the locked-out work: \"{release}\"{air}. Until then it cannot "
            "be issued or started.",
        )
    return redirect(order)


@requires(TECHNICIAN)
def work_order_move(request, pk, action):
    """Issue, start, countersign or withdraw (the buttons of the order's page). A start more than a week before the
    planned date, or beside other work underway on its telescope, is asked first (``selectors.start_questions``), on a
    page of its own whose button posts here again with ``asked=confirmed``; so is countersigning an order finished with
    its energy isolation answered for as not needed or not done (``cautions.ISOLATION_REVIEW``): its findings are
    read first."""
    order = _order(pk)
    if (visit := posted_only(request, order.get_absolute_url())) is not None:
        return visit
    if (action == "countersign" and request.POST.get("asked") != "confirmed" and order.state == State.FINISHED
            and not services.countersign_refusal(order, request.user)):  # asked only of someone who may
        if record := _isolation_record(order):
            if record["review"]:
                return render(request, "workorders/countersign_question.html", {"order": order, "record": record})
    if action == "issue" and request.POST.get("asked") != "confirmed" and order.state == State.DRAFT:
        if len(apart := selectors.prepared_apart(order)) > 1:
            places = sorted(place for found in apart.values() for place in found)
            steps = in_words([str(place) for place in places])
            return render(request, "workorders/issue_question.html", {
                "order": order, "question": PREPARED_APART_QUESTION.format(number=order.number, n=len(apart),
                                                                            steps=steps),
                "steps": [(place, order.step_list[place - 1]) for place in places],
            })
    if action == "start" and request.POST.get("asked") != "confirmed":
        if questions := selectors.start_questions(order):
            alongside = selectors.work_alongside(order, starting=True)
            return render(request, "workorders/start_questions.html", {
                "order": order, "questions": questions, "early": bool(selectors.early_start_question(order)),
                "alongside": [(a.order, a.text(order.site.zone)) for a in alongside],
                "alongside_advice": ALONGSIDE_ADVICE if alongside else "",
            })
    try:
        services.work_order_move(order, action, request.user, reason=request.POST.get("reason", ""))
    except services.Refused as exc:
        messages.error(request, f"Not done: {exc}.")
    else:
        messages.success(request, f"{order.number}: {TRANSITIONS[action].label.lower()}: done.")
    return redirect(order)


@requires(TECHNICIAN)
def work_order_tick(request, pk):
    """Record one tick, or take it back, on the checklist; the checkbox's state is the one asked for.

    A plain form post is answered with the page again, scrolled to the line, which says why beside its box when
    the tick was refused; a script's post that asks for JSON gets the line's new note (or the refusal) and the
    page stays as it is.
    """
    order = _order(pk)
    if (visit := posted_only(request, order.get_absolute_url())) is not None:
        return visit
    wants_json = "application/json" in request.headers.get("Accept", "")
    key = request.POST.get("key", "")
    try:
        if not (key.isascii() and key.isdigit()):
            raise services.Refused("the form did not say which line it is about; reload the page")
        # A result typed (only a step that asks for one has its box) asks for the tick, as Enter in the box posts the
        # form with its box as it stands (a diff review lost a result so, without a script).
        result = request.POST.get("result", "")
        tick = services.checklist_tick_set(
            order, request.POST.get("kind", ""), int(key), request.POST.get("ticked") == "1" or bool(result.strip()),
            request.user, seen_text=request.POST.get("text"), result=result,
            in_place_of=request.POST.get("in_place_of", ""),
        )
    except services.Refused as exc:
        lines = selectors.checklist(order)
        asked = (request.POST.get("kind"), key)
        line = next((x for x in lines.steps + lines.points if (x.kind, str(x.key)) == asked), None)
        if wants_json:  # with the line's state as recorded, so the box shows it (someone may have ticked it)
            return JsonResponse({"error": f"Not recorded: {exc}.", "ticked": line.ticked if line else None,
                                 "note": line.note if line else ""}, status=409)
        messages.error(request, f"Not recorded: {exc}.")
        if line is None:
            return redirect(order)
        # Back at the line, which says why beside its box for this one page (the detail view pops it).
        request.session[TICK_REFUSED] = [order.pk, line.anchor, f"Not recorded: {exc}."]
        return redirect(f"{order.get_absolute_url()}#{line.anchor}")
    note = selectors.tick_note(tick, tick.text, order.site.zone)
    if wants_json:
        return JsonResponse({"ticked": tick.ticked, "note": note})
    return redirect(f"{order.get_absolute_url()}#{selectors.line_anchor(*tick.line)}")


def _posted_day(text: str) -> dt.date | None:
    """The finish form's day the work was done as posted, read as the form reads it (its field: "2026-11-25" or
    "25 Nov 2026"), or None when it cannot be read (the form says why)."""
    try:
        return FinishForm.base_fields["work_done_on"].to_python(text)
    except forms.ValidationError:
        return None


@requires(TECHNICIAN)
def work_order_finish(request, pk):
    """The finish form. It lists the checklist lines nobody ticked (finishing with any needs the confirmation
    box), and a reading beyond its limit is shown beside its field once before it is recorded as measured."""
    order = _order(pk)
    if order.state != State.UNDERWAY:  # a second press of the button, or an old page
        if order.finished_at is not None:
            done = services.AlreadyFinished(order, request.user)
            level = messages.INFO if done.by_you or request.method != "POST" else messages.ERROR
            messages.add_message(request, level, f"{done}.")
        else:
            messages.info(request, f"{order.number} is {order.get_state_display()}: there is nothing to finish.")
        return redirect(order)
    if held := selectors.moves_held(order).get("finish"):  # an old page, or a typed address: the order's page says why
        messages.error(request, f"{order.number} cannot be finished yet: {'; and '.join(held)}.")
        return redirect(order)
    unticked = selectors.unticked_lines(order)
    isolation = selectors.isolation_lines(unticked)  # answered for on their own, not with the other lines
    # The other crews are those at work by the day the work was done: today, or the day posted (paper entered later).
    day = _posted_day(request.POST.get("work_done_on", "")) if request.method == "POST" else None
    hand_back, working = services.left_to_the_last_crew(order, unticked, day)  # said, not confirmed
    others = [line for line in unticked if line not in isolation and line not in hand_back]
    lacking = selectors.hazards_missing(order)
    waits = services.finish_waits(order, unticked, day)  # said above the form, before it is filled in
    form = FinishForm(
        request.POST or None, order=order, by=request.user, unticked=others, isolation_unticked=isolation,
        lacking_hazards=lacking,
    )
    asked: dict[str, str] = {}  # the figures shown with a question beside them, to be posted again as they are
    flagged: list[str] = []
    if request.method == "POST" and form.is_valid():
        flags = form.beyond_limits()
        # Hours far above the estimate, a day of work before a subsystem entered service, reflectances above fresh
        # and readings of 0 against a limit are questioned as readings beyond their limit are; only the last are
        # flagged on the record.
        asked = {**form.hours_questioned(), **form.before_in_service(), **form.above_fresh(), **form.zero_readings(),
                 **flags}
        flagged = sorted(f"{name}={form.cleaned_data[name]!r}" for name in asked)
        confirmed = form.cleaned_data.get("confirm_unticked", False)
        isolation_answer = form.cleaned_data.get("isolation_answer", "")
        hazards_confirmed = form.cleaned_data.get("confirm_hazards", False)
        if others and not confirmed:
            form.add_error(
                "confirm_unticked", "Tick the lines on the work order page, or confirm here that they were done "
                "or did not apply."
            )
        elif lacking and not hazards_confirmed:
            form.add_error(
                "confirm_hazards", "Confirm that these hazards were controlled or did not arise, and say how in the "
                "findings; if you cannot, do not finish: ask the site engineer."
            )
        # Questioned figures are first shown beside their fields, with a box to keep them; the same values posted
        # again from that page with the box ticked are recorded as entered.
        elif flagged and not (flagged == sorted(request.POST.getlist("flagged"))
                              and request.POST.get("readings_confirmed")):
            n = len(flagged)
            form.add_error(None, READINGS_QUESTIONED.format(
                n=f"{n} figure{'s are' if n != 1 else ' is'}", its="their" if n != 1 else "its",
                s="s" if n != 1 else "", it="them" if n != 1 else "it"))
        else:
            try:
                services.work_order_finish(
                    order, request.user, form.cleaned_data["actual_hours"], form.cleaned_data["findings"],
                    form.readings(), form.parts(),
                    confirmed_unticked=[
                        *(request.POST.getlist("unticked") if confirmed else ()),
                        *(request.POST.getlist("isolation_unticked") if isolation_answer else ()),
                    ],
                    cleanings=form.cleanings(),
                    confirmed_hazards=request.POST.getlist("lacking_hazard") if hazards_confirmed else (),
                    work_done_on=form.cleaned_data["work_done_on"],
                    isolation_answer=isolation_answer,
                    crew=form.cleaned_data["crew"],
                    crew_members=form.cleaned_data["crew_members"],
                    not_measured=form.not_measured(),
                    parts_added=form.parts_added(),
                )
            except services.Refused as exc:
                if isinstance(exc, services.AlreadyFinished) and exc.by_you:  # pressed twice at once
                    messages.info(request, f"{exc}.")
                    return redirect(order)
                form.add_error(None, str(exc))
            else:
                done = [_finished(order)]
                if isolation:
                    done.append("Your answer for the energy isolation nobody ticked is on the record.")
                if others:
                    done.append(
                        "1 unticked line confirmed as done or not applicable is on the record." if len(others) == 1
                        else f"{len(others)} unticked lines confirmed as done or not applicable are on the record."
                    )
                if lacking:
                    done.append(
                        "The hazard it lacked, confirmed as controlled, is on the record." if len(lacking) == 1 else
                        f"The {len(lacking)} hazards it lacked, confirmed as controlled, are on the record."
                    )
                if flags:
                    done.append(
                        "1 reading beyond its limit is flagged on the record." if len(flags) == 1
                        else f"{len(flags)} readings beyond their limit are flagged on the record."
                    )
                if short := [use for use in order.part_uses.select_related("part") if use.quantity_short]:
                    done.append(_beyond_register(short))
                phase = selectors.recoat_phase(order)
                if phase is not None and phase.next_order is not None:
                    done.append(_next_phase(phase.next_order, phase.mirror_id))
                if phase is not None and phase.mirror_out is not None:
                    done += phase.mirror_out.notice()[1:]  # the telescope stays locked out until the reinstall
                messages.success(request, format_html_join(" ", "{}", ((part,) for part in done)))
                return redirect(order)
    asked_apart = ("confirm_unticked", "confirm_hazards", "isolation_answer")
    fields = [(form[name], asked.get(name, "")) for name in form.fields if name not in asked_apart]
    # Locked-out work left unticked after the locks came off (the release ticked): confirming it "done or did not
    # apply" is allowed, but if it was not done it is not done now without isolating again (a safety review: the form
    # said nothing of it, where the page refuses the same tick with "isolate again").
    found = services.isolated_steps(order.step_list)
    released = found is not None and found[1].stop < len(order.step_list) and not any(
        line.kind == "step" and line.key == found[1].stop for line in unticked)
    locked_after_release = {line.anchor for line in others if released and line.kind == "step"
                            and line.key in found[1]}
    return render(
        request, "workorders/finish.html",
        {"form": form, "order": order, "fields": fields, "unticked": unticked, "others": others,
         "isolation": isolation, "isolation_title": ISOLATION_UNTICKED_TITLE,
         "isolation_question": ISOLATION_UNTICKED_QUESTION, "flagged": flagged, "readings_confirm": READINGS_CONFIRM,
         "lacking": lacking, "lacking_cautions": cautions_for(lacking), "precedence": PRECEDENCE_STATEMENT,
         "locked_after_release": locked_after_release, "waits": waits, "hand_back": hand_back, "working": working,
         "still_at_it": services.still_at_it([a.order for a in working]) if working else ""},
    )


def _beyond_register(uses) -> str:
    """What finishing did with parts used beyond what the register held."""
    said = "; ".join(
        f"{use.part.name}: {use.quantity_used:g} {use.part.unit} used, "
        f"{use.quantity_used - use.quantity_short:g} in the register" for use in uses
    )
    return (
        f"More parts were used than the parts register held ({said}). They are recorded as used, the register is "
        "brought to zero, and the shortfall is marked on this order and on the parts register for the site engineer "
        "to count the stock and correct it."
    )


def _finished(order: WorkOrder) -> str:
    """What finishing wrote: the service records and the day they are dated, and how many plans restarted."""
    records = list(order.service_records.filter(corrects__isnull=True))
    if not records:  # an order that covers no subsystem
        return f"{order.number} finished: no service record written, as it covers no subsystem."
    day = selectors.work_done_at_finish(order)
    plans = len({r.plan_id for r in records if r.plan_id})
    written = f"{len(records)} service record{'' if len(records) == 1 else 's'} written, dated {day:%d %b %Y}"
    if plans:
        restarted = f"{plans} service plan{'' if plans == 1 else 's'} restarted, counting from that day"
    elif order.items.filter(plan__isnull=False).exists():  # a realignment (services._restarted_by_the_new_coating)
        restarted = ("no service plan restarted: the recoat's new coating restarted its plans, which count from the "
                     "day it was coated")
    else:
        restarted = "no service plan restarted (the order covers none)"
    return f"{order.number} finished: {written}; {restarted}."


def _next_phase(order: WorkOrder, mirror_id: int):
    """The next phase order of a recoat, linked, worded by how it stands: the day it is planned for while it is still
    to do, and what to do with it; a withdrawn one stops the recoat, which is planned again."""
    link = format_html('<a href="{}">{} {}</a>', order.get_absolute_url(), order.number, order.title)
    if order.state == State.WITHDRAWN:
        return format_html(
            "Next: {} was withdrawn, so this recoat cannot go on as planned: withdraw its other orders still to do "
            'and plan the recoat again on the <a href="{}">mirror\'s recoat planner</a>.',
            link, reverse("mirror-recoat", args=[mirror_id]),
        )
    stands = {
        State.DRAFT: "still a draft: issue it" if order.planned_date else "still a draft: set its planned date (Edit) "
                     "and issue it",
        State.ISSUED: "issued: it can be started",
        State.UNDERWAY: "already underway",
        State.FINISHED: "already finished",
        State.COUNTERSIGNED: "already finished and countersigned",
    }[order.state]
    if order.planned_date and order.state in (State.DRAFT, State.ISSUED):
        stands = f"planned {order.planned_date:%d %b %Y}; {stands}"
    return format_html("Next: {} ({}).", link, stands)


@requires(ENGINEER)
def work_order_lift(request, pk):
    order = _order(pk)
    initial, filled_from = selectors.lift_form_initial(order)
    form = LiftForm(request.POST or None, initial=initial)
    if request.method == "POST" and form.is_valid():
        inputs = {k: v for k, v in form.cleaned_data.items() if v is not None}
        try:
            services.lift_set(order, inputs)
        except (ValueError, services.Refused) as exc:
            form.add_error(None, str(exc))
        else:
            saved = "Lifting figures saved; the suspended-load caution is on the work order."
            if held := selectors.lift_refusal(order):  # saved all the same: the engineer corrects them next
                messages.warning(request, f"{saved} They stop it being issued or started: {held}.")
            elif held := selectors.lift_refusal(order, "start"):
                messages.warning(request, f"{saved} It may be issued, but they stop the work being started: {held}.")
            else:
                messages.success(request, saved)
            return redirect(order)
    try:
        figures = selectors.lift(order)
    except ValueError:  # not valid as stored: the order's page names the problem, and saving the form names it
        figures = None
    return render(
        request, "workorders/lift.html",
        {"form": form, "order": order, "cautions": cautions_for(["suspended_load"]),
         "precedence": PRECEDENCE_STATEMENT, "lift": figures, "filled_from": filled_from,
         "cell_record": selectors.lift_cell_record(order) if figures else ""},
    )


@requires(ENGINEER)
def work_order_part_add(request, pk):
    order = _order(pk)
    if (visit := posted_only(request, order.get_absolute_url())) is not None:
        return visit
    form = PartAddForm(request.POST, site=order.site)
    if form.is_valid():
        try:
            services.part_add(order, form.cleaned_data["part"], form.cleaned_data["quantity"])
        except services.Refused as exc:
            messages.error(request, f"Not added: {exc}.")
    else:  # each message names its field (forms.PartAddForm)
        messages.error(request, "Not added: " + " ".join(error for errors in form.errors.values() for error in errors))
    return redirect(order)


def _paper(request) -> str:
    return "letter" if request.GET.get("paper") == "letter" else "A4"


@requires(VIEWER)
def work_order_pdf(request, pk):
    order = _order(pk)
    sheet = selectors.sheet(order, request.build_absolute_uri(order.get_absolute_url()))
    response = HttpResponse(pdf.render_sheet(sheet, _paper(request)), content_type="application/pdf")
    response["Content-Disposition"] = f'attachment; filename="{order.number}.pdf"'
    return response


@requires(VIEWER)
def work_order_batch_pdf(request, slug):
    site = get_object_or_404(Site, slug=slug)
    today = site_today(site)
    try:
        start = dt.date.fromisoformat(request.GET.get("from") or today.isoformat())
        end = dt.date.fromisoformat(request.GET.get("to") or (start + dt.timedelta(days=6)).isoformat())
    except ValueError:
        messages.error(request, "Dates must be given as YYYY-MM-DD.")
        return redirect("workorder-list")
    if end < start:
        messages.error(request, f"The batch runs from {start:%d %b %Y} to {end:%d %b %Y}, which ends before it starts: "
                                "give the earlier date as from.")
        return redirect(reverse("workorder-list") + f"?site={site.pk}")
    orders = list(selectors.issued_between(site, start, end))
    if not orders:
        messages.warning(request, f"No work orders issued and still to do at {site.name} planned from {start} to "
                                  f"{end}.")
        return redirect(reverse("workorder-list") + f"?site={site.pk}")
    sheets = [selectors.sheet(o, request.build_absolute_uri(o.get_absolute_url())) for o in orders]
    response = HttpResponse(pdf.render_batch(sheets, _paper(request), (start, end)), content_type="application/pdf")
    response["Content-Disposition"] = f'attachment; filename="{site.slug}-work-orders-{start}-{end}.pdf"'
    return response


@requires(VIEWER)
def part_list(request, slug):
    site = get_object_or_404(Site, slug=slug)
    return _part_list(request, site)


#: The parts-used download's period unless one is given: a year to the site's today, as the reliability page's hours.
PARTS_USED_DEFAULT_DAYS = 365


@requires(VIEWER)
def parts_used_csv(request, slug):
    """The parts used by the site's finished work from ``from`` to ``to`` (default: the last 12 months) as CSV."""
    site = get_object_or_404(Site, slug=slug)
    today = site_today(site)
    try:
        first, last = period(request.GET, today - dt.timedelta(days=PARTS_USED_DEFAULT_DAYS - 1), today)
    except ValueError as exc:
        return download_refused(request, str(exc), reverse("part-list", args=[site.slug]))
    return csv_response(f"{site.slug}-parts-used-{first}-to-{last}.csv", selectors.PARTS_USED_CSV_HEADER,
                        selectors.parts_used_csv_rows(site, first, last))


def _part_list(request, site: Site, refused: tuple[int, PartCountForm] | None = None):
    """The parts register, with the shortfalls waiting for a count; ``refused`` is a count just refused (the part's
    id and its form, with the message), shown at its part."""
    to_count = [
        (part, uses, refused[1] if refused and refused[0] == part.pk else _count_form(part))
        for part, uses in selectors.parts_to_count(site)
    ]
    return render(
        request, "workorders/parts.html",
        {"site": site, "rows": selectors.parts_planned_open(Part.objects.filter(site=site)).values(),
         "to_count": to_count,
         "counting": {part.pk for part, _, _ in to_count}, "can_count": has_role(request.user, ENGINEER)},
    )


def _count_form(part: Part, data=None) -> PartCountForm:
    return PartCountForm(data, part=part, auto_id=f"count-{part.pk}-%s")  # ids of their own: one form a part


@requires(ENGINEER)
def part_count(request, slug, pk):
    """The engineer's count of a part's stock after a shortfall: the register is set to it."""
    site = get_object_or_404(Site, slug=slug)
    part = get_object_or_404(Part, site=site, pk=pk)
    if (visit := posted_only(request, reverse("part-list", args=[site.slug]))) is not None:
        return visit
    form = _count_form(part, request.POST)
    if form.is_valid():
        try:
            services.part_count_record(part, form.cleaned_data["counted"], request.user)
        except services.Refused as exc:
            messages.error(request, f"Not recorded: {exc}.")
        else:
            messages.success(request, f"{part.name}: the register now holds {part.quantity_on_hand:g} {part.unit}, "
                                      "as counted; its shortfall is marked counted.")
            return redirect("part-list", slug=site.slug)
    return _part_list(request, site, refused=(part.pk, form))
