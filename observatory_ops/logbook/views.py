import csv
import datetime as dt
import itertools
import json

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.core.paginator import Paginator
from django.db import transaction
from django.db.models import F, Max, Min
from django.http import StreamingHttpResponse
from django.shortcuts import get_object_or_404, redirect, render
from django.urls import reverse
from django.utils import timezone
from django.utils.text import slugify

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import TECHNICIAN, VIEWER
from observatory_ops.exports import BYTE_ORDER_MARK, csv_response, download_refused, period, safe_cell, telescope_of
from observatory_ops.formats.calendar_words import why_no_such_date
from observatory_ops.planning import selectors
from observatory_ops.registry.models import Site, Subsystem
from observatory_ops.registry.services import successors_of
from observatory_ops.reliability.selectors import HOURS_WINDOW_DAYS

from . import nights_csv, services
from .forms import (
    TELESCOPE_RULE,
    CorrectionForm,
    NightForm,
    NightsUploadForm,
    ReadingForm,
    ReadingWithdrawForm,
    ServiceRecordForm,
)
from .models import NightUsage, Reading, ServiceRecord
from .quantities import usual_for_kind
from .selectors import (
    READINGS_CSV_HEADER,
    SERVICE_CSV_HEADER,
    closed_said,
    reading_already_logged,
    readings_csv_rows,
    service_already_logged,
    service_records_csv_rows,
)


def _form_errors_from(form, exc: ValidationError) -> None:
    for message in exc.messages:
        form.add_error(None, message)


def already_logged_text(when: dt.datetime | None, what: str) -> str:
    """The answer to a form sent twice (``selectors.RESENT_WITHIN``): nothing stored the second time."""
    at = f" at {when:%H:%M}" if when else ""
    return f"{what} was already logged{at}, with the same values (the form was sent twice); nothing was added."


@requires(VIEWER)
def service_records_csv(request, slug):
    """A site's service records from ``from`` to ``to`` (local dates, both included; default: the reliability page's
    12 months) as CSV, for the year-end review in a spreadsheet."""
    return _site_period_csv(request, slug, "service-records", SERVICE_CSV_HEADER, service_records_csv_rows)


@requires(VIEWER)
def readings_csv(request, slug):
    """A site's readings taken from ``from`` to ``to`` (as above) as CSV, withdrawn ones with who withdrew them and
    why."""
    return _site_period_csv(request, slug, "readings", READINGS_CSV_HEADER, readings_csv_rows)


def _site_period_csv(request, slug, what: str, header, rows_of):
    """A site's download of ``what`` over a period (``from``, ``to``: the site's dates, both included; default: the
    reliability page's 12 months) and for one telescope or all (``telescope``): ``rows_of(site, first, last,
    telescope)`` under ``header``; a period or a telescope it cannot take is refused in words."""
    site = get_object_or_404(Site, slug=slug)
    today = services.site_today(site)
    back = reverse("site-reliability", args=[site.slug])
    try:
        first, last = period(request.GET, today - dt.timedelta(days=HOURS_WINDOW_DAYS - 1), today)
    except ValueError as exc:
        return download_refused(request, str(exc), back)
    try:
        telescope = telescope_of(request.GET, site)
    except ValueError as exc:  # not the period: the page said "The period asked for cannot be read" (a handover review)
        return download_refused(request, str(exc), back, what="The telescope asked for cannot be used")
    named = f"{site.slug}-{slugify(telescope.name)}" if telescope else site.slug
    return csv_response(f"{named}-{what}-{first}-to-{last}.csv", header, rows_of(site, first, last, telescope))


@requires(TECHNICIAN)
def service_log(request, pk):
    subsystem = get_object_or_404(Subsystem.objects.select_related("telescope__site"), pk=pk)
    site = subsystem.telescope.site
    form = ServiceRecordForm(request.POST or None, subsystem=subsystem, by=request.user,
                             initial={"performed_on": services.site_today(site)})
    # From a plan's "Log service for this plan": the plan chosen, and its name as the summary to start from.
    plan = request.GET.get("plan", "")
    chosen = form.fields["plan"].queryset.filter(pk=plan).first() if plan.isdigit() else None
    if chosen:
        form.initial.update(plan=chosen.pk, summary=chosen.name)
    if request.method == "POST" and form.is_valid():
        data = form.cleaned_data
        repeated = service_already_logged(subsystem, request.user, data["plan"], data["performed_on"], data["summary"],
                                          data["hours_spent"], data["findings"], timezone.now())
        if repeated:
            messages.info(request, already_logged_text(repeated.created_at.astimezone(site.zone), "This service work"))
            return redirect(subsystem)
        try:
            with transaction.atomic():
                services.service_record_log(
                    subsystem, data["plan"], data["performed_on"], request.user, data["summary"],
                    hours_spent=data["hours_spent"], findings=data["findings"],
                    repaired_failure=data["repaired_failure"],
                )
                method = data.get("cleaning_method")
                # Once a day on the mirror's record: a cleaning logged on the mirror page first is not logged again
                # (a diff review: the fit then saw two).
                cleaned = method and form.mirror.cleanings.filter(cleaned_on=data["performed_on"]).exists()
                if method and not cleaned:
                    from observatory_ops.mirrors.services import cleaning_log  # the mirrors build on the logbook

                    cleaning_log(form.mirror, request.user, data["performed_on"], method, note=data["summary"][:200])
        except ValidationError as exc:
            _form_errors_from(form, exc)
        else:
            if cleaned:
                messages.info(request, f"A cleaning of {data['performed_on']:%d %b %Y} was already on the mirror's "
                                       "record: it was not logged twice.")
            elif method:
                messages.info(request, "The cleaning is on the mirror's record: its reflectance fit counts it.")
            messages.success(request, "Service work logged" + (
                f" in the history of {subsystem.name}, retired on {subsystem.retired_on:%d %b %Y}: a retired "
                "subsystem's plans are not counted, so no plan's counting restarts." if subsystem.retired_on
                else _plan_counts_from(data["plan"], data["performed_on"])
                if data["plan"] else " (ad hoc work: no plan's counting restarts)."
            ) + (_failure_counted(subsystem, data["performed_on"]) if data["repaired_failure"] else ""))
            return redirect(subsystem)
    return render(request, "logbook/service_form.html", {"form": form, "subsystem": subsystem, "site": site,
                                                         **_retired(subsystem)})


def _plan_counts_from(plan, day: dt.date) -> str:
    """Where the plan counts from once work of ``day`` is logged: that day, or its later service (work entered late
    from a paper log restarts nothing: a diff review was told "counts again from 01 Mar 2025")."""
    last = max(plan.service_records.filter(corrected_by__isnull=True, void=False).values_list("performed_on",
                                                                                           flat=True), default=None)
    if last is not None and last > day:
        return f"; the plan '{plan.name}' counts on from its later service of {last:%d %b %Y}."
    return f"; the plan '{plan.name}' counts again from {day:%d %b %Y}."


def _failure_counted(subsystem: Subsystem, day: dt.date) -> str:
    """What the reliability page does with a repair logged on ``day``: counts its failure on the night before, or
    leaves it out and why (``reliability.selectors.failure_left_out``)."""
    from observatory_ops.reliability.selectors import failure_left_out, failure_night  # reliability reads the logbook

    night = failure_night(day)
    if reason := failure_left_out(subsystem, day):
        return (f" The reliability page leaves its failure (night of {night:%d %b %Y}) out of the failures of "
                f"{subsystem.name}: {reason}.")
    return f" The reliability page counts it as a failure on the night of {night:%d %b %Y}."


def _retired(subsystem: Subsystem) -> dict:
    """What the logging pages say of a retired subsystem: where its work goes now (``successors``)."""
    return {"successors": successors_of(subsystem) if subsystem.retired_on else []}


@requires(TECHNICIAN)
def service_correct(request, pk):
    original = get_object_or_404(ServiceRecord.objects.select_related("subsystem__telescope__site", "plan"), pk=pk)
    initial = {
        "performed_on": original.performed_on, "hours_spent": original.hours_spent,
        "summary": original.summary, "findings": original.findings,
    }
    form = CorrectionForm(request.POST or None, initial=initial, original=original)
    if request.method == "POST" and form.is_valid():
        data = form.cleaned_data
        try:
            services.service_record_correct(
                original, request.user, data["summary"], performed_on=data["performed_on"],
                hours_spent=data["hours_spent"], findings=data["findings"], void=data["void"], reason=data["reason"],
            )
        except ValidationError as exc:
            _form_errors_from(form, exc)
        else:
            messages.success(request, "Correction logged; the original record is kept and marked as superseded." + (
                _failure_counted(original.subsystem, data["performed_on"])
                if original.repaired_failure and not data["void"] else ""))
            return redirect(original.subsystem)
    return render(request, "logbook/correction_form.html", {"form": form, "original": original})


@requires(TECHNICIAN)
def reading_log(request, pk):
    subsystem = get_object_or_404(Subsystem.objects.select_related("telescope__site"), pk=pk)
    site = subsystem.telescope.site
    with timezone.override(site.zone):  # the form's times are the site's local times
        usual = selectors.watched_quantities(subsystem) | usual_for_kind(subsystem.kind)
        form = ReadingForm(request.POST or None, watched=usual, kind_label=subsystem.get_kind_display(),
                           limits=selectors.reading_limits(subsystem), mirror=getattr(subsystem, "mirror", None),
                           site=site, subsystem=subsystem)
        if request.method == "POST" and form.is_valid():
            data = form.cleaned_data
            if reading_already_logged(subsystem, request.user, data["quantity"], data["value"], data["taken_at"],
                                      data["note"]):
                messages.info(request, already_logged_text(None, "This reading"))
                return redirect(subsystem)
            try:
                services.reading_log(
                    subsystem, data["quantity"], data["value"], data["taken_at"], request.user, data["note"]
                )
            except ValidationError as exc:
                _form_errors_from(form, exc)
            else:
                to_mirror = data["quantity"] == "reflectance" and hasattr(subsystem, "mirror")
                messages.success(request, "Reading logged" + (
                    "; it is also among the mirror page's measurements, in its decline fit." if to_mirror else "."
                ))
                if repeated := form.fields["taken_at"].repeated:  # the clocks went back over it: which one is said
                    messages.warning(request, (
                        f"{repeated:%H:%M} came twice on {repeated:%d %b %Y} (the clocks went back): it was taken "
                        f"as the first, {repeated:%H:%M %Z}. If it was the second, an hour later, withdraw this "
                        "reading and log it again with a note saying so."
                    ))
                unwatched = selectors.unwatched_reading_note(subsystem, data["quantity"])
                if unwatched:
                    messages.warning(request, unwatched)
                early = selectors.reading_before_counting_note(
                    subsystem, data["quantity"], data["taken_at"].astimezone(site.zone).date()
                )
                if early:
                    messages.warning(request, early)
                return redirect(subsystem)
        return render(request, "logbook/reading_form.html", {"form": form, "subsystem": subsystem, "site": site,
                                                             **_retired(subsystem)})


@requires(TECHNICIAN)
def reading_withdraw(request, pk):
    """Withdraw a reading logged in error, with the reason: it stays listed, marked, and counts no more."""
    reading = get_object_or_404(Reading.objects.select_related("subsystem__telescope__site", "taken_by"), pk=pk)
    form = ReadingWithdrawForm(request.POST or None)
    if request.method == "POST" and form.is_valid():
        try:
            services.reading_withdraw(reading, request.user, form.cleaned_data["reason"])
        except ValidationError as exc:
            _form_errors_from(form, exc)
        else:
            messages.success(request, "Reading withdrawn: it stays listed, marked, and no plan's trend counts it.")
            return redirect(reading.subsystem)
    return render(request, "logbook/reading_withdraw.html",
                  {"form": form, "reading": reading, "site": reading.subsystem.telescope.site})


#: How many removed nights the log page lists under the log (the admin's history keeps them all).
REMOVED_SHOWN = 20

#: The decimals the log page writes each figure with at least: those the demo stores them to (open hours to 0.01 h;
#: travel and PM10 to 0.1; humidity whole). A figure stored with more is written with all of them (``_as_stored``),
#: so what is added up from the page is what is stored. The counts are whole numbers.
SHOWN_DECIMALS = {"open_hours": 2, "axis1_travel_deg": 1, "axis2_travel_deg": 1, "pm10_ugm3": 1, "humidity_pct": 0}


def _as_stored(value: float | None, decimals: int) -> str | None:
    """A stored figure with at least ``decimals`` decimals and as many more as it holds, never rounded: 38.2 -> "38.2",
    38.0 -> "38.0", 38.25 -> "38.25" (for 1 decimal). None stays None: the page says what a figure not given means."""
    if value is None:
        return None
    for places in range(decimals, 25):
        text = f"{value:.{places}f}"
        if float(text) == value:
            return text
    return nights_csv.cell(value)  # a figure too small for 24 decimals: as the CSV writes it


def _figures_shown(night) -> dict[str, str | None]:
    """The figures of a night (stored, or removed: its history row) as the log page writes them."""
    return {name: _as_stored(getattr(night, name), decimals) for name, decimals in SHOWN_DECIMALS.items()}


@requires(VIEWER)
def nights_list(request, slug):
    site = get_object_or_404(Site, slug=slug)
    # Each night the whole site's row first, then the telescopes' own.
    nights = NightUsage.objects.filter(site=site).select_related("telescope").order_by(
        "-night", F("telescope__name").asc(nulls_first=True)
    )
    page = Paginator(nights, 60).get_page(request.GET.get("page"))
    closed = closed_said(site, list(page))
    for night in page:
        night.left_out = services.left_out_shown(night)
        night.shown = _figures_shown(night)
        night.closed = closed.get(night.pk, "")
    # Nights removed as stored by mistake (the admin's "remove" action), newest first, from their history.
    removed = NightUsage.history.filter(site=site, history_type="-").select_related("telescope", "history_user")
    removed_shown = list(removed.order_by("-history_date")[:REMOVED_SHOWN])
    for night in removed_shown:
        night.shown = _figures_shown(night)
    return render(request, "logbook/nights_list.html", {
        "site": site, "page": page, "whole_site": services.WHOLE_SITE, "telescope_rule": TELESCOPE_RULE,
        "from_site": services.FIGURE_FROM_SITE, "removed": removed_shown, "removed_count": removed.count(),
    })


class _LineWritten:
    """Where ``csv.writer`` writes a row to be streamed: the row's line comes back from ``writerow``."""

    def write(self, line: str) -> str:
        return line


#: How many nights the download reads from the database at a time (its memory stays that of one chunk).
NIGHTS_CSV_CHUNK = 2000


@requires(VIEWER)
def nights_csv_download(request, slug):
    """A site's whole nightly log as a nights CSV (``nights_csv``, the import's format): every column, the whole site's
    rows and each telescope's own, each night's site row first, each row the cells that read back as that night
    (``nights_csv.cells_of``), so the file imports again unchanged. Named by the first and last night logged;
    streamed, ``NIGHTS_CSV_CHUNK`` nights read at a time."""
    site = get_object_or_404(Site, slug=slug)
    nights = NightUsage.objects.filter(site=site)
    span = nights.aggregate(first=Min("night"), last=Max("night"))
    if span["first"] is None:
        messages.info(request, f"No night is logged at {site.name} yet: there is no log to download.")
        return redirect("nights-list", slug=site.slug)
    # The nights of the span the file is named by, should one be logged while it streams.
    rows = nights.filter(night__range=(span["first"], span["last"])).select_related("telescope").order_by(
        "night", F("telescope__name").asc(nulls_first=True)
    )
    writer = csv.writer(_LineWritten())
    lines = itertools.chain(
        [BYTE_ORDER_MARK + writer.writerow(nights_csv.COLUMNS)],  # as every CSV download (``exports.csv_response``)
        # safe_cell: a telescope's name that a spreadsheet would take for a formula is written with an apostrophe.
        (writer.writerow([safe_cell(cells[name]) for name in nights_csv.COLUMNS])
         for cells in map(nights_csv.cells_of, rows.iterator(chunk_size=NIGHTS_CSV_CHUNK))),
    )
    response = StreamingHttpResponse(lines, content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = (
        f'attachment; filename="{nights_csv.download_name(site.slug, span["first"], span["last"])}"')
    return response


def _night_asked(request, site, telescopes: list[str]) -> tuple[dict, NightUsage | None]:
    """The night form's first values for the night and telescope the address asks for (``?night=YYYY-MM-DD``,
    ``&telescope=NAME``), with what is stored of that night (``loaded_as``: "" when the form shows nothing stored),
    and the stored night (None if it is not stored). What is asked is kept where it can be; a message says what
    cannot be, and a night asked for that is not stored."""
    # The night most likely typed in: the night before the site's today, which has ended once the day has dawned (in the
    # afternoon the present night has not begun: a review logged last night's figures at 18:15 under tonight's date,
    # unwarned); between local midnight and dawn it is the night still going on.
    initial = {"night": (services.site_today(site) - dt.timedelta(days=1)).isoformat(), "loaded_as": ""}
    night = None
    if asked := request.GET.get("night", "").strip():
        written = nights_csv.WRITTEN_DATE.fullmatch(asked)
        problem = why_no_such_date(*map(int, written.groups())) if written else None
        if not written:
            messages.warning(request, f"\"{asked}\" is not a date as YYYY-MM-DD: a blank form instead.")
        elif problem:
            messages.warning(request, f"{asked} is no such date ({problem}): a blank form instead.")
        else:
            night = dt.date.fromisoformat(asked)
            initial["night"] = asked
    whose = ""
    if asked_whose := request.GET.get("telescope", "").strip():
        # The name as the site registers it, case aside, as the nights format reads it.
        whose = {name.casefold(): name for name in telescopes}.get(asked_whose.casefold())
        if whose is None:
            its = f"its telescopes are {', '.join(telescopes)}" if telescopes else "it has no telescope registered"
            messages.warning(request, f"{site.name} has no telescope \"{asked_whose}\" ({its}): choose whose night "
                                      "this is below.")
        else:
            initial["telescope"] = whose
    if night is None or whose is None:
        return initial, None
    mine = {"telescope__name": whose} if whose else {"telescope__isnull": True}
    stored = NightUsage.objects.filter(site=site, night=night, **mine).select_related("telescope").first()
    if stored:
        initial = nights_csv.cells_of(stored)
        initial["loaded_cells"] = json.dumps({name: cell for name, cell in initial.items()
                                              if name not in ("night", "telescope")})
    else:
        messages.info(request, f"No night of {night} ({whose or services.WHOLE_SITE}) is stored yet: this form logs "
                               "it as a new night.")
    return initial | {"loaded_as": services.night_stored_token(site, night, whose)}, stored


@requires(TECHNICIAN)
def night_log(request, slug):
    """Type in one night, or correct one (``?night=YYYY-MM-DD``, with ``&telescope=NAME`` for a telescope's own
    night, fills the form with what is stored). Figures stored that the page did not show (changed since it was
    loaded, or a night already stored typed into a blank form) are shown before the form's go over them."""
    site = get_object_or_404(Site, slug=slug)
    telescopes = list(site.telescopes.order_by("name").values_list("name", flat=True))
    initial, stored = _night_asked(request, site, telescopes) if request.method != "POST" else ({}, None)
    form = NightForm(request.POST or None, initial=initial, telescopes=telescopes)
    if request.method == "POST" and form.is_valid():
        record = form.record()
        asked = json.dumps(record, sort_keys=True)  # the figures typed: a tick holds for these only
        if not form.confirmed_for(asked) and (questions := services.night_questions(site, record)):
            form.ask(questions, asked)
    if request.method == "POST" and form.is_valid():
        stored_now = ""

        def approve(changes: list[services.NightChange]) -> bool:  # asked inside the write, the night locked
            nonlocal stored_now
            stored_now = services.night_stored_token(site, changes[0].night, changes[0].telescope)
            return stored_now == form.cleaned_data["loaded_as"]

        report = services.nights_ingest(
            site, [record], source=NightUsage.Source.FORM, by=request.user, reason="typed in on the log page",
            approve=approve,
        )
        for problem in report.errors:
            form.refuse(problem)
        if not report.errors and not report.stored:
            form.stored_unseen(report.changes, stored_now)
            whose = report.changes[0].telescope
            mine = {"telescope__name": whose} if whose else {"telescope__isnull": True}
            # The page goes on correcting that stored night (its heading said "Log a night").
            stored = NightUsage.objects.filter(site=site, night=report.changes[0].night, **mine).first()
        elif not report.errors:  # the summary names whose night it is wherever that could be mistaken
            messages.success(request, f"Night {form.cleaned_data['night']}: {report.summary}")
            return redirect("nights-list", slug=site.slug)
    return render(request, "logbook/night_form.html", {
        "site": site, "form": form, "stored": stored, "whole_site": services.WHOLE_SITE,
        "from_site": services.FIGURE_FROM_SITE,
    })


#: Where the session keeps a file whose changes to stored nights the import page asks to confirm: (site id, the
#: changes' token, the file's text), so confirming needs no file chosen again. One at a time, per signed-in person.
_PENDING_IMPORT = "nights_import_pending"


@requires(TECHNICIAN)
def nights_import(request, slug):
    """Import a nights CSV into this site. A file whose name is the log's download name of another site of this
    installation (``services.other_site_named``) is not read: the page says whose log it is and offers a box that,
    ticked with the same file chosen again, imports it all the same (``NightsUploadForm.other_site_accepted``). Once
    answered, the answer stays with the page for that file's name: the file corrected after a refusal, or chosen
    again, is not asked about a second time."""
    site = get_object_or_404(Site, slug=slug)
    pending = request.session.get(_PENDING_IMPORT)
    kept = pending if pending and pending[0] == site.pk else None
    form = NightsUploadForm(request.POST or None, request.FILES or None, kept_token=kept[1] if kept else "",
                            site_name=site.name)
    report = other_site = None
    if request.method == "POST" and form.is_valid():
        data = form.cleaned_data
        chosen = data["file"]
        # A file chosen replaces the kept one (if any); a question about it stores nothing and keeps nothing either.
        request.session.pop(_PENDING_IMPORT, None)
        other_site = services.other_site_named(site, chosen.name) if chosen else None
        if other_site and not form.other_site_accepted(chosen.name):
            messages.warning(
                request, f"Nothing was stored: the file's name, {chosen.name}, says it is the log of "
                f"{other_site.name}, and this is {site.name}'s import page. To import it into {site.name} all the "
                "same, tick the box below and choose the same file again.",
            )
            form = NightsUploadForm(initial={"skip_bad": data["skip_bad"], "asked_file": chosen.name},
                                    site_name=site.name)
        else:
            # Answered for this file: kept ticked for its name on the page that follows (the form's help says so).
            answered = {"asked_file": chosen.name, "other_site": True} if other_site else {}
            upload = chosen.read() if chosen else kept[2].encode("utf-8")
            report = services.nights_import(
                site, upload, skip_bad=data["skip_bad"], by=request.user, confirmed=data["confirm"]
            )
            if report.confirm_token:
                request.session[_PENDING_IMPORT] = (site.pk, report.confirm_token, upload.decode("utf-8"))
            # The result is said once, by these messages; the report's panel below holds only its details.
            if report.file_problem:
                messages.error(request, report.summary)
            elif report.errors:
                messages.error(request, f"Import refused: {report.summary}")
            elif report.confirm_token:
                messages.warning(request, report.summary)
            else:
                messages.success(request, f"Import done: {report.summary}")
            # Browsers never keep a chosen file: the session keeps the one whose changes the page asks to confirm, and
            # the form carries their token; otherwise a plain import, the token sent (if any) spent or refused with it.
            form = NightsUploadForm(initial={"skip_bad": data["skip_bad"], "confirm": report.confirm_token, **answered},
                                    kept_token=report.confirm_token, site_name=site.name)
            if not report.errors:
                other_site = None  # the link to its own site's import page only beside a refusal
    return render(
        request,
        "logbook/nights_import.html",
        {
            "site": site, "form": form, "report": report, "other_site": other_site,
            "columns": nights_csv.COLUMN_SPECS,
            # The example shows the whole site's row and the same night of two of the site's telescopes.
            "example": nights_csv.example_csv(site.telescopes.order_by("name").values_list("name", flat=True)[:2]),
            "telescope_rule": TELESCOPE_RULE, "earliest": nights_csv.earliest_accepted(services.latest_night(site)),
        },
    )
