import datetime as dt
import hashlib
import json
import re
from collections import Counter
from functools import cached_property

from django import forms
from django.contrib.auth import get_user_model
from django.db.models import Q

from observatory_ops.access.roles import TECHNICIAN, holders_of
from observatory_ops.archive.history import person
from observatory_ops.calc.lifting import DENSITY
from observatory_ops.formats.plain_numbers import PlainNumberInput
from observatory_ops.logbook.forms import HOURS_QUESTION_FACTOR, UNIT_SLIP_FACTOR
from observatory_ops.logbook.quantities import value_problem
from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_today
from observatory_ops.registry.catalogue import TAKES_OUT_OF_CONTROL
from observatory_ops.registry.forms import HazardsField, possible_id
from observatory_ops.registry.models import Subsystem, validate_one_line

from . import selectors, services
from .cautions import ISOLATION_UNTICKED, ISOLATION_UNTICKED_FINDINGS, in_words
from .models import (
    PART_QUANTITY_MAX,
    Part,
    State,
    WorkOrder,
    amount_text,
    counted_whole,
    part_quantity_not_whole,
    part_quantity_too_many,
)
from .selectors import order_plans


class _ChoicesOfStoredIds(forms.ModelMultipleChoiceField):
    """A choice of several records that refuses a value no id can be (``possible_id``) as a choice not listed, with
    the message an unknown id gets, before the query that would fail on it."""

    def _check_values(self, value):
        for given in value:
            if possible_id(self.queryset.model, given) is None:
                raise forms.ValidationError(self.error_messages["invalid_choice"], code="invalid_choice",
                                            params={"value": given})
        return super()._check_values(value)


class _PlansAlsoDone(_ChoicesOfStoredIds):
    """The service plans an ad hoc order's work also does, each named with its telescope and subsystem."""

    widget = forms.CheckboxSelectMultiple

    def label_from_instance(self, obj) -> str:
        return f"{obj.subsystem.telescope.name}: {obj.subsystem.name}: {obj.name}"


class PersonChoiceField(forms.ModelChoiceField):
    """One person chosen by account, named as the pages name people (``archive.history.person``)."""

    def label_from_instance(self, obj) -> str:
        return person(obj)


class _CrewMembersField(forms.ModelMultipleChoiceField):
    """The crew chosen by account, each named as the pages name people (a name two of them share, with the user
    name). A person sent who is not listed is refused by name, with why (``services.crew_member_problem``)."""

    widget = forms.CheckboxSelectMultiple
    by = None  # the person finishing, set by the form

    def label_from_instance(self, obj) -> str:
        named = person(obj)
        return f"{named} ({obj.username})" if named in self.shared_names else named

    @cached_property
    def shared_names(self) -> set[str]:
        named = Counter(person(user) for user in self.queryset)
        return {name for name, count in named.items() if count > 1}

    def _check_values(self, value):
        try:
            return super()._check_values(value)
        except forms.ValidationError as exc:
            if exc.code != "invalid_choice":
                raise
            who = get_user_model().objects.filter(pk=exc.params["value"]).first()
            problem = services.crew_member_problem(who, self.by) if who is not None else ""
            raise forms.ValidationError(
                f"{self.label}: {problem}." if problem else f"{self.label}: choose people from the list."
            ) from None


def _count_keys(part: Part) -> str:
    """The keyboard a count of ``part`` brings up (``inputmode``): digits alone, "numeric", for a part counted in
    whole units (``models.counted_whole``, as ``models.part_quantity_not_whole`` reads them, which finishing refuses a
    fraction of); digits and a point, "decimal", for a part kept by measure (m, kg, l)."""
    return "numeric" if counted_whole(part.unit) else "decimal"


def _plausible(quantity: str, label: str):
    """A field validator: the reading's problem (``logbook.quantities.value_problem``), named by the field's label."""

    def check(value: float) -> None:
        if problem := value_problem(quantity, value):
            raise forms.ValidationError(f"{label}: {problem}.")

    return check


def _stored_digests(instance, names) -> dict[str, str]:
    """A short digest of each of ``names``' stored values of ``instance`` (a foreign key by its id)."""
    fields = {f.name: f for f in instance._meta.concrete_fields}
    return {name: hashlib.sha256(repr(getattr(instance, fields[name].attname)).encode()).hexdigest()[:12]
            for name in names}


class LoadedAsMixin(forms.ModelForm):
    """A model form that refuses to save over changes made since its page was loaded: a hidden ``loaded_as`` carries a
    digest of each of its fields as stored then, compared on saving with the row as stored now. A review saved a page
    loaded before another engineer's change: the added step, the new planned date and estimate went back, unsaid."""

    loaded_as = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        if self.instance.pk:
            self.fields["loaded_as"].initial = json.dumps(_stored_digests(self.instance, self._meta.fields))

    def clean(self):
        data = super().clean()
        if not self.instance.pk or not data.get("loaded_as"):  # a post made without the page (a script) is not held
            return data
        try:
            loaded = json.loads(data["loaded_as"])
        except ValueError:
            loaded = {}
        if not isinstance(loaded, dict):
            loaded = {}
        now = _stored_digests(type(self.instance).objects.get(pk=self.instance.pk), self._meta.fields)
        changed = [name for name in self._meta.fields if loaded.get(name) != now[name]]
        if changed:
            names = ", ".join(str(self.fields[name].label).lower() for name in changed)
            raise forms.ValidationError(
                f"Not saved: {self.instance} was changed since this page was loaded ({names}). Open it again as "
                "stored now (the link below: the browser's reload would send this page again), then make your change "
                "again.", code="stale",
            )
        return data


class WorkOrderEditForm(LoadedAsMixin, forms.ModelForm):
    """The engineer's edit of a draft or issued order. Steps without the lockout step, where the order's
    hazards call for isolation, are refused with the line to put back."""

    assignee = PersonChoiceField(
        queryset=get_user_model().objects.none(), required=False,
        help_text="Technicians, engineers and administrators (and whoever it is assigned to now).",
        error_messages={"invalid_choice": "Choose a person from the list."},
    )

    class Meta:
        model = WorkOrder
        fields = ["title", "order_type", "priority", "planned_date", "assignee", "estimated_hours", "steps", "tools"]
        widgets = {"planned_date": forms.DateInput(attrs={"type": "date"})}

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        # The person it is assigned to stays on the list though they have left or changed role, so saving
        # another change does not quietly take the order off them.
        current = Q(pk=self.instance.assignee_id) if self.instance.assignee_id else Q(pk__in=[])
        self.fields["assignee"].queryset = (
            get_user_model().objects.filter(Q(pk__in=holders_of(TECHNICIAN).values("pk")) | current)
            .distinct().order_by("first_name", "last_name", "username")
        )

    def save(self, commit=True):
        # The engineer's own figure now: what the estimate was made from no longer holds.
        if "estimated_hours" in self.changed_data:
            self.instance.estimate_basis = ""
        return super().save(commit)

    def clean_planned_date(self):
        planned = self.cleaned_data["planned_date"]
        if planned is None and "planned_date" in self.changed_data and self.instance.state == State.ISSUED:
            raise forms.ValidationError(  # as issuing asks for one (selectors.moves_held)
                "An issued order keeps its planned date: the calendar export and the weekly batch go by it. "
                "Enter the day it is now planned for."
            )
        if planned is None or "planned_date" not in self.changed_data:  # a date stored earlier stays as it is
            return planned
        return planned_date_plausible(planned, site_today(self.instance.site))

    def clean_steps(self):
        """One step a line; where the hazards call for isolation the lockout step must stay, where the engineer
        puts it: a step cannot be placed before or after isolation by its words, so it is not put back by guess."""
        steps = [line.strip() for line in self.cleaned_data["steps"].splitlines() if line.strip()]
        if services.lockout_missing(self.instance.hazards, steps):
            raise forms.ValidationError(
                f"The lockout step is missing, and this order's hazards call for energy isolation. Put this line "
                f"in where the energy is isolated, after the steps done under power: {services.LOCKOUT_STEP}"
            )
        if problem := services.lockout_sequence_problem(self.instance.hazards, steps, order_plans(self.instance)):
            raise forms.ValidationError(problem)
        subsystems = [item.subsystem for item in self.instance.items.select_related("subsystem")]
        if problem := services.brake_air_problem(subsystems, self.instance.hazards, steps):
            raise forms.ValidationError(problem)
        return "\n".join(steps)

    def clean_tools(self):
        """One tool a line as stored: a browser sends the lines back with CRLF, which saved unchanged tools
        as a change in the order's history."""
        return "\n".join(line.strip() for line in self.cleaned_data["tools"].splitlines() if line.strip())


#: How far ahead an order may be planned: beyond it a planned date is a mistyped year (2999 for 2029), which would keep
#: the order off every calendar and weekly batch. Our own bound (common practice, no published source): a recoat, the
#: longest-planned work here, is planned a few years ahead at most.
PLANNED_YEARS_AHEAD = 5


def _years_on(day: dt.date, years: int) -> dt.date:
    """``day`` moved by whole ``years`` (back when negative); 29 February goes to the 28th in a common year."""
    try:
        return day.replace(year=day.year + years)
    except ValueError:  # 29 February
        return day.replace(year=day.year + years, day=28)


def planned_date_plausible(planned: dt.date, today: dt.date) -> dt.date:
    """The planned date as entered, refused when it is more than a year before the site's today or more than
    ``PLANNED_YEARS_AHEAD`` years after it (a mistyped year): a date a little in the past is kept, for work already
    done from paper and entered afterwards."""
    if planned < _years_on(today, -1):
        raise forms.ValidationError(
            f"Planned date: {planned:%d %b %Y} is more than a year before today at the site ({today:%d %b %Y}): "
            "enter the date the work is planned for."
        )
    if planned > _years_on(today, PLANNED_YEARS_AHEAD):
        raise forms.ValidationError(
            f"Planned date: {planned:%d %b %Y} is more than {PLANNED_YEARS_AHEAD} years after today at the site "
            f"({today:%d %b %Y}): enter the date the work is planned for."
        )
    return planned


class AdHocForm(forms.Form):
    """A work order not from the due list: most often a fault, so corrective is the type it starts with (and is
    listed first): the reliability page counts a finished corrective order as a failure, and no other type."""

    title = forms.CharField(max_length=200, validators=[validate_one_line])  # the model's rule: this form makes one
    order_type = forms.ChoiceField(
        # Corrective first: a browser or script that ignores the initial value still sends the fault page's type.
        choices=[(t.value, t.label) for t in (WorkOrder.Type.CORRECTIVE, WorkOrder.Type.PREVENTIVE,
                                              WorkOrder.Type.CONDITION_BASED)],
        initial=WorkOrder.Type.CORRECTIVE,
        help_text="Corrective for a fault put right: the reliability page counts it as a failure once it is "
        "finished. Preventive for planned work, condition-based for work a measured condition called for: neither "
        "is counted as a failure.",
        error_messages={"required": "Order type: choose one; corrective for a fault.",
                        "invalid_choice": "Order type: choose one of those listed; corrective for a fault."},
    )
    planned_date = forms.DateField(
        required=False, widget=forms.DateInput(attrs={"type": "date"}),
        help_text="The day the work is planned for (today unless changed), so the order can be issued straight "
        "away. Empty if not known yet: it is then set (Edit) before the order is issued.",
        error_messages={"invalid": "Planned date: enter a date, such as 2026-06-15."},
    )
    subsystems = _ChoicesOfStoredIds(queryset=Subsystem.objects.none())
    plans = _PlansAlsoDone(
        queryset=ServicePlan.objects.none(), required=False, label="Service plans this work also does",
        help_text="Optional. A repair often does a plan's work too (new brake pads and the pads' check): each plan "
        "chosen counts again from the day the work is done, as if serviced, once the order is finished. Its "
        "subsystem must be one of those chosen above. A corrective order still counts one failure a subsystem.",
    )
    hazards = HazardsField(
        label="Further hazards of this work",
        help_text="The chosen subsystems' own hazards are always included; tick any this work adds (a ladder, "
        "chemicals, a laser, a moving telescope...). They choose its safety cautions and whether it is locked out.",
    )
    powered = forms.CharField(
        widget=forms.Textarea(attrs={"rows": 3}), required=False, label="Steps under power, before isolation",
        help_text="One step a line: parking, closing the dome, tests that need power. Empty if none. Where the "
        "telescope can move (its hazard, moving telescope and dome), the order begins by itself by taking the "
        "observatory out of robotic and remote control, and hands it back at the end: leave those out.",
    )
    steps = forms.CharField(
        widget=forms.Textarea, required=False, label="The work",
        help_text="One step a line. Where the subsystems' hazards call for it, the lockout step comes before these.",
    )
    restore = forms.CharField(
        widget=forms.Textarea(attrs={"rows": 3}), required=False, label="After the locks are off",
        help_text="One step a line: restoring and testing. The step that removes the locks, under the site's "
        "lockout procedure, comes before these; the order adds after them, by itself, the step that restores the "
        "brake air where its lockout vents an air-released brake, and last the return to robotic and remote control "
        "where it takes the observatory out of it (held until every crew on the telescope is done): leave those out.",
    )

    def __init__(self, *args, site, **kwargs):
        super().__init__(*args, **kwargs)
        self.fields["subsystems"].queryset = Subsystem.objects.in_service().filter(telescope__site=site)
        self.fields["plans"].queryset = (
            ServicePlan.objects.filter(active=True, subsystem__in=self.fields["subsystems"].queryset)
            .select_related("subsystem__telescope").order_by("subsystem__telescope__name", "subsystem__name", "name")
        )
        self._today = site_today(site)
        self.fields["planned_date"].initial = self._today

    def clean(self):
        """A plan chosen is one of a chosen subsystem's: the order's items are its subsystems, and the plan's work is
        done on its own."""
        cleaned = super().clean()
        chosen = set(cleaned.get("subsystems") or ())
        for plan in cleaned.get("plans") or ():
            if plan.subsystem not in chosen:
                self.add_error("plans", f"{plan.subsystem.telescope.name}: {plan.subsystem.name}: {plan.name}: its "
                               "subsystem is not among those chosen above: choose it too, or leave the plan out.")
        return cleaned

    def clean_planned_date(self):
        planned = self.cleaned_data["planned_date"]
        return planned if planned is None else planned_date_plausible(planned, self._today)

    def clean_powered(self):
        """A step typed here that takes the observatory out of robotic or remote control in the person's own words
        would be one the order does not know for what it is: it would add no hand-back at the end, and the other crews'
        hand-back would wait on it (a review's order). The order's own (``catalogue.OUT_OF_CONTROL``) is added by
        itself where the telescope can move; the catalogue's wordings typed as they are stay."""
        text = self.cleaned_data["powered"]
        typed = [line.strip() for line in text.splitlines()
                 if _TAKES_OUT.search(line) and line.strip() not in TAKES_OUT_OF_CONTROL]
        if typed:
            raise forms.ValidationError(
                f"Leave out \"{typed[0]}\": where the telescope can move, the order takes the observatory out of "
                "robotic and remote control as its first step by itself, and returns it as its last, held until every "
                "crew on the telescope is done; for other work, tick the hazard \"Moving telescope and dome\" under "
                "further hazards and the order does the same."
            )
        return text

    def clean_restore(self):
        """A hand-back to robotic or remote control typed here would be a step of its own, ticked while another crew
        still works on the telescope: the order's own (``catalogue.HAND_BACK``) is held until every crew is done, and
        added by itself (an onboarding review typed one, and the order had two, the typed one first and not held)."""
        text = self.cleaned_data["restore"]
        typed = [line.strip() for line in text.splitlines() if _HANDS_BACK.search(line)]
        if typed:
            raise forms.ValidationError(
                f"Leave out \"{typed[0]}\": the order adds the return to robotic and remote control as its last step "
                "by itself, held until every crew on the telescope is done; a step typed here would not be held."
            )
        return text


#: A step in a person's words that takes the observatory out of robotic or remote control ("Take the telescope out of
#: robotic control", "Disable remote operation"), not one that only names something remote ("Lock the
#: remote-controlled shutter closed", "Switch off the remote I/O box's supply").
_TAKES_OUT = re.compile(r"(\bout of\b|\b(disable|suspend|stop|pause|block|switch off|turn off)\w*\b).*"
                        r"\b(robotic|remote)\s+(control|operation|operations|mode|scheduler|observing)\b",
                        re.IGNORECASE)

#: A step in a person's words that hands the observatory back to robotic or remote control ("Return the observatory
#: to robotic control"), not one that only names a remote control ("Check the remote control's batteries").
_HANDS_BACK = re.compile(r"\b(return|hand|give|put|set|switch|restore|bring)\w*\b.*\b(robotic|remote)\b", re.IGNORECASE)


#: What the finish form says beside a questioned figure (``FinishForm.beyond_limits``, ``above_fresh``,
#: ``hours_questioned``): nothing is stored until it is confirmed (``READINGS_CONFIRM``) and Finish is pressed again
#: with the same values.
#: Actual hours below which an order's are asked about (3 minutes, whatever its estimate): our own, common practice,
#: no published source.
FEWEST_HOURS_UNQUESTIONED = 0.05

NOT_RECORDED_YET = ("Not recorded yet: correct it, or if it is right, tick \"The questioned figures are right as "
                    "entered\" below and press Finish again.")
#: The box that keeps the questioned figures as entered, and the note at the top of the form while it is not ticked.
READINGS_CONFIRM = "The questioned figures are right as entered"
READINGS_QUESTIONED = (
    "Not finished yet: {n} questioned beside {its} field{s} (a reading beyond its limit or above a mirror's fresh "
    "coating, hours far above the estimate, or a day of work before a subsystem entered service). Correct {it}, or "
    "tick \"" + READINGS_CONFIRM + "\" and press Finish again."
)


class FinishForm(forms.Form):
    """Hours, the day the work was done, who did it with the person finishing (the crew: people with an account
    ticked, ``crew_members``, others typed by name, ``crew``), findings, the required readings, the parts used and,
    for each mirror the order works on, whether it was cleaned.
    ``confirm_unticked`` is asked for only when checklist lines other than the energy isolation's are not ticked
    (``unticked``); ``isolation_unticked``, the lockout step and isolation points nobody ticked, get a question of
    their own (``isolation_answer``, ``cautions.ISOLATION_UNTICKED``), with no default; ``confirm_hazards`` is asked
    only when the order lacks hazards its subsystems gained after it was made; ``beyond_limits`` names the readings
    past their limit."""

    # Empty, never the estimate: a tap on Finish must not record the estimate as the time the work took.
    # Person-hours, as the reliability page's maintenance hours add them up (what the work cost in people's time),
    # not the time the work took from start to end: two people for 3 hours is 6.
    actual_hours = forms.FloatField(
        min_value=0, max_value=1000, label="Actual hours (person-hours)",
        error_messages={
            "required": "Actual hours: enter the hours the work took.",
            "invalid": "Actual hours: enter a number of hours, such as 2.5.",
            "min_value": "Actual hours: enter 0 or more.",
            "max_value": "Actual hours: more than 1,000 hours is not accepted; split the work into several orders.",
        },
    )
    work_done_on = forms.DateField(
        label="Work done on", widget=forms.DateInput(attrs={"type": "date"}),
        help_text="The day the work was done, at the site: today, unless it is entered later from paper. The "
                  "service records, readings and cleanings are dated it, and the plans count again from it.",
        error_messages={"required": "Work done on: enter the day the work was done.",
                        "invalid": "Work done on: enter a date, such as 2026-06-15."},
    )
    # Chosen, not typed: who may not countersign the work goes by these accounts (selectors.on_the_crew), and a
    # typed name matched to people's names let a typo or a nickname through and blocked a namesake.
    crew_members = _CrewMembersField(
        queryset=get_user_model().objects.none(), required=False, label="Crew with an account",
        help_text="Tick the people who did the work with you (everyone of this installation with the technician role "
        "or above is listed). None of them may countersign it.",
        error_messages={"invalid_pk_value": "Crew with an account: choose people from the list.",
                        "invalid_list": "Crew with an account: choose people from the list."},
    )
    crew = forms.CharField(
        required=False, max_length=1000, label="Others on the crew, without an account",
        help_text="Visitors, contractors: names separated by commas; empty if nobody else worked with you. Everyone "
                  "on the crew is printed on the crew lines of the paper, to sign.",
        widget=forms.TextInput(attrs={"autocomplete": "off", "autocapitalize": "words"}),
        error_messages={"max_length": "Others on the crew: at most %(limit_value)d characters; name each person "
                                      "once."},
    )
    findings = forms.CharField(widget=forms.Textarea, required=False, max_length=20000)

    def __init__(self, *args, order, by, unticked=(), isolation_unticked=(), lacking_hazards=(), **kwargs):
        super().__init__(*args, **kwargs)
        self._order = order
        self._by = by
        self.fields["crew_members"].by = by
        self.fields["crew_members"].queryset = (
            holders_of(TECHNICIAN).exclude(pk=by.pk).order_by("first_name", "last_name", "username")
        )
        self._today = site_today(order.site)
        self.fields["actual_hours"].help_text = (
            "Everyone's hours on this work added up, yours and the crew's: two people working 3 hours is 6 "
            "person-hours. They are the maintenance hours the reliability page counts, shared equally among the "
            f"service records this order writes. The estimate was {order.estimated_hours:g} h."
        )
        self.fields["work_done_on"].initial = self._today
        self._items = list(order.items.select_related("subsystem"))
        if retired := sorted({i.subsystem for i in self._items if i.subsystem.retired_on is not None},
                             key=lambda s: (s.retired_on, s.name)):
            self.fields["work_done_on"].help_text += (
                f" {in_words([f'{s.name} was retired on {s.retired_on:%d %b %Y}' for s in retired])} while this "
                f"order was underway: its work is dated on or before {retired[0].retired_on:%d %b %Y}.")
        self._required = {r.pk: r for r in order.required_readings.select_related("subsystem")}
        for r in self._required.values():
            label = f"{r.quantity_label} on {r.subsystem.name} ({r.unit})"
            self.fields[f"reading_{r.pk}"] = forms.FloatField(
                label=label, help_text=f"limit: {r.limit_text}" if r.limit_text else "", required=False,
                error_messages={"required": f"{label}: enter the reading as measured.",
                                "invalid": f"{label}: enter a number, with a point for decimals (0.87, not 0,87)."},
                # Said with the other fields' problems, on the first try (finishing checks it again).
                validators=[_plausible(r.quantity, label)],
            )
            # A reading that could not be taken is said so, never made up: the record keeps why (``not_measured``).
            self.fields[f"why_{r.pk}"] = forms.CharField(
                label=f"Why not measured ({r.quantity_label} on {r.subsystem.name})", required=False, max_length=200,
                help_text="Only when it could not be measured (no meter on site, the drive could not be run): "
                          "leave the reading empty and say why. The record keeps it, and the person who countersigns "
                          "sees it.",
            )
        # Empty, never the planned quantity: a tap on Finish must not book the plan as used (the register and the
        # parts-used record), so each count is typed, 0 for a part not used; the plan is said beside it.
        self._uses = {use.pk: use for use in order.part_uses.select_related("part")}
        for use in self._uses.values():
            label = f"{use.part.name} used ({use.part.unit})"
            self.fields[f"part_{use.pk}"] = forms.FloatField(
                label=label, min_value=0, max_value=PART_QUANTITY_MAX, required=True,
                widget=PlainNumberInput(attrs={"inputmode": _count_keys(use.part)}),
                help_text=(f"planned: {amount_text(use.quantity_planned, use.part.unit)}; enter what was used, "
                           "0 if none"),
                error_messages={"required": f"{label}: enter how many were used (0 if none).",
                                "invalid": f"{label}: enter a number.", "min_value": f"{label}: enter 0 or more.",
                                "max_value": f"{part_quantity_too_many(label)}."},
            )
        # Parts used that the order did not plan (a fan swapped on a fault found during the work): a few rows.
        # Each count's step follows its row's part: the one chosen when the form is shown again, and on the page the
        # one chosen in its list (finish.html reads data-whole-parts, the parts counted in whole units).
        site_parts = Part.objects.filter(site=order.site).order_by("name")
        whole = {str(part.pk) for part in site_parts if _count_keys(part) == "numeric"}
        for i in range(1, selectors.OTHER_PART_ROWS + 1):
            self.fields[f"other_part_{i}"] = forms.ModelChoiceField(
                site_parts, required=False, label=f"Other part used ({i})",
                help_text="A part of the register used though the order did not list it." if i == 1 else "",
                widget=forms.Select(attrs={"data-whole-parts": " ".join(sorted(whole, key=int))}),
            )
            chosen = str(self.data.get(self.add_prefix(f"other_part_{i}"), "")) if self.is_bound else ""
            self.fields[f"other_quantity_{i}"] = forms.FloatField(
                required=False, min_value=0, max_value=PART_QUANTITY_MAX, label=f"How many ({i})",
                widget=PlainNumberInput(attrs={"inputmode": "numeric" if chosen in whole else "decimal"}),
                error_messages={"invalid": f"How many ({i}): enter a number.",
                                "min_value": f"How many ({i}): enter more than 0.",
                                "max_value": f"{part_quantity_too_many(f'How many ({i})')}."},
            )
        # Asked with no default (a cleaning plan has no marker that holds: a site renames its plans and edits their
        # triggers, and a cleaning may be an order raised by hand): selectors.mirrors_asked_about.
        for mirror in selectors.mirrors_asked_about(order):
            name = mirror.subsystem.name
            self.fields[f"cleaned_{mirror.pk}"] = forms.ChoiceField(
                label=f"Cleaning of {name}",
                choices=[("", "choose..."), *selectors.cleaning_choices()],
                help_text="A cleaning goes on the mirror's record, so its reflectance forecast counts the recovery.",
                error_messages={"required": f"Cleaning of {name}: choose how it was cleaned in this work, or "
                                            "'not cleaned in this work'."},
            )
        if isolation_unticked:
            self.fields["isolation_answer"] = forms.ChoiceField(
                label="Energy isolation not ticked", widget=forms.RadioSelect,
                choices=list(ISOLATION_UNTICKED.items()),
                error_messages={"required": "Energy isolation not ticked: say which of these is true, or tick the "
                                            "isolation on the work order page.",
                                "invalid_choice": "Energy isolation not ticked: choose one of the answers listed."},
            )
        # A step that asks for its result (the check of the collimation on a star), left unticked on the page (done on
        # paper), gives its result in the findings: its tick would have carried it.
        self._results_asked = [line for line in unticked if getattr(line, "asks_result", False)]
        if unticked:
            said = (f"; the findings give the result of {in_words([x.label.lower() for x in self._results_asked])}"
                    if self._results_asked else "")
            self.fields["confirm_unticked"] = forms.BooleanField(
                required=False, label=("I confirm the other unticked lines were done or did not apply"
                                       if isolation_unticked else "I confirm the unticked lines were done or did not "
                                       "apply") + said,
            )
        if lacking_hazards:
            self.fields["confirm_hazards"] = forms.BooleanField(
                required=False,
                label="I confirm the hazards listed above were controlled, or did not arise in this work, and the "
                      "findings say how",
            )

    def clean_work_done_on(self):
        day = self.cleaned_data["work_done_on"]
        if problem := (services.work_done_on_problem(self._order, day, self._today)
                       or services.retired_underway_problem(self._order, self._items, day)):
            raise forms.ValidationError(f"Work done on: {problem}.")
        return day

    def clean_crew(self) -> list[str]:
        """The names, one each, in the order typed: separated by commas, semicolons or new lines. The name of one of
        the people listed with an account, or of the person finishing, is refused: typed, it would not keep them from
        countersigning (``selectors.on_the_crew``)."""
        names = [name.strip() for name in re.split(r"[,;\n]", self.cleaned_data["crew"]) if name.strip()]
        if too_long := [name for name in names if len(name) > services.CREW_NAME_MAX]:
            raise forms.ValidationError(
                f"Others on the crew: \"{too_long[0][:40]}...\" is longer than {services.CREW_NAME_MAX} characters "
                "for one name; separate the names with commas."
            )
        holders = {key: user for user in self.fields["crew_members"].queryset for key in selectors.names_of(user)}
        mine = selectors.names_of(self._by)
        for name in names:
            if name.casefold() in mine:
                raise forms.ValidationError(
                    f"Others on the crew: \"{name}\" is you, finishing the work; the crew are the others who did it "
                    "with you."
                )
            if (holder := holders.get(name.casefold())) is not None:
                raise forms.ValidationError(
                    f"Others on the crew: \"{name}\" has an account here: tick {person(holder)} under Crew with an "
                    "account instead, so that they do not countersign their own work. If it is someone else of the "
                    f"same name, say who they are (\"{name} (contractor)\")."
                )
        return list(dict.fromkeys(names))

    def clean(self):
        cleaned = super().clean()
        if cleaned.get("isolation_answer") and not cleaned.get("findings", "").strip():
            self.add_error("findings", f"Findings: {ISOLATION_UNTICKED_FINDINGS}.")
        elif self._results_asked and cleaned.get("confirm_unticked") and not (cleaned.get("findings") or "").strip():
            steps = in_words([line.label.lower() for line in self._results_asked])
            one = len(self._results_asked) == 1
            ask = "asks for its result, and it is" if one else "ask for their results, and are"
            self.add_error("findings", f"Findings: {steps} {ask} not ticked with one: write the result here as the "
                                       "paper gives it (a value with its unit, or what was seen), or tick the step "
                                       "with its result on the work order page.")
        # Each required reading: its value as measured, or why it was not taken; not both.
        for pk in self._required:
            label = self.fields[f"reading_{pk}"].label
            value, why = cleaned.get(f"reading_{pk}"), (cleaned.get(f"why_{pk}") or "").strip()
            if value is None and not why and f"reading_{pk}" not in self.errors:
                self.add_error(f"reading_{pk}", f"{label}: enter the reading as measured, or say below why it was "
                                                "not measured.")
            elif value is not None and why:
                self.add_error(f"why_{pk}", f"{label}: a reading is entered, so leave \"not measured\" empty (or "
                                            "empty the reading).")
        # A fraction of a part counted in whole units, refused on its own field (the error summary links it) in the
        # words finishing would refuse it with (models.part_quantity_not_whole).
        for pk, use in self._uses.items():
            quantity = cleaned.get(f"part_{pk}")
            if quantity is not None and (
                problem := part_quantity_not_whole(use.part, quantity, f"{use.part.name} used")
            ):
                self.add_error(f"part_{pk}", f"{problem}.")
        for i in range(1, selectors.OTHER_PART_ROWS + 1):
            part, quantity = cleaned.get(f"other_part_{i}"), cleaned.get(f"other_quantity_{i}")
            if part and not quantity and f"other_quantity_{i}" not in self.errors:
                self.add_error(f"other_quantity_{i}", f"How many ({i}): enter how many of {part.name} were used.")
            elif quantity and not part:
                self.add_error(f"other_part_{i}", f"Other part used ({i}): choose the part, or leave how many empty.")
            elif part and quantity and (problem := part_quantity_not_whole(part, quantity, f"How many ({i})")):
                self.add_error(f"other_quantity_{i}", f"{problem}.")
        return cleaned

    def parts_added(self) -> list[tuple[Part, float]]:
        """The other parts used, with how many (``services.work_order_finish`` checks them against the order)."""
        rows = [(self.cleaned_data.get(f"other_part_{i}"), self.cleaned_data.get(f"other_quantity_{i}"))
                for i in range(1, selectors.OTHER_PART_ROWS + 1)]
        return [(part, quantity) for part, quantity in rows if part and quantity]

    def readings(self) -> dict[int, float]:
        """RequiredReading id -> the value entered, for the readings measured."""
        return {int(k[8:]): v for k, v in self.cleaned_data.items() if k.startswith("reading_") and v is not None}

    def not_measured(self) -> dict[int, str]:
        """RequiredReading id -> why it was not measured, for the others."""
        return {int(k[4:]): v.strip() for k, v in self.cleaned_data.items() if k.startswith("why_") and v.strip()}

    def parts(self) -> dict[int, float]:
        return {int(k[5:]): v for k, v in self.cleaned_data.items() if k.startswith("part_")}

    def cleanings(self) -> dict[int, str]:
        """Mirror id -> cleaning method, for each mirror the work cleaned."""
        not_cleaned = selectors.NOT_CLEANED[0]
        return {int(k[8:]): v for k, v in self.cleaned_data.items() if k.startswith("cleaned_") and v != not_cleaned}

    def beyond_limits(self) -> dict[str, str]:
        """Field name -> what to show beside it, for each reading entered past its limit (valid forms only)."""
        said = {}
        for pk, value in self.readings().items():
            required = self._required[pk]
            if not required.beyond_limit(value):
                continue
            text = f"{value:g} {required.unit} is beyond its limit ({required.limit_text})."
            limit = required.limit_value  # a unit slip shows as a value far above an "at most" limit
            if limit and limit > 0 and "at most" in required.limit_text and value > UNIT_SLIP_FACTOR * limit:
                text += (f" It is {abs(value / limit):,.0f} times the limit: was it typed in another unit "
                         "(milliseconds for seconds, say)?")
            said[f"reading_{pk}"] = f"{text} {NOT_RECORDED_YET}"
        return said

    def zero_readings(self) -> dict[str, str]:
        """Field name -> the question beside it, for each reading of exactly 0 against an "at most" limit or one in
        words (valid forms only): more often a measurement missed or a field left at 0 than a real value, and it takes
        a plan off overdue (as logbook.forms.ReadingForm asks; a diff review found the finish form, where most readings
        are entered, did not). Shown once, as a reading beyond its limit is; not flagged on the record."""
        asked = {}
        for pk, value in self.readings().items():
            required = self._required[pk]
            at_most = required.limit_value and required.limit_value > 0 and "at most" in required.limit_text
            # A limit in words ("within the maker's range") is asked about too: a tablet review stored a brake air
            # pressure of 0 bar without a word. A reading with no limit given is not.
            worded = required.limit_value is None and required.limit_text.strip()
            if value == 0 and (at_most or worded):
                asked[f"reading_{pk}"] = (f"0 {required.unit} against its limit ({required.limit_text}): was the "
                                          f"measurement missed, or the field left at 0? {NOT_RECORDED_YET}")
        return asked

    def hours_questioned(self) -> dict[str, str]:
        """The actual hours beside their field when above ``HOURS_QUESTION_FACTOR`` times the estimate, above 0 and
        below ``FEWEST_HOURS_UNQUESTIONED``, or 0 for an order estimated to take time (an empty field filled with 0 to
        get past it: the reliability page would count the work as taking none); valid forms only: shown once, as a
        questioned reading is, before they are recorded and shared among the service records."""
        hours, estimate = self.cleaned_data["actual_hours"], self._order.estimated_hours
        if hours == 0 and estimate:
            return {"actual_hours": (f"0 h for work estimated at {estimate:g} h: was no time spent on it at all? Enter "
                                     f"everyone's hours added up. {NOT_RECORDED_YET}")}
        if 0 < hours < FEWEST_HOURS_UNQUESTIONED:
            # A tablet review finished an order with 1e-09 h, shown as "0.00 h": the reliability page counts it.
            planned = f" for work estimated at {estimate:g} h" if estimate else ""
            return {"actual_hours": (f"{hours:g} h is {hours * 60:.2g} minutes{planned}: was the figure cut short, or "
                                     f"typed in another unit? {NOT_RECORDED_YET}")}
        if not estimate or hours <= HOURS_QUESTION_FACTOR * estimate:
            return {}
        return {"actual_hours": (f"{hours:g} h is {hours / estimate:,.0f} times the estimate of {estimate:g} h: were "
                                 f"minutes typed for hours? {NOT_RECORDED_YET}")}

    def before_in_service(self) -> dict[str, str]:
        """The day of work beside its field when it comes near or before the day a subsystem of the order entered
        service (its "in service since" moved past the order's issue), asked as the service form asks
        (``logbook.forms.before_in_service``): for a plan of the order, or the repair a corrective order is. Valid forms
        only; shown once, as a questioned reading is."""
        from observatory_ops.logbook.forms import before_in_service  # the work orders build on the logbook

        day = self.cleaned_data["work_done_on"]
        repair = self._order.order_type == WorkOrder.Type.CORRECTIVE
        questions = dict.fromkeys(
            question for item in sorted(self._items, key=lambda i: (i.subsystem.name, i.pk))
            if (question := before_in_service(item.subsystem, day, item.plan_id is not None, repair)))
        return {"work_done_on": f"{' '.join(questions)} {NOT_RECORDED_YET}"} if questions else {}

    def above_fresh(self) -> dict[str, str]:
        """Field name -> the question beside it, for each mirror's band reflectance entered well above the fresh value
        of its coating on the day the work was done, or far below what a coated mirror reflects
        (``mirrors.forms.reflectance_question``; valid forms only): it
        joins the mirror's decline fit, so it is shown once, as a reading beyond its limit is, before it is
        recorded. Not flagged on the record: the question is about the typing, not the mirror."""
        from observatory_ops.mirrors.forms import reflectance_question  # the mirrors app builds on work orders' data

        day, asked = self.cleaned_data["work_done_on"], {}
        for pk, value in self.readings().items():
            required = self._required[pk]
            mirror = getattr(required.subsystem, "mirror", None)
            if required.quantity == "reflectance" and mirror is not None:
                if problem := reflectance_question(mirror, day, value):
                    asked[f"reading_{pk}"] = f"{problem} {NOT_RECORDED_YET}"
        return asked


class PartAddForm(forms.Form):
    """A part of the site's register planned on an order: each refusal names the field and what is wrong with it."""

    part = forms.ModelChoiceField(
        queryset=Part.objects.none(),
        error_messages={"required": "Part: choose one from the list.",
                        "invalid_choice": "Part: that is not a part of this site's register; choose one from the "
                                          "list."},
    )
    quantity = forms.FloatField(
        initial=1, max_value=PART_QUANTITY_MAX,
        error_messages={"required": "Quantity: enter how many are needed, such as 2.",
                        "invalid": "Quantity: enter a number, such as 2.",
                        "max_value": f"{part_quantity_too_many('Quantity')}."},
    )

    def __init__(self, *args, site, **kwargs):
        super().__init__(*args, **kwargs)
        self.fields["part"].queryset = Part.objects.filter(site=site)

    def clean_quantity(self) -> float:
        quantity = self.cleaned_data["quantity"]
        if quantity <= 0:
            raise forms.ValidationError(f"Quantity: {quantity:g} is not above zero; enter how many are needed.")
        return quantity


class PartCountForm(forms.Form):
    """The stock of a part as counted on the shelf, after finished work used more than the register held."""

    counted = forms.FloatField(min_value=0, max_value=PART_QUANTITY_MAX)

    def __init__(self, *args, part: Part, **kwargs):
        super().__init__(*args, **kwargs)
        label = f"Counted {part.name} ({part.unit})"
        self.fields["counted"].label = label
        self.fields["counted"].error_messages.update({
            "required": f"{label}: enter the number on the shelf (0 if none).",
            "invalid": f"{label}: enter a number, such as 4.",
            "min_value": f"{label}: enter 0 or more.",
            "max_value": f"{part_quantity_too_many(label)}.",
        })


def within_bounds(label: str, low: float, high: float, why: str, *, above_low: bool = False,
                  below_high: bool = False):
    """A field validator: the value at least ``low`` (above it, with ``above_low``) and at most ``high`` (below it,
    with ``below_high``), refused naming the field, the bounds and ``why`` they are what they are. calc.lifting takes
    a figure of any size, and answers a diameter of 1e308 with an infinite load; this says what was mistyped."""
    lower = f"above {low:,g}" if above_low else f"at least {low:,g}"
    upper = f"below {high:,g}" if below_high else f"at most {high:,g}"

    def check(value: float) -> None:
        if value < low or value > high or (above_low and value == low) or (below_high and value == high):
            raise forms.ValidationError(f"{label}: {value:,g} is out of bounds: enter a value {lower} and {upper} "
                                        f"({why}).")

    return check


def millimetres_at_least(label: str, least: float):
    """A field validator: a mirror's size in millimetres of at least ``least``, a smaller figure told as one typed in
    another unit (``MIRROR_DIAMETER_MIN_MM``): the lift form's and the mirror record's."""
    def check(value: float) -> None:
        if 0 < value < least:
            raise forms.ValidationError(
                f"{label}: {value:g} mm is under {least:g} mm, smaller than any mirror a lift is planned for. It reads "
                f"millimetres: {value:g} m is {value * 1000:,.0f} mm, {value:g} in is {value * 25.4:,.0f} mm. With a "
                "figure in another unit the mass, and the sling check, come out near nothing.")

    return check


def _lift_number(label: str, low: float, high: float, why: str, *, above_low: bool = False,
                 below_high: bool = False, also=(), **options) -> forms.FloatField:
    return forms.FloatField(
        label=label,
        validators=[within_bounds(label, low, high, why, above_low=above_low, below_high=below_high), *also],
        error_messages={"required": f"{label}: enter a value.", "invalid": f"{label}: enter a number."}, **options,
    )


#: The lift form's bounds, beyond which a figure is a slip of the keyboard: our own (common practice, no published
#: source), set above the largest of each thing; the sizes of the largest mirror blanks are from memory. A mirror's
#: record is held to them too (mirrors.admin), so the figures it gives a lift are ones this form takes.
MIRROR_DIAMETER_MAX_MM = 10_000
LARGEST_MIRROR = "no single telescope mirror is that large: the largest are about 8,400 mm across"
MIRROR_THICKNESS_MAX_MM = 2_000
THICKEST_MIRROR = "the thickest mirror blanks are under 1,000 mm"
LIFTED_MASS_MAX_KG = 100_000
HEAVIEST_LOAD = "more than 100 t is no mirror lift"
#: The smallest mirror a lift is planned for, and the thinnest blank: our own bounds (common practice, no published
#: source). A bad-input review typed a 0.7 m mirror in metres (0.7 / 0.07) and in inches (27.56 / 2.76): the mass came
#: out 0.0 kg, the sling check held nothing and the work could start. Smaller figures are taken for another unit.
MIRROR_DIAMETER_MIN_MM = 50
MIRROR_THICKNESS_MIN_MM = 3
#: The most sling legs the form takes: at most two are counted as bearing the load, however many are rigged.
LIFT_LEGS_MAX = 8


class LiftForm(forms.Form):
    diameter_mm = _lift_number("Mirror diameter (mm)", 0, MIRROR_DIAMETER_MAX_MM, LARGEST_MIRROR, above_low=True,
                               also=[millimetres_at_least("Mirror diameter (mm)", MIRROR_DIAMETER_MIN_MM)])
    thickness_mm = _lift_number("Edge thickness (mm)", 0, MIRROR_THICKNESS_MAX_MM, THICKEST_MIRROR, above_low=True,
                                also=[millimetres_at_least("Edge thickness (mm)", MIRROR_THICKNESS_MIN_MM)])
    hole_mm = _lift_number("Central hole (mm)", 0, MIRROR_DIAMETER_MAX_MM, LARGEST_MIRROR, initial=0)
    material = forms.ChoiceField(choices=[(k, k.replace("_", " ")) for k in DENSITY])
    lightweighting_fraction = _lift_number(
        "Lightweighting fraction", 0, 1, "the fraction of the solid blank removed", below_high=True, initial=0,
        help_text="Fraction of the solid blank removed, 0 to <1.",
    )
    fixture_kg = _lift_number(
        "Cell / fixture mass (kg)", 0, LIFTED_MASS_MAX_KG, HEAVIEST_LOAD, required=False,
        help_text="Empty: not entered (a mirror's record gives it once entered there); the figures are then the mirror "
        "alone and the work is not started. 0: nothing is lifted with the mirror.",
    )
    legs = forms.IntegerField(
        label="Sling legs rigged", initial=2, min_value=1, max_value=LIFT_LEGS_MAX,
        error_messages={"required": "Sling legs rigged: enter how many, such as 2.",
                        "invalid": "Sling legs rigged: enter a whole number, such as 2.",
                        "min_value": "Sling legs rigged: enter at least 1.",
                        "max_value": f"Sling legs rigged: enter at most {LIFT_LEGS_MAX}; however many are rigged, at "
                                     "most 2 are counted as bearing the load."},
    )
    angle_deg = _lift_number(
        "Leg angle from horizontal (deg)", 0, 90, "90 is a vertical leg", above_low=True, initial=60
    )
    wll_kg = _lift_number(
        "Working load limit per leg (kg)", 0, LIFTED_MASS_MAX_KG, HEAVIEST_LOAD, above_low=True, required=False
    )

    def clean(self):
        cleaned = super().clean()
        diameter, hole = cleaned.get("diameter_mm"), cleaned.get("hole_mm")
        if diameter is not None and hole is not None and hole >= diameter:
            self.add_error("hole_mm", f"Central hole (mm): {hole:g} mm must be smaller than the mirror diameter "
                                      f"({diameter:g} mm).")
        return cleaned


class WithdrawForm(forms.Form):
    reason = forms.CharField(max_length=200)
