import datetime as dt
import json

from django import forms
from django.conf import settings
from django.utils import timezone

from observatory_ops.archive.history import person
from observatory_ops.formats.plain_numbers import decimal_comma_hint, full_width_hint
from observatory_ops.planning.models import ServicePlan
from observatory_ops.registry.services import retired_work_problem

from . import nights_csv, services
from .models import ServiceRecord
from .quantities import QUANTITIES, QUANTITY_CHOICES, value_problem
from .selectors import service_already_logged

#: Hours above this many times the estimate are asked about before they are logged (the service form, against its
#: plan's estimate) or recorded (a work order's finish form, against the order's): more often minutes typed for hours,
#: or a slip of the keys, than work that ran so long. Our own factor, as the reading form's unit slip
#: (``UNIT_SLIP_FACTOR``): common practice, no published source.
HOURS_QUESTION_FACTOR = 10


class QuestionedValueMixin:
    """A value the form questions (far beyond a limit, above a mirror's fresh coating) is kept only when its box,
    ``value_confirmed``, is ticked on the page that asked about that very value: the page carries what it asked about
    in ``questioned``, and a value changed after the tick is asked about again with the box cleared. The finish form
    ties its questioned figures to their values the same way (``workorders.views.work_order_finish``)."""

    def confirmed_for(self, asked: str) -> bool:
        """Whether the person ticked the box on a page that asked about ``asked`` (the questioned fields' values)."""
        data = self.cleaned_data
        return bool(data.get("value_confirmed")) and data.get("questioned") == asked

    def ask_again(self, asked: str) -> None:
        """Carry ``asked`` in the page that shows the question, and clear the box: a tick is for this value only."""
        self.data = self.data.copy()
        self.data[self.add_prefix("questioned")] = asked
        self.data.pop(self.add_prefix("value_confirmed"), None)


def before_in_service(subsystem, day: dt.date, planned: bool, repair: bool) -> str:
    """The question asked of work dated ``day`` near or before the day ``subsystem`` entered service here: done for a
    plan (``planned``) before that day, the plan would count the nights of what the unit replaced; the repair of a
    failure (``repair``) whose night (the night before ``day``) is on or before that day, the reliability page takes
    it for the failure of the unit replaced and leaves it out (``reliability.selectors.REPLACED_UNIT``, by the same
    rule). "" when nothing is asked. A forecast review logged a service months before a new brake was fitted: it
    became the plan's baseline without a word; a reliability review logged a repair so, and it left the failure count
    unsaid."""
    since = subsystem.in_service_since
    if since is None:
        return ""
    said = []
    if planned and day < since:
        said.append(f"the plan would count this telescope's nights from {day:%d %b %Y}, nights of what it replaced")
    if repair and day - dt.timedelta(days=1) <= since:
        said.append(f"the reliability page would take the failure (night of {day - dt.timedelta(days=1):%d %b %Y}) for "
                    "one of the unit it replaced, and leave it out")
    if not said:
        return ""
    when = ("is before the day" if day < since else "is the day" if day == since else "is the day after the day")
    return (f"{day:%d %b %Y} {when} {subsystem.name} entered service here ({since:%d %b %Y}): "
            f"{'; and '.join(said)}.")


class ServiceRecordForm(QuestionedValueMixin, forms.Form):
    plan = forms.ModelChoiceField(
        queryset=ServicePlan.objects.none(), required=False,
        help_text="The plan this work fulfils; its counting restarts from the date below. Leave empty for ad hoc work.",
    )
    performed_on = forms.DateField(widget=forms.DateInput(attrs={"type": "date"}), help_text="Local date of the work.")
    hours_spent = forms.FloatField(
        min_value=0, max_value=1000, required=False, label="Hours spent (person-hours)",
        help_text="Everyone's hours on the work added up (two people for 3 hours is 6). Leave empty if not known (a "
        "past service entered from memory): no hours are made up for it.",
    )
    summary = forms.CharField(max_length=200)
    findings = forms.CharField(widget=forms.Textarea, required=False, max_length=10000)
    repaired_failure = forms.BooleanField(
        required=False, label="This work repaired a failure",
        help_text="A fault fixed without a work order, on the spot or entered afterwards: the reliability page counts "
        "it as a failure on the night before this date, and its hours as corrective.",
    )
    value_confirmed = forms.BooleanField(
        required=False, label="Log it as entered",
        help_text="Asked only for hours far above the plan's estimate, a second service of the plan on one day, a date "
        "before the subsystem entered service (or a repair up to the day after), a date before the plan's given last "
        "service, or a plan with a work order still open.",
    )
    questioned = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, subsystem, by=None, **kwargs):
        """``by``: the person logging, whose form sent again is said to be logged already (``selectors
        .service_already_logged``, in the view), not asked about as a second service."""
        super().__init__(*args, **kwargs)
        self.subsystem, self.by = subsystem, by
        self.site = subsystem.telescope.site
        self.fields["plan"].queryset = subsystem.plans.filter(active=True)
        if subsystem.retired_on:  # its plans are not counted (its history entered late restarts none of them)
            self.fields["plan"].help_text = ("The plan this work was done for. The subsystem is retired, so no plan's "
                                             "counting restarts. Leave empty for ad hoc work.")
        from observatory_ops.mirrors.models import CleaningEvent, Mirror  # the mirrors build on the logbook

        self.mirror = Mirror.objects.filter(subsystem=subsystem).first()
        if self.mirror is not None:
            # A year's review logged the mirror's cleaning plan here all year: the cleaning never reached the mirror's
            # record, and its reflectance fit and recoat forecast went on as if it had never been cleaned.
            self.fields["cleaning_method"] = forms.ChoiceField(
                required=False, label="Mirror cleaning in this work",
                choices=[("", "the mirror was not cleaned"), *CleaningEvent.Method.choices],
                help_text="How the mirror was cleaned, if it was (in any work on it): the cleaning goes on the "
                "mirror's record, whose reflectance fit counts its recovery, once a day. A cleaning plan's service "
                "must say it.",
            )
            self.order_fields(["plan", "performed_on", "cleaning_method"])

    def clean(self):
        """Asked about before the record is logged, each beside its field (``QuestionedValueMixin``: kept with the box
        ticked on the page that asked): hours above ``HOURS_QUESTION_FACTOR`` times the plan's estimate (minutes typed
        for hours: the reliability page's hours would carry them), a service of the plan already logged that day (a
        second press, or the same work entered twice), a date before the subsystem entered service (its plan would
        count the nights of what it replaced), and a plan a work order still to do holds (that order would stay open,
        and its work be done twice)."""
        from observatory_ops.workorders.models import State, WorkOrder  # the work orders build on the logbook

        data = super().clean()
        plan, day, hours = data.get("plan"), data.get("performed_on"), data.get("hours_spent")
        if plan is not None and self.mirror is not None:
            self._mirror_work(plan, data.get("cleaning_method", ""))
        repair = data.get("repaired_failure", False)
        if day is None or (plan is None and not repair):  # ad hoc work that repaired nothing: nothing to ask
            return data
        asked = f"{plan.pk if plan else ''}|{day}|{hours!r}|{repair}"  # a tick is for these, the repair box too
        if self.confirmed_for(asked) or service_already_logged(
            self.subsystem, self.by, plan, day, data.get("summary", ""), hours, data.get("findings", ""), timezone.now()
        ):
            return data
        keep = 'If it is right, tick "Log it as entered" and save again.'
        estimate = plan.estimated_hours if plan else None
        if hours is not None and estimate and hours > HOURS_QUESTION_FACTOR * estimate:
            self.add_error("hours_spent", f"{hours:g} h is {hours / estimate:,.0f} times the plan's estimate of "
                                          f"{estimate:g} h: were minutes typed for hours? {keep}")
        same_day = plan and (ServiceRecord.objects.filter(plan=plan, performed_on=day, corrected_by__isnull=True,
                                                          void=False).select_related("performed_by").first())
        if same_day:
            self.add_error("performed_on", (
                f"A service of \"{plan.name}\" is already logged on {day:%d %b %Y} ({same_day.summary}, by "
                f"{person(same_day.performed_by)}): is this a second one? {keep}"))
        # Each question said, beside the other on the same field: one tick answers what the page shows (a diff review's
        # tick on "a second one?" let a date before the unit entered service through unseen).
        if question := before_in_service(self.subsystem, day, plan is not None, repair):
            self.add_error("performed_on", f"{question} {keep}")
        if (plan is not None and plan.counting_from_given and day < plan.counting_from
                and not self.subsystem.retired_on  # a retired subsystem's plans count nothing: history only
                and not plan.service_records.filter(corrected_by__isnull=True, void=False).exists()):
            # A diff review logged a service of June on a plan given November as its last service: the plan counted
            # from June and came overdue at once, without a word.
            self.add_error("performed_on", (
                f"{day:%d %b %Y} is before {plan.counting_from:%d %b %Y}, given as the plan's last service: logged, "
                f"the plan would count from {day:%d %b %Y} instead (a service record stands before a given date), and "
                f"may come due at once. If {plan.counting_from:%d %b %Y} was a service too, log that one as well. "
                f"{keep}"))
        held = [] if plan is None else list(
            WorkOrder.objects.filter(items__plan=plan, state__in=(State.DRAFT, State.ISSUED, State.UNDERWAY))
            .distinct().order_by("pk"))
        if held:
            orders = ", ".join(f"{o.number} ({o.get_state_display()})" for o in held)
            self.add_error("plan", (
                f"Work order{'s' if len(held) > 1 else ''} {orders} {'are' if len(held) > 1 else 'is'} still to do "
                f"for this plan: log its work by finishing the order. Log it here only for work done outside the "
                f"order, then withdraw the order on its page. {keep}"))
        if any(self.has_error(name) for name in ("hours_spent", "performed_on", "plan")):
            self.ask_again(asked)
        return data

    def _mirror_work(self, plan: ServicePlan, method: str) -> None:
        """A mirror's recoat plan is served by logging the new coating on the mirror page (its metal and overcoats
        start the decline fit again, and it restarts the plan); a cleaning plan asks how the mirror was cleaned, and
        the cleaning goes on the mirror's record with the service (``views.service_log``)."""
        from observatory_ops.mirrors.services import plans_a_cleaning_restarts, recoat_plans

        if plan in recoat_plans(self.subsystem):
            self.add_error("plan", (
                f"\"{plan.name}\" is served by a new coating: log it on the mirror page "
                f"({self.mirror.get_absolute_url()}), where its metal and overcoats start the reflectance fit again "
                "and restart this plan. Logged here, the fit would go on from the old coating."))
        elif plan in plans_a_cleaning_restarts(self.subsystem) and not method:
            self.add_error("cleaning_method", (
                f"\"{plan.name}\" cleans the mirror: say how it was cleaned, so that the cleaning goes on the mirror's "
                "record and its reflectance fit counts the recovery."))

    def clean_performed_on(self):
        performed_on = self.cleaned_data["performed_on"]
        problem = services.service_date_problem(self.site, performed_on)
        if problem:
            raise forms.ValidationError(problem[0].upper() + problem[1:] + ".")
        if retired := retired_work_problem(self.subsystem, performed_on, "Service work"):
            raise forms.ValidationError(retired)
        return performed_on


class CorrectionForm(QuestionedValueMixin, forms.Form):
    performed_on = forms.DateField(widget=forms.DateInput(attrs={"type": "date"}))
    hours_spent = forms.FloatField(
        min_value=0, max_value=1000, required=False, help_text="Empty: as the original record gives them.",
    )
    summary = forms.CharField(max_length=200)
    findings = forms.CharField(widget=forms.Textarea, required=False, max_length=10000)
    void = forms.BooleanField(required=False, label="Withdraw the original record (it was logged in error)")
    reason = forms.CharField(
        max_length=200, label="Why it is corrected",
        help_text="What was wrong with the original, e.g. hours typed for the wrong day; kept with your name and the "
                  "time, beside both records.",
    )
    value_confirmed = forms.BooleanField(
        required=False, label="Save it as entered",
        help_text="Asked only for a date before the subsystem entered service (or a repair up to the day after), as "
        "the service form asks.",
    )
    questioned = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, original=None, **kwargs):
        """``original``: the record corrected, whose new date is held to a new record's bounds, said beside the field
        (``services.service_record_correct`` refuses it too)."""
        super().__init__(*args, **kwargs)
        self.original = original

    def clean_performed_on(self):
        performed_on = self.cleaned_data["performed_on"]
        if self.original is not None and performed_on != self.original.performed_on:
            problem = services.service_date_problem(self.original.subsystem.telescope.site, performed_on)
            if problem:
                raise forms.ValidationError(problem[0].upper() + problem[1:] + ".")
            if retired := retired_work_problem(self.original.subsystem, performed_on, "Service work"):
                raise forms.ValidationError(retired)
        return performed_on

    def clean(self):
        """A record moved to a date before its subsystem entered service is asked about, as the service form asks
        (``before_in_service``). A date left as it was is not asked about again."""
        data = super().clean()
        day, original = data.get("performed_on"), self.original
        if original is None or day is None or day == original.performed_on or data.get("void"):
            return data
        asked = f"{original.pk}|{day}"
        question = before_in_service(original.subsystem, day, original.plan_id is not None, original.repaired_failure)
        if question and not self.confirmed_for(asked):
            self.add_error("performed_on", f'{question} If it is right, tick "Save it as entered" and save again.')
            self.ask_again(asked)
        return data


#: A reading more than this many times the limit its plan watches it rise to is asked about before it is logged: a
#: value typed in milliseconds for seconds is 1,000 times too large, a slipped decimal point 10 times; a reading that
#: has truly run that far is rare enough that one more tick costs nothing. Our own factor, common practice, no
#: published source.
UNIT_SLIP_FACTOR = 10


class SiteDateTimeField(forms.DateTimeField):
    """A date and time in the site's local time (the form is read under ``timezone.override``), through the clock
    changes: a time the clocks repeat when they go back (01:30 twice) is read as its first occurrence and said so
    (``repeated``, for the page's message), rather than refused with no way round it; a time the clocks skip when they
    go forward is refused naming it. An input review could not log a reading taken at 01:30 on the night the clocks
    went back."""

    repeated: dt.datetime | None = None

    def to_python(self, value):
        self.repeated = None
        try:
            return super().to_python(value)
        except forms.ValidationError as exc:
            if exc.code != "ambiguous_timezone":
                raise
            naive = exc.params["datetime"]
        zone = timezone.get_current_timezone()
        first = naive.replace(tzinfo=zone, fold=0)
        if first.astimezone(dt.UTC).astimezone(zone).replace(tzinfo=None) != naive:
            raise forms.ValidationError(
                f"{naive:%d %b %Y %H:%M} did not happen at the site: the clocks went forward over it. Enter the time "
                "the site's clocks showed.", code="skipped_hour")
        self.repeated = first
        return first


class ReadingForm(QuestionedValueMixin, forms.Form):
    quantity = forms.ChoiceField(choices=QUANTITY_CHOICES)
    value = forms.FloatField(error_messages={
        "invalid": "Enter a number, with a point for decimals (0.87, not 0,87).",
    })
    taken_at = SiteDateTimeField(
        widget=forms.DateTimeInput(attrs={"type": "datetime-local"}, format="%Y-%m-%dT%H:%M"),
        help_text="Site local time. A plan counts readings from its last service (from its start while none is "
        "logged): entering past readings, log the last service first.",
    )
    note = forms.CharField(max_length=200, required=False)
    value_confirmed = forms.BooleanField(
        required=False, label="The value is right as typed",
        help_text="Asked only for a value far beyond its plan's limit, which is more often a unit slip, a value of 0 "
        "against a limit (more often a measurement missed), or a mirror's reflectance well above its coating's fresh "
        "value.",
    )
    questioned = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, watched=(), kind_label="", limits=None, mirror=None, site=None, subsystem=None, **kwargs):
        """``watched``: the quantities the subsystem's plans watch or ask for and its kind's usual ones, offered
        first (any other can still be chosen, under "Other quantities"). With none, the field says that nothing is
        usually measured on a subsystem of its kind (``kind_label``) above the list of every quantity. ``limits``:
        the limits its plans' readings rise to, by quantity (``planning.selectors.reading_limits``). ``mirror``: the
        subsystem's mirror record, whose decline fit a reflectance reading joins (asked about above fresh). ``site``:
        the subsystem's, whose bounds on a reading's date (``services.date_problem``) are said beside "Taken at".
        ``subsystem``: the one read, whose retire day bounds it too (``registry.services.retired_work_problem``)."""
        super().__init__(*args, **kwargs)
        self.site, self.subsystem = site, subsystem
        self.limits = limits or {}
        self.mirror = mirror
        self.fields["taken_at"].initial = timezone.localtime().strftime("%Y-%m-%dT%H:%M")
        ours = [(code, label) for code, label in QUANTITY_CHOICES if code in watched]
        if ours:
            others = [(code, label) for code, label in QUANTITY_CHOICES if code not in watched]
            self.fields["quantity"].choices = [("For this subsystem", ours), ("Other quantities", others)]
        else:
            self.fields["quantity"].help_text = (
                f"Nothing is usually measured on a subsystem of this kind ({kind_label}) and its plans ask for no "
                "reading: choose the quantity from the whole list."
            )

    def clean_taken_at(self):
        """Refused beside its field as ``services.reading_log`` refuses it (a few minutes' grace for clocks)."""
        taken_at = self.cleaned_data["taken_at"]
        now = timezone.localtime()  # the site's time: the view reads the form in its zone
        if taken_at > now + dt.timedelta(minutes=5):
            raise forms.ValidationError(
                f"Taken at: {timezone.localtime(taken_at):%d %b %Y %H:%M} is in the future (it is {now:%d %b %Y %H:%M} "
                "at the site): enter when the reading was taken."
            )
        if self.site is not None and (problem := services.date_problem(self.site, timezone.localtime(taken_at).date(),
                                                                       "reading date")):
            raise forms.ValidationError(f"Taken at: {problem}.")
        if self.subsystem is not None and (retired := retired_work_problem(
                self.subsystem, timezone.localtime(taken_at).date(), "A reading")):
            raise forms.ValidationError(retired)
        return taken_at

    def clean(self):
        data = super().clean()
        quantity, value = data.get("quantity"), data.get("value")
        if value is None or quantity not in QUANTITIES:
            return data
        problem = value_problem(quantity, value)
        if problem:  # refused as ``services.reading_log`` refuses it, said beside the field, not asked about
            self.add_error("value", problem[0].upper() + problem[1:] + ".")
            return data
        asked = f"{quantity}={value!r}"
        if self.confirmed_for(asked):
            return data
        for limit in self.limits.get(quantity, []):
            if limit > 0 and value == 0:
                # A reviewer logged a settle time of 0 s: taken as right, it moved an overdue plan to due. A reading of
                # exactly nothing against a limit it must stay under is more often a measurement missed.
                label, unit = QUANTITIES[quantity]
                self.add_error("value", (
                    f"0 {unit} against the plan's limit of {limit:g} {unit}: was the measurement missed, or the "
                    "field left at 0? A reading of 0 can take the plan off overdue. If it is right, tick \"The value "
                    "is right as typed\" and log it again."
                ))
                break
            if limit > 0 and value > UNIT_SLIP_FACTOR * limit:
                label, unit = QUANTITIES[quantity]
                self.add_error("value", (
                    f"{value:g} {unit} is {value / limit:,.0f} times the plan's limit of {limit:g} {unit}: was it "
                    f"typed in another unit (milliseconds for seconds, say)? If it is right, tick \"The value is right "
                    "as typed\" and log it again."
                ))
                break
        taken_at = data.get("taken_at")
        if quantity == "reflectance" and self.mirror is not None and taken_at is not None:
            from observatory_ops.mirrors.forms import reflectance_question  # the mirrors app builds on the logbook

            day = timezone.localtime(taken_at).date()  # the view reads the form in the site's time zone
            if problem := reflectance_question(self.mirror, day, value):
                self.add_error("value", f"{problem} If it is right, tick \"The value is right as typed\" and log it "
                                        "again.")
        if self.has_error("value"):
            self.ask_again(asked)
        return data


class ReadingWithdrawForm(forms.Form):
    reason = forms.CharField(max_length=200, help_text="Why it is wrong, e.g. typed in milliseconds, not seconds.")


class NightsUploadForm(forms.Form):
    """A nights CSV to import; when the page lists changes to stored nights, their token, with the file kept by the
    view (``views.nights_import``) so confirming them needs no file chosen again (``kept_token``: their token)."""

    file = forms.FileField(
        required=False, help_text="CSV in the nights format described on this page.",
        error_messages={"empty": f"The file is empty. A nights CSV holds {nights_csv.WHAT_A_FILE_HOLDS}."},
    )
    skip_bad = forms.BooleanField(
        required=False, label="Store the good rows and list the bad ones (otherwise one bad row stores nothing)"
    )
    #: The token of the changes to stored nights the page listed (``services.nights_import``); empty at first.
    confirm = forms.CharField(required=False, widget=forms.HiddenInput)
    #: The name of the file the page asked about, its name saying it is another site's log
    #: (``services.other_site_named``); empty at first. The box that imports it all the same is shown with it.
    asked_file = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, kept_token: str = "", site_name: str = "", **kwargs):
        super().__init__(*args, **kwargs)
        self.kept_token = kept_token  # the file whose changes carry this token is kept: none need be chosen
        if kept_token:
            self.fields["file"].help_text = "The same file is kept: choose none to store the changes listed above."
        if asked := self["asked_file"].value():
            # Ticked already on the page after an import of that file (``views.nights_import``): the question answered.
            help_text = (f"Ticked as you answered for {asked}: choose it again (corrected, or as it is) to import it "
                         "here, without being asked again." if self.initial.get("other_site")
                         else f"Tick this and choose {asked} again to import it here.")
            self.fields["other_site"] = forms.BooleanField(
                required=False, label=f"Import it into {site_name} all the same", help_text=help_text,
            )

    def other_site_accepted(self, file_name: str) -> bool:
        """Whether the box the page asked with is ticked, and the file chosen is the one it asked about."""
        return bool(self.cleaned_data.get("other_site")) and self.cleaned_data["asked_file"] == file_name

    def clean_file(self):
        upload = self.cleaned_data["file"]
        if upload is None:
            if not (self.kept_token and self.data.get("confirm") == self.kept_token):
                raise forms.ValidationError("Choose the CSV file to import.")
            return None
        if upload.size > settings.NIGHTS_UPLOAD_MAX_BYTES:
            raise forms.ValidationError(
                f"The file is {upload.size:,} bytes; the limit is {settings.NIGHTS_UPLOAD_MAX_BYTES:,} bytes."
            )
        return upload


#: The night form's fields of figures: the format's numbers and counts, whose typed slips the form names.
FIGURES = frozenset(c.name for c in nights_csv.COLUMN_SPECS if c.kind in ("number", "count"))
COUNTS = frozenset(c.name for c in nights_csv.COLUMN_SPECS if c.kind == "count")

#: How a telescope's log is made up (``NightUsage``), said beside the telescope choice.
TELESCOPE_RULE = "A telescope's log is its own nights, and the whole site's nights on which it has none of its own."


class _NoneChosen(forms.RadioSelect):
    """Radio buttons none of which is checked until one is chosen. Django checks the empty choice (here the whole
    site's night) when there is no value, which would choose it for whoever forgot to choose."""

    def format_value(self, value):
        return [] if value is None else super().format_value(value)


class NightForm(QuestionedValueMixin, forms.Form):
    """One night typed in: a text field per column of the nights format, checked by the same rules as the
    CSV import and the API (``nights_csv``), so this form keeps no rules of its own. A field left empty is
    left out: a night already stored keeps that figure, a new night takes the format's default (a telescope's: the
    site's figure of that night for a counter or PM10). The telescope is chosen among ``telescopes`` (the site's
    telescope names), or the whole site's night (the empty choice). With more than one telescope the choice must
    be made: nothing is chosen beforehand, so a forgotten choice cannot overwrite the whole site's night.

    ``loaded_as`` (hidden) carries what was stored of the night the page showed (``services.night_stored_token``; ""
    when it showed none): figures stored since, or a night already stored typed into a blank form, are shown before
    this form's figures go over them (``stored_unseen``). What the import would name to check once stored is asked
    before (``services.night_questions``), and kept with "Store it as typed" ticked on the page that asked about those
    very figures (``QuestionedValueMixin``)."""

    def __init__(self, *args, telescopes=(), **kwargs):
        from .nights_csv import COLUMN_SPECS

        super().__init__(*args, **kwargs)
        self.choose_whose = len(telescopes) > 1
        own = bool(self.initial.get("telescope"))
        for column in COLUMN_SPECS:
            label = f"{column.meaning[:1].upper()}{column.meaning[1:]}" + (f" ({column.unit})" if column.unit else "")
            if column.kind == "telescope":
                choices = [("", f"{services.WHOLE_SITE} (every telescope without a night of its own)")]
                field = forms.ChoiceField(
                    choices=choices + [(name, name) for name in telescopes], required=False, label="Telescope",
                    help_text=TELESCOPE_RULE, widget=_NoneChosen if self.choose_whose else forms.Select,
                )
            elif column.kind == "flag":
                choices = [("", "as stored (no for a new night)"), ("no", "no"), ("yes", "yes")]
                field = forms.ChoiceField(choices=choices, required=False, label=label)
            elif column.kind == "date":
                field = forms.CharField(required=True, label=label,
                                        widget=forms.DateInput(attrs={"type": "date"}))
            else:
                attrs = {"inputmode": "decimal", "size": 10}
                if own and column.from_site and self.initial.get(column.name) == "":
                    attrs["placeholder"] = services.FIGURE_FROM_SITE  # a stored telescope's night without it
                field = forms.CharField(required=column.required, label=label, help_text=column.accepted,
                                        widget=forms.TextInput(attrs=attrs))
            self.fields[column.name] = field
        self.fields["loaded_as"] = forms.CharField(required=False, widget=forms.HiddenInput)
        self.fields["loaded_cells"] = forms.CharField(required=False, widget=forms.HiddenInput)  # what it showed
        # Shown only on the page that asks (``ask``): a box on every blank form read as one more thing to fill in.
        self.fields["value_confirmed"] = forms.BooleanField(required=False, label="Store it as typed",
                                                            widget=forms.HiddenInput)
        self.fields["questioned"] = forms.CharField(required=False, widget=forms.HiddenInput)

    def ask(self, questions: list[str], asked: str) -> None:
        """Ask about ``questions`` (``services.night_questions``) before anything is stored: said at the top and beside
        the box "Store it as typed", which keeps the night only for the figures asked about (``asked``)."""
        said = (f"Check {'; '.join(questions)}. If it is right, tick \"Store it as typed\" and save again; if not, "
                "correct it.")
        self.add_error(None, f"Nothing was stored yet. {said}")
        field = self.fields["value_confirmed"]
        field.widget, field.help_text = forms.CheckboxInput(), said
        self._bound_fields_cache.pop("value_confirmed", None)  # its bound field, read while cleaning, kept the old help
        self.ask_again(asked)

    def clean_telescope(self) -> str:
        if self.choose_whose and self.data.get(self.add_prefix("telescope")) is None:
            raise forms.ValidationError(
                f"Choose whose night this is: one telescope's, or the {services.WHOLE_SITE}'s (every telescope "
                "without a night of its own)."
            )
        return self.cleaned_data["telescope"]

    def refuse(self, problem: nights_csv.Problem) -> None:
        """Say a problem the format's rules found (``services.nights_ingest``) beside its field, or the form's own
        when it is no one field's. The rules name a column ("open_hours cannot be below 0"); beside its field, the
        field's label, set apart ("...the night starts: 2023-02-29 is no such date", not spliced into the sentence).
        A figure typed with a slip has it named, in the words every number field and the CSV import use
        (``formats.plain_numbers``): full-width digits, a decimal comma ("7,5": figures take a point)."""
        if problem.field not in self.fields:
            self.add_error(None, problem.reason)
            return
        reason = problem.reason
        if reason.startswith(f"{problem.field} "):
            reason = f"{self.fields[problem.field].label}: {reason[len(problem.field) + 1:]}"
        typed = str(self.data.get(self.add_prefix(problem.field), ""))
        count = problem.field in COUNTS
        if problem.field in FIGURES and (hint := full_width_hint(typed) or decimal_comma_hint(typed, count)):
            reason = f"{reason}; {hint}"
        self.add_error(problem.field, reason)

    def record(self) -> dict:
        """The night as the API would send it: only the fields filled in."""
        return {
            name: value for name, value in self.cleaned_data.items()
            if value not in ("", None) and name not in ("loaded_as", "loaded_cells", "value_confirmed", "questioned")
        }

    def stored_unseen(self, changes: list[services.NightChange], stored_as: str) -> None:
        """Refuse this form's figures over a night stored with figures the page did not show (``changes``, the
        ``services.NightChange`` of each). A figure the page showed and the person left as it was, changed since by
        someone else, is filled in as stored now (``loaded_cells``: what the page showed), so saving again keeps it: a
        walk-through's second save put back the open hours and dust an engineer had just corrected. The figures this
        form itself changes are named, and the page then carries the night as stored now (``stored_as``), so saving
        it again is the confirmation."""
        try:
            loaded = json.loads(self.data.get(self.add_prefix("loaded_cells")) or "{}")
        except ValueError:
            loaded = {}
        self.data = self.data.copy()
        self.data.pop(self.add_prefix("value_confirmed"), None)  # a tick holds for the night as it was asked about
        kept, yours = [], []
        for c in changes:
            label, typed = self.fields[c.column].label, str(self.data.get(self.add_prefix(c.column), "")).strip()
            shown = loaded.get(c.column) if isinstance(loaded, dict) else None
            if shown is not None and typed == str(shown).strip():
                self.data[self.add_prefix(c.column)] = nights_csv.cell(c.old)
                kept.append(f"{label}: {shown or 'empty'} on this page, {c.old_text} now")
            else:
                yours.append(f"{label}: {c.old_text} stored → {c.new_text} in this form")
        first = changes[0]
        said = [f"The night of {first.night} ({first.whose}) was changed since this page was loaded, or was logged "
                "already."]
        if kept:
            said.append(f"Changed meanwhile, and now filled in below as stored: {'; '.join(kept)}.")
        said.append(f"Saving again stores this form's figures over the stored ones: {'; '.join(yours)}." if yours
                    else "Saving again stores the night as the form now shows it.")
        self.add_error(None, " ".join(said))
        self.data[self.add_prefix("loaded_as")] = stored_as
        # What the page shows as stored from now on: a figure typed over differs from it, one left alone does not.
        shown_now = loaded if isinstance(loaded, dict) else {}
        shown_now.update({c.column: nights_csv.cell(c.old) for c in changes})
        self.data[self.add_prefix("loaded_cells")] = json.dumps(shown_now)
