
from django.contrib import messages
from django.core.exceptions import ValidationError
from django.db.models import Prefetch
from django.http import HttpResponse
from django.shortcuts import get_object_or_404, redirect, render
from django.template.defaultfilters import pluralize
from django.urls import reverse
from django.utils.html import format_html, format_html_join
from django.utils.http import urlencode

from observatory_ops.access.decorators import posted_only, requires
from observatory_ops.access.roles import ENGINEER, TECHNICIAN, VIEWER, has_role
from observatory_ops.access.templatetags.form_errors import names_field
from observatory_ops.archive.history import changes
from observatory_ops.calc import coating
from observatory_ops.logbook.forms import ReadingWithdrawForm
from observatory_ops.logbook.views import already_logged_text
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import recoats_in_hand, site_today
from observatory_ops.registry.models import Site
from observatory_ops.registry.services import successors_of
from observatory_ops.workorders.models import State, WorkOrder
from observatory_ops.workorders.selectors import coating_unlogged

from . import calendar_export, plots, response_csv, services
from .forms import CalculatorForm, CleaningForm, CoatingForm, MeasurementForm, WindowForm
from .models import Mirror, ReflectanceMeasurement


def _mirror(pk) -> Mirror:
    return get_object_or_404(Mirror.objects.select_related("subsystem__telescope__site"), pk=pk)


@requires(VIEWER)
def mirror_detail(request, pk):
    mirror = _mirror(pk)
    site = mirror.subsystem.telescope.site
    state = services.mirror_forecast(mirror)
    runs_over = services.runs_over_each_recoat(site, site_today(site))
    measurements = list(mirror.measurements.select_related("taken_by", "reading", "withdrawn_by")
                        .order_by("-measured_on")[:40])
    unknown = {m.pk for m in state.unlogged_measurements}
    cleaned = set(mirror.cleanings.values_list("cleaned_on", flat=True))
    for m in measurements:  # the x of its dot in the picture; None for one not fitted
        m.exposure_h = state.exposure_by_measurement.get(m.pk)
        m.exposure_unknown = m.pk in unknown  # dated on or before the first logged night, the coating before it
        m.before_a_cleaning = m.before_cleaning and m.measured_on in cleaned  # the mark means nothing on other days
    due = services.recoat_due(mirror)
    plans = list(mirror.recoat_plans.select_related("mirror__subsystem__telescope__site").prefetch_related(
        Prefetch("work_orders", queryset=WorkOrder.objects.order_by("planned_date", "pk"))
    ))
    # A recoat in hand heads with its days as its orders now stand, and their cost; a recoat over, its planned days.
    in_hand = {plan.pk for plan in recoats_in_hand(site, site_today(site))}
    for plan in plans:
        plan.out = plan.out_cost = None
    services.with_days_out([plan for plan in plans if plan.pk in in_hand], site_today(site))
    return render(
        request,
        "mirrors/detail.html",
        {
            "mirror": mirror,
            "site": site,
            "state": state,
            "no_estimate": services.no_estimate_text(state),
            "recoat_due": services.recoat_due_text(due) if due else "",
            "may_clean": services.orders_that_may_clean_text(
                services.orders_that_may_clean(mirror),
                planning=services.recoat_to_plan(mirror, due, site_today(site)),
            ),
            "plot": plots.decline_svg(state, described_by="decline-words"),
            "train": services.throughput(mirror.subsystem.telescope),
            "coatings": mirror.coatings.all(),
            "cleanings": mirror.cleanings.all(),
            "measurements": measurements,
            "history": changes(mirror, limit=5),
            "history_label": "mirrors.mirror",
            "history_pk": mirror.pk,
            "can_log": has_role(request.user, TECHNICIAN),
            # A retired mirror: no forecast of its crossing, no new work offered, and where its kind is in service now.
            "successors": successors_of(mirror.subsystem) if mirror.subsystem.retired_on else [],
            # Each recoat plan, what changed in the crew's days since it was made, the booked runs on its nights, and
            # the telescope's other work its downtime could take.
            "plans": [
                (plan, services.plan_out_of_step(plan), runs_over.get(plan.pk, []), services.due_in_downtime(plan))
                for plan in plans
            ],
        },
    )


@requires(TECHNICIAN)
def measurement_withdraw(request, pk):
    """Withdraw a measurement entered in error, with the reason: it stays listed, marked, and is fitted no more."""
    measurement = get_object_or_404(
        ReflectanceMeasurement.objects.select_related("mirror__subsystem__telescope__site", "taken_by", "reading"),
        pk=pk,
    )
    form = ReadingWithdrawForm(request.POST or None)
    form.fields["reason"].help_text = "Why it is wrong, e.g. 0.58 typed for 0.85, or taken on another mirror."
    if request.method == "POST" and form.is_valid():
        try:
            services.measurement_withdraw(measurement, request.user, form.cleaned_data["reason"])
        except ValidationError as exc:
            for message in exc.messages:
                form.add_error(None, message)
        else:
            messages.success(request, "Measurement withdrawn: it stays listed, marked, and the decline fit leaves it "
                             "out" + ("; the logbook reading it came from is withdrawn with it." if
                                      measurement.reading_id else "."))
            return redirect(measurement.mirror)
    return render(request, "mirrors/measurement_withdraw.html",
                  {"form": form, "measurement": measurement, "mirror": measurement.mirror})


def _dated(mirror: Mirror, date_field: str, **initial) -> dict:
    """A mirror event form's initial values: dated today at the mirror's site."""
    return {date_field: site_today(mirror.subsystem.telescope.site), **initial}


def _log_event(request, mirror: Mirror, form, what: str, write, done):
    """One form page for a dated mirror event (measurement, cleaning, coating), written by a service.

    ``done`` is the success message, or a function of the mirror and the written event that words it. A form sent
    twice (a second press, a browser sending the page again) stores nothing the second time and says so, as the
    logbook's forms do: ``form.repeats`` finds the event it would repeat."""
    if request.method == "POST" and form.is_valid():
        if form.repeats(mirror, request.user):
            messages.info(request, already_logged_text(None, f"This {what.split(' ', 1)[1]}"))
            return redirect(mirror)
        try:
            event = write(mirror, request.user, **form.cleaned_data)
        except ValidationError as exc:
            for message in exc.messages:
                form.add_error(None, message)
        else:
            messages.success(request, done(mirror, event) if callable(done) else done)
            return redirect(mirror)
    return render(request, "mirrors/form.html", {"form": form, "mirror": mirror, "what": what})


def _measurement_logged(mirror: Mirror, measurement) -> str:
    """Whether the measurement moved the decline fit: only band means since the latest coating are fitted, and only
    once there are enough of them (else why not, and what to measure next: ``services.no_estimate_text``)."""
    if measurement.wavelength_nm is not None:
        return (f"Measurement at {measurement.wavelength_nm:g} nm logged. It is listed below but not fitted: the "
                "decline is fitted to band means, so the fit and the recoat forecast are unchanged.")
    state = services.mirror_forecast(mirror)
    if state.coated_on is not None and measurement.measured_on < state.coated_on:
        return (f"Measurement logged. It is listed below but not fitted: it predates the coating of "
                f"{state.coated_on:%d %b %Y}, and the decline is fitted from that coating on.")
    if any(m.pk == measurement.pk for m in state.unlogged_measurements):
        said = (f"Measurement logged. It is listed below but not fitted: its dust-weighted exposure since the coating "
                f"is not known ({state.log_gap_text}).")
        return f"{said} {services.no_estimate_text(state)}" if state.fit is None else said
    same_day = _same_day_said(mirror, measurement.measured_on)
    if state.fit is None:
        return f"Measurement logged. {services.no_estimate_text(state)} {same_day}".strip()
    return f"Measurement logged; the decline fit is updated. {same_day}".strip()


@requires(TECHNICIAN)
def measurement_log(request, pk):
    mirror = _mirror(pk)
    form = MeasurementForm(request.POST or None, mirror=mirror, initial=_dated(mirror, "measured_on"))
    return _log_event(request, mirror, form, "a reflectance measurement", services.measurement_log,
                      _measurement_logged)


@requires(TECHNICIAN)
def cleaning_log(request, pk):
    mirror = _mirror(pk)
    form = CleaningForm(request.POST or None, mirror=mirror, initial=_dated(mirror, "cleaned_on"))
    return _log_event(request, mirror, form, "a cleaning", services.cleaning_log, _cleaning_logged)


def _restarted(logged: str, plans: list, day, none: str) -> str:
    """Say what a mirror event restarted: ``logged`` (what it did to the decline), then the plans that count
    again from ``day``, or ``none`` when the mirror has no such plan."""
    if not plans:
        return f"{logged} ({none})."
    # An event dated before a plan's latest service (entered late, from an old logbook) restarts nothing: the plan
    # counts from its latest service, as its due state (recomputed on logging) says.
    latest = dict(PlanStatus.objects.filter(plan__in=plans).values_list("plan_id", "last_service_on"))
    later = [p for p in plans if latest.get(p.pk) and latest[p.pk] > day]
    restarted = [p for p in plans if p not in later]
    said = []
    if restarted:
        names = ", ".join(p.name for p in restarted)
        restart = "plan {} restarts its" if len(restarted) == 1 else "plans {} restart their"
        said.append(f"the {restart.format(names)} counting from {day:%d %b %Y}")
    said += [f"the plan {p.name} keeps counting from its later service of {latest[p.pk]:%d %b %Y}" for p in later]
    return f"{logged}, and " + "; ".join(said) + "."


def _cleaning_logged(mirror: Mirror, event) -> str:
    said = _restarted("Cleaning logged; the decline fit counts its recovery",
                      services.plans_a_cleaning_restarts(mirror.subsystem), event.cleaned_on,
                      "this mirror has no cleaning service plan")
    return f"{said} {_same_day_said(mirror, event.cleaned_on)}".strip()


def _same_day_said(mirror: Mirror, day) -> str:
    """Which way round the fit takes the band measurements and a cleaning of the same ``day`` (a traceability review:
    a reflectance measured before a cleaning, counted after it, moved the fit); "" when the day has not both."""
    cleanings = mirror.cleanings.filter(cleaned_on=day).count()
    if not cleanings:
        return ""
    same_day = list(mirror.measurements.filter(measured_on=day, wavelength_nm__isnull=True, withdrawn_at__isnull=True))
    if not same_day:
        return ""
    before = sum(m.before_cleaning for m in same_day)
    after = len(same_day) - before
    what = "the cleaning" if cleanings == 1 else f"the {cleanings} cleanings"
    return (f"On {day:%d %b %Y} the fit counts {after} band measurement(s) as taken after {what} and {before} "
            "before (the measurement's \"Measured before that day's cleaning\"; a measurement entered wrongly so is "
            "withdrawn on this page and entered again).")


def _coating_logged(mirror: Mirror, event) -> str:
    later = mirror.coatings.filter(coated_on__gt=event.coated_on).order_by("-coated_on").first()
    if later is not None:  # an old coating entered late (a bad-input review was told the decline started from it)
        return (f"Coating of {event.coated_on:%d %b %Y} logged, in the mirror's history: the coating in force stays "
                f"the later one of {later.coated_on:%d %b %Y}, and the decline still runs from it.")
    said = _restarted("New coating logged; the decline starts again from it",
                      services.plans_a_coating_restarts(mirror.subsystem), event.coated_on,
                      "this mirror has no recoat service plan")
    # The strip-and-coat order that waited for it (workorders.selectors.coating_unlogged): a walk-through's technician
    # logged the coating and was left on this page with no way back to the order it had held.
    waiting = WorkOrder.objects.filter(recoat_plans__mirror=mirror, recoat_phase="coating", state=State.UNDERWAY)
    freed = [order for order in waiting.select_related("site").distinct() if not coating_unlogged(order)]
    if not freed:
        return said
    return format_html("{} {}", said, format_html_join(
        " ", '<a href="{}">{}</a> ({}) can now be finished.',
        ((order.get_absolute_url(), order.number, order.title) for order in freed)))


@requires(TECHNICIAN)
def coating_log(request, pk):
    mirror = _mirror(pk)
    form = CoatingForm(request.POST or None, initial=_dated(mirror, "coated_on", metal="al"))
    return _log_event(request, mirror, form, "a new coating", services.coating_log, _coating_logged)


def _window_form(request, mirror: Mirror, data) -> WindowForm:
    site = mirror.subsystem.telescope.site
    today = site_today(site)
    horizon = services.default_horizon_days(mirror, today) if data is None else 365
    return WindowForm(data, today=today, crew_days=site.crew_days, phases=services.recoat_phases_left(mirror).phases,
                      initial={"start": today, "horizon_days": horizon})


def _form_problems(form) -> str:
    """A refused form's problems in one line, each naming its field (``form_errors.names_field``)."""
    said = [str(e) for e in form.non_field_errors()]
    for field in form:
        said += [str(e) if names_field(e, field.label) else f"{field.label}: {e}" for e in field.errors]
    return " ".join(said)


@requires(VIEWER)
def recoat_planner(request, pk):
    """Coming nights shaded by moon and cost, the cheapest windows for the recoat, and the plan button."""
    mirror = _mirror(pk)
    form = _window_form(request, mirror, request.GET or None)
    site = mirror.subsystem.telescope.site
    # The recoat already in hand and the booked runs over it are said from the first visit, windows found or not.
    in_hand = services.recoat_in_hand(mirror)
    if in_hand:  # said with its days as its orders now stand
        services.with_days_out([in_hand], site_today(site))
    retired = services.retired_recoat_text(mirror)
    context = {
        "mirror": mirror, "site": site, "form": form, "in_hand": in_hand,
        "retired": retired, "successors": successors_of(mirror.subsystem) if retired else [],
        "in_hand_runs_over": services.runs_over_each_recoat(site, site_today(site)).get(in_hand.pk, []) if in_hand
        else [],
        "may_clean": services.orders_that_may_clean_text(services.orders_that_may_clean(mirror)),
        "phases_left": services.recoat_phases_left(mirror),
    }
    if form.is_bound and form.is_valid() and not retired:  # a retired mirror's page says why no window is offered
        try:
            context.update(services.recoat_windows(mirror, form.cleaned_data["start"],
                                                   form.cleaned_data["horizon_days"], form.phases()))
        except ValueError as exc:
            form.add_error(None, str(exc))
    return render(request, "mirrors/recoat.html", context)


@requires(ENGINEER)
def recoat_plan_create(request, pk):
    """Turn the window chosen on the planner into a recoat plan and its draft work orders."""
    mirror = _mirror(pk)
    if (visit := posted_only(request, reverse("mirror-recoat", args=[mirror.pk]))) is not None:
        return visit
    if retired := services.retired_recoat_text(mirror):  # sent from a page open before it was retired
        messages.error(request, f"No plan made: {retired}.")
        return redirect("mirror-recoat", pk=mirror.pk)
    form = _window_form(request, mirror, request.POST)
    if not form.is_valid():  # sent from an earlier day's page, or not from the planner: nothing is stored
        messages.error(request, f"No plan made: {_form_problems(form)} Find the windows again.")
        return redirect("mirror-recoat", pk=mirror.pk)
    # The page's phases as it showed them (a field each): the mirror came out, or was coated, since it was shown, and
    # the plan would be made for other work than the windows listed (a diff review: two orders made, unsaid).
    shown = {name for name in request.POST if name.startswith("phase_")}  # none sent: the phases' usual days
    if shown and shown != {f"phase_{i}" for i, _ in form.offered}:
        now = services.recoat_phases_left(mirror).text.rstrip(".") or "the mirror is back in its telescope"
        messages.error(request, f"No plan made: the recoat's phases have changed since the page was shown: {now}. "
                                "Find the windows again.")
        return redirect("mirror-recoat", pk=mirror.pk)
    phases = form.phases()
    try:
        found = services.recoat_windows(
            mirror, form.cleaned_data["start"], form.cleaned_data["horizon_days"], phases
        )["windows"]
    except ValueError as exc:
        messages.error(request, f"No plan made: {exc}.")
        return redirect("mirror-recoat", pk=mirror.pk)
    chosen = next((w for w in found if w["start"].isoformat() == request.POST.get("window")), None)
    if chosen is None:
        messages.error(request, "Choose one of the windows listed.")
        return redirect("mirror-recoat", pk=mirror.pk)
    # A window starting after the recoat plan is due asks first (a reviewer planned one five months late with the
    # mirror below its line all the while; the list only flagged it). The answer holds for that window only.
    due = services.recoat_due(mirror)
    if chosen["late"] and request.POST.get("late_confirmed") != chosen["start"].isoformat():
        late_by = (chosen["start"] - due.forecast_date).days
        sent = [(name, value) for name, value in request.POST.items()
                if name not in ("csrfmiddlewaretoken", "late_confirmed")]
        return render(request, "mirrors/recoat_late_question.html", {
            "mirror": mirror, "sent": sent, "window_start": chosen["start"].isoformat(),
            "back": reverse("mirror-recoat", args=[mirror.pk]) + "?" + urlencode(
                [(name, value) for name, value in sent if name != "window"]),
            "question": (
                f"The window from {chosen['start']:%a %d %b %Y} starts {late_by} day{pluralize(late_by)} after the "
                f"recoat plan is due ({due.forecast_date:%d %b %Y}: {due.reason.rstrip('.')}). The mirror stays below "
                "its recoat "
                "line, or past the plan's other limit, until the work is done. Plan it in this window anyway?"
            ),
        })
    try:
        plan = services.recoat_plan_create(mirror, chosen["start"], phases, chosen["cost"], request.user)
    except ValidationError as exc:
        messages.error(request, f"No plan made: {exc.messages[0]}.")
        return redirect("mirror-recoat", pk=mirror.pk)
    messages.success(
        request, f"Recoat planned {plan.starts_on:%d %b %Y} to {plan.ends_on:%d %b %Y}: "
        f"{plan.work_orders.count()} draft work orders made."
    )
    return redirect(mirror)


@requires(VIEWER)
def downtime_calendar(request, slug):
    site = get_object_or_404(Site, slug=slug)
    body = calendar_export.site_calendar(site, request.build_absolute_uri("/"))
    response = HttpResponse(body, content_type="text/calendar; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{site.slug}-planned-work.ics"'
    return response


@requires(VIEWER)
def coating_calculator(request):
    """Fresh-coating reflectance for a recipe over a band, flat or weighted by an uploaded response."""
    form = CalculatorForm(request.POST or None, request.FILES or None, initial={"metal": "al"})
    result = plot = None
    if request.method == "POST" and form.is_valid():
        d = form.cleaned_data
        try:
            # The form refused a file over the limit by its size; one byte more than the limit lets parse() say so too.
            response = response_csv.parse(d["response"].read(response_csv.MAX_BYTES + 1)) if d["response"] else None
            layers = [coating.Layer(x["material"], x["thickness_nm"]) for x in d["layers"]]
            result = coating.coating_curve(d["metal"], layers, d["from_nm"], d["to_nm"], d["step_nm"], response)
        except ValueError as exc:
            form.add_error(None, str(exc))
        else:
            plot = plots.curve_svg(result, described_by="coating-words")
    return render(request, "mirrors/coating.html", {"form": form, "result": result, "plot": plot})
