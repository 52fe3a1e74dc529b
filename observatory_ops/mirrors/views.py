import datetime as dt

import numpy as np
from django.contrib import messages
from django.db.models import Prefetch
from django.http import HttpResponse
from django.shortcuts import get_object_or_404, redirect, render

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import ENGINEER, TECHNICIAN, VIEWER, has_role
from observatory_ops.archive.history import changes
from observatory_ops.calc import coating, windows
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Site
from observatory_ops.workorders.models import WorkOrder

from . import calendar_export, plots, response_csv, services
from .forms import CalculatorForm, CleaningForm, CoatingForm, MeasurementForm, WindowForm
from .models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement


def _mirror(pk) -> Mirror:
    return get_object_or_404(Mirror.objects.select_related("subsystem__telescope__site"), pk=pk)


@requires(VIEWER)
def mirror_detail(request, pk):
    mirror = _mirror(pk)
    state = services.mirror_forecast(mirror)
    return render(
        request,
        "mirrors/detail.html",
        {
            "mirror": mirror,
            "site": mirror.subsystem.telescope.site,
            "state": state,
            "plot": plots.decline_svg(state),
            "train": services.throughput(services.telescope_mirrors(mirror)),
            "coatings": mirror.coatings.all(),
            "cleanings": mirror.cleanings.all(),
            "measurements": mirror.measurements.select_related("taken_by").order_by("-measured_on")[:40],
            "history": changes(mirror, limit=5),
            "history_label": "mirrors.mirror",
            "history_pk": mirror.pk,
            "plans": mirror.recoat_plans.prefetch_related(
                Prefetch("work_orders", queryset=WorkOrder.objects.order_by("planned_date", "pk"))
            ),
        },
    )


def _log_event(request, pk, form_class, date_field: str, what: str, create, done: str, **initial):
    """One form page for a dated mirror event (measurement, cleaning, coating); the date may not be ahead."""
    mirror = _mirror(pk)
    today = site_today(mirror.subsystem.telescope.site)
    form = form_class(request.POST or None, initial={date_field: today, **initial})
    if request.method == "POST" and form.is_valid():
        if form.cleaned_data[date_field] > today:
            form.add_error(date_field, f"The date cannot be after today ({today}).")
        else:
            create(mirror, form.cleaned_data)
            messages.success(request, done)
            return redirect(mirror)
    return render(request, "mirrors/form.html", {"form": form, "mirror": mirror, "what": what})


@requires(TECHNICIAN)
def measurement_log(request, pk):
    return _log_event(
        request, pk, MeasurementForm, "measured_on", "a reflectance measurement",
        lambda mirror, d: ReflectanceMeasurement.objects.create(mirror=mirror, taken_by=request.user, **d),
        "Measurement logged; the decline fit is updated.",
    )


@requires(TECHNICIAN)
def cleaning_log(request, pk):
    return _log_event(
        request, pk, CleaningForm, "cleaned_on", "a cleaning",
        lambda mirror, d: CleaningEvent.objects.create(mirror=mirror, **d), "Cleaning logged.",
    )


@requires(TECHNICIAN)
def coating_log(request, pk):
    return _log_event(
        request, pk, CoatingForm, "coated_on", "a new coating",
        lambda mirror, d: CoatingEvent.objects.create(mirror=mirror, **d),
        "New coating logged; the decline is now counted from it.", metal="al",
    )


@requires(VIEWER)
def recoat_planner(request, pk):
    """Coming nights shaded by moon and cost, the cheapest windows for the recoat, and the plan button."""
    mirror = _mirror(pk)
    site = mirror.subsystem.telescope.site
    today = site_today(site)
    data = request.POST if request.method == "POST" else (request.GET or None)
    # By default look no further than the day the mirror is forecast to cross its recoat line (late side).
    crossing = services.mirror_forecast(mirror, today).crossing_latest if data is None else None
    horizon = max(min((crossing - today).days, 3 * 366), 30) if crossing else 365
    form = WindowForm(data, initial={"start": today, "horizon_days": horizon})
    context = {"mirror": mirror, "site": site, "form": form, "phases": windows.RECOAT_PHASES}
    if form.is_bound and form.is_valid():
        phases = form.phases()
        try:
            days = windows.total_days(phases)
            costs = services.night_costs(site, form.cleaned_data["start"], form.cleaned_data["horizon_days"])
            found = services.best_windows(costs[0].night, np.array([c.cost for c in costs]), days)
        except ValueError as exc:
            form.add_error(None, str(exc))
        else:
            if request.method == "POST":
                if not has_role(request.user, ENGINEER):
                    return render(request, "access/forbidden.html", {"needed": ENGINEER}, status=403)
                chosen = next((w for w in found if w["start"].isoformat() == request.POST.get("window")), None)
                if chosen is None:
                    messages.error(request, "Choose one of the windows listed.")
                else:
                    plan = services.recoat_plan_create(mirror, chosen["start"], phases, chosen["cost"], request.user)
                    site_recompute(site)
                    messages.success(
                        request, f"Recoat planned {plan.starts_on} to {plan.ends_on}: "
                        f"{plan.work_orders.count()} draft work orders made."
                    )
                    return redirect(mirror)
            chosen_days = {w["start"] + dt.timedelta(days=i) for w in found[:1] for i in range(days)}
            worst = max((c.cost for c in costs if np.isfinite(c.cost)), default=1.0) or 1.0
            context.update(
                windows=found, days=days,
                calendar=[
                    {"night": c.night, "cost": c.cost, "moon": c.moon_illumination, "booked": c.booked,
                     "shade": min(c.cost / worst, 1.0) if np.isfinite(c.cost) else 1.0,
                     "blocked": not np.isfinite(c.cost), "chosen": c.night in chosen_days}
                    for c in costs
                ],
            )
    return render(request, "mirrors/recoat.html", context)


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
            response = response_csv.parse(d["response"].read()) if d["response"] else None
            layers = [coating.Layer(x["material"], x["thickness_nm"]) for x in d["layers"]]
            result = coating.coating_curve(d["metal"], layers, d["from_nm"], d["to_nm"], d["step_nm"], response)
        except ValueError as exc:
            form.add_error(None, str(exc))
        else:
            plot = plots.curve_svg(result)
    return render(request, "mirrors/coating.html", {"form": form, "result": result, "plot": plot})
