import datetime as dt
import math

from django import forms
from django.utils import timezone

from observatory_ops.calc.coating import MATERIALS, MAX_GRID_SIZE, METALS, grid_size, wavelength_range_nm
from observatory_ops.calc.windows import RECOAT_PHASES, Phase, downtime_words, shortest_downtime
from observatory_ops.logbook.forms import QuestionedValueMixin
from observatory_ops.logbook.quantities import value_problem
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders.models import State, WorkOrder

from . import layers_text, response_csv
from .models import METAL_NAMES, TRAIN_KINDS, CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement

#: Wavelengths a single-wavelength measurement may be taken at: where the optical data of every coating
#: material the app knows overlap (calc.coating), so a fresh value could be computed there for any recipe.
#: It also refuses a wavelength typed in micrometres (0.65) or angstroms (6500).
MEASURABLE_NM = wavelength_range_nm(MATERIALS)


#: How far above the fresh value of its coating a band-mean measurement may be before the form asks whether it is
#: right: our own margin, twice the repeatability of about 0.01 of hand-held reflectometers (from memory). A coating
#: does not get better with use, so a value well above fresh is more often another band, another instrument's scale
#: or a slip of the keys.
ABOVE_FRESH_MARGIN = 0.02


#: A band mean below this fraction of the fresh value of the mirror's coating that day is asked about, or below
#: ``LOWEST_UNQUESTIONED`` before any coating is recorded: a dirty aluminium mirror still reflects about 0.7 of a fresh
#: 0.9 (from memory), so a lower value is more often a field left at 0, a percentage or another scale read wrongly, or a
#: missed measurement. Our own bounds, common practice, no published source; asked, not refused.
LOWEST_FRACTION_OF_FRESH = 0.6
LOWEST_UNQUESTIONED = 0.5


def reflectance_question(mirror: Mirror, day: dt.date, value: float) -> str:
    """The question a band mean measured on ``day`` raises, or "" when none: far below what the mirror's coating
    reflects fresh (``LOWEST_FRACTION_OF_FRESH``: a bad-input review's 0 made the recoat overdue without a word; a diff
    review's silver over 265-330 nm is 0.19 fresh, so no fixed bound fits every band), or above the fresh value of its
    coating (``above_fresh_problem``)."""
    from .services import fresh_band_on  # the services build on these forms' models

    found = fresh_band_on(mirror, day)
    lowest = LOWEST_FRACTION_OF_FRESH * found[0] if found else LOWEST_UNQUESTIONED
    if value < lowest:
        against = (f"under {LOWEST_FRACTION_OF_FRESH:.0%} of the fresh value of its coating, {found[0]:.4f} over "
                   f"{mirror.band_from_nm:g}-{mirror.band_to_nm:g} nm" if found else f"under {LOWEST_UNQUESTIONED:g}")
        return (f"{value:g} is far below what this mirror reflects ({against}; a dirty aluminium mirror still "
                "reflects about 0.7): was the measurement missed, or the field left at 0? A value this low can make "
                "the recoat overdue.")
    return above_fresh_problem(mirror, day, value)


def above_fresh_problem(mirror: Mirror, day: dt.date, value: float) -> str:
    """The question a band mean measured on ``day`` raises when it is above the fresh value of the coating in force
    then (``services.fresh_band_on``) by more than ``ABOVE_FRESH_MARGIN``; "" when it is not, or before the first
    coating recorded. Asked, not refused: the fresh value is computed, the instrument may know better. The
    measurement form, the logbook's reading form and the work order's finish form ask it (a mirror's reflectance
    reading joins its decline fit); each says how to keep the value."""
    from .services import fresh_band_on  # the services build on these forms' models

    found = fresh_band_on(mirror, day)
    if not found or value <= found[0] + ABOVE_FRESH_MARGIN:
        return ""
    fresh, coating = found
    return (
        f"{value:g} is above the fresh value of the coating of {coating.coated_on:%d %b %Y} ({coating.recipe}), "
        f"{fresh:.4f} as a band mean over {mirror.band_from_nm:g}-{mirror.band_to_nm:g} nm, by more than "
        f"{ABOVE_FRESH_MARGIN:g}. A coating does not get better with use: was it measured over another band, or read "
        "on another scale?"
    )


class MeasurementChecks(QuestionedValueMixin, forms.Form):
    """What a reflectance measurement is held to wherever it is entered, the mirror page's form and the admin's add
    page alike: a wavelength within ``MEASURABLE_NM``, and a band mean well above the fresh value of the coating asked
    about (``value_confirmed``), not refused. ``measured_mirror`` says which mirror the form measures."""

    value_confirmed = forms.BooleanField(
        required=False, label="The value is right as measured",
        help_text="Asked only for a band mean well above the fresh value of the mirror's coating, or far below what a "
        "coated mirror reflects.",
    )
    questioned = forms.CharField(required=False, widget=forms.HiddenInput)

    def measured_mirror(self, data: dict) -> Mirror | None:
        raise NotImplementedError

    def clean_value(self) -> float | None:
        """A fraction between 0 and 1, told as the reading form tells it (87 is "87 % is 0.87")."""
        value = self.cleaned_data["value"]
        if value is not None and (problem := value_problem("reflectance", value)):
            raise forms.ValidationError(problem[0].upper() + problem[1:] + ".")
        return value

    def clean_wavelength_nm(self) -> float | None:
        wavelength = self.cleaned_data["wavelength_nm"]
        low, high = MEASURABLE_NM
        if wavelength is not None and not low <= wavelength <= high:
            raise forms.ValidationError(
                f"Wavelength: {wavelength:g} nm is outside {low:g} to {high:g} nm, where the optical data of the "
                "coating materials overlap; give it in nanometres, or leave it empty for a band mean."
            )
        return wavelength

    def clean(self):
        """A band mean above the fresh value of the coating in force that day by more than ``ABOVE_FRESH_MARGIN`` is
        asked about (``value_confirmed``), not refused: the fresh value is computed, the instrument may know better."""
        data = super().clean()
        mirror, value, day = self.measured_mirror(data), data.get("value"), data.get("measured_on")
        asked = f"{mirror.pk if mirror else ''}|{day}={value!r}"
        confirmed = self.confirmed_for(asked)
        for name in ("value_confirmed", "questioned"):
            data.pop(name, None)  # not the measurement's: the rest is what is stored
        if confirmed or mirror is None or value is None or day is None or data.get("wavelength_nm") is not None:
            return data
        if problem := reflectance_question(mirror, day, value):
            self.add_error("value", f"{problem} If it is right, tick \"The value is right as measured\" and save it "
                                    "again.")
            self.ask_again(asked)
        return data


class MeasurementForm(MeasurementChecks):
    measured_on = forms.DateField(widget=forms.DateInput(attrs={"type": "date"}))
    value = forms.FloatField(
        help_text="Reflectance as a fraction, e.g. 0.86: the band mean, or at the wavelength below.",
    )
    wavelength_nm = forms.FloatField(label="Wavelength (nm)", required=False)
    position = forms.CharField(max_length=60, required=False)
    instrument = forms.CharField(max_length=80, required=False)
    before_cleaning = forms.BooleanField(
        required=False, label="Measured before that day's cleaning",
        help_text="Read only when the mirror was cleaned the same day: the decline fit then counts this measurement "
        "before the cleaning. Left empty, a measurement on a cleaning day counts as taken after it.",
    )
    field_order = ["measured_on", "value", "wavelength_nm", "position", "instrument", "before_cleaning"]

    def __init__(self, *args, mirror: Mirror, **kwargs):
        super().__init__(*args, **kwargs)
        self.mirror = mirror
        low, high = MEASURABLE_NM
        self.fields["wavelength_nm"].help_text = (
            f"Empty: averaged over the mirror's band from {mirror.band_from_nm:g} to {mirror.band_to_nm:g} nm. "
            f"Otherwise the one wavelength measured, {low:g} to {high:g} nm: such a value is listed on the "
            "mirror page but not fitted, since the decline is fitted to band means."
        )

    def measured_mirror(self, data: dict) -> Mirror:
        return self.mirror

    def repeats(self, mirror: Mirror, by) -> ReflectanceMeasurement | None:
        """The measurement this form, sent again, would repeat: the same person's measurement of this mirror entered
        on this page with the same values, not withdrawn, stored within ``logbook.selectors.RESENT_WITHIN`` (as the
        logbook's ``selectors.reading_already_logged``; when, from its history's creation row: the model keeps a date
        only); None when there is none. A second copy would count twice in the fit; the same value measured again
        later (a repeat at the same position) is a measurement of its own."""
        from observatory_ops.logbook.selectors import RESENT_WITHIN

        recent = ReflectanceMeasurement.history.filter(
            mirror_id=mirror.pk, history_type="+", history_date__gte=timezone.now() - RESENT_WITHIN
        ).values("id")
        return mirror.measurements.filter(
            pk__in=recent, taken_by=by, reading__isnull=True, withdrawn_at__isnull=True, **self.cleaned_data
        ).first()


class CleaningForm(QuestionedValueMixin, forms.Form):
    """A cleaning logged on the mirror page. Where a work order still to do holds one of the mirror's cleaning plans,
    it is asked about first (``value_confirmed``), as the service form asks: a bad-input review logged a cleaning here
    while an order underway held the plan, which restarted it, and the order's own cleaning would be logged again."""

    cleaned_on = forms.DateField(widget=forms.DateInput(attrs={"type": "date"}))
    method = forms.ChoiceField(choices=CleaningEvent.Method.choices)
    note = forms.CharField(max_length=200, required=False)
    value_confirmed = forms.BooleanField(
        required=False, label="Log it as entered",
        help_text="Asked only when a work order still to do holds one of the mirror's cleaning plans.",
    )
    questioned = forms.CharField(required=False, widget=forms.HiddenInput)

    def __init__(self, *args, mirror: Mirror, **kwargs):
        super().__init__(*args, **kwargs)
        self.mirror = mirror

    def clean(self):
        from .services import plans_a_cleaning_restarts  # the services import this module

        data = super().clean()
        day = data.get("cleaned_on")
        asked = f"{self.mirror.pk}|{day}"
        confirmed = self.confirmed_for(asked)
        for name in ("value_confirmed", "questioned"):
            data.pop(name, None)  # not the cleaning's: the rest is what is stored
        if confirmed or day is None:
            return data
        plans = plans_a_cleaning_restarts(self.mirror.subsystem)
        held = list(WorkOrder.objects.filter(items__plan__in=plans, state__in=(State.DRAFT, State.ISSUED,
                                                                               State.UNDERWAY))
                    .distinct().order_by("pk"))
        if held:
            orders = ", ".join(f"{o.number} ({o.get_state_display()})" for o in held)
            one = len(held) == 1
            self.add_error("cleaned_on", (
                f"Work order{'' if one else 's'} {orders} {'is' if one else 'are'} still to do for this mirror's "
                "cleaning: finishing it asks how the mirror was cleaned and logs the cleaning. Log one here only for a "
                "cleaning done outside it. If it is right, tick \"Log it as entered\" and save again."))
            self.ask_again(asked)
        return data

    def repeats(self, mirror: Mirror, by) -> CleaningEvent | None:
        """The cleaning this form, sent again, would repeat: a cleaning of this mirror logged on this page on the same
        day with the same method and note, by whoever logged it (the event is the mirror's, and keeps no person); None
        when there is none. A second copy would restart the cleaning plans twice and list two cleanings."""
        return mirror.cleanings.filter(work_order__isnull=True, **self.cleaned_data).first()


#: The last day the recoat planner may start from.
LAST_START = dt.date(2100, 1, 1)


class WindowForm(forms.Form):
    """The recoat planner's search: from ``today`` (the site's) or later, over a horizon that can hold the phases
    with the site's crew working ``crew_days``."""

    start = forms.DateField(widget=forms.DateInput(attrs={"type": "date"}))
    horizon_days = forms.IntegerField(label="Horizon (days)", min_value=7, max_value=3 * 366, initial=365)

    def __init__(self, *args, today: dt.date, crew_days: frozenset[int],
                 phases: tuple[tuple[int, Phase], ...] = tuple(enumerate(RECOAT_PHASES)), **kwargs):
        super().__init__(*args, **kwargs)
        self.today, self.crew_days, self.offered = today, crew_days, phases
        carried = " and ".join(p.name for p in RECOAT_PHASES if not p.work)
        # Each phase's field keeps its place in RECOAT_PHASES (``mirrors.services.recoat_phases_left`` may leave some
        # out), so a page sent before the mirror came out does not give one phase's days to another.
        for i, phase in phases:
            # A phase of hands-on work cannot be skipped: without a day it gets no work order, so the plan would,
            # say, reinstall a mirror never removed. Only carrying the mirror may take no day (a plant next door).
            least = 1 if phase.work else 0
            self.fields[f"phase_{i}"] = forms.IntegerField(
                label=f"{phase.name} (days)", min_value=least, max_value=90, initial=phase.days, required=False,
                error_messages={"min_value": f"{phase.name.capitalize()} is hands-on work and takes at least 1 day "
                                             f"(only {carried} may take 0 days)."} if least else None,
            )

    def phases(self) -> list[Phase]:
        def days(i: int, phase: Phase) -> int:
            given = self.cleaned_data.get(f"phase_{i}")
            return phase.days if given is None else given

        return [Phase(p.name, days(i, p), p.work) for i, p in self.offered]

    def clean_start(self):
        """A recoat is planned from the site's today on: a window begun in the past would date its work orders
        before the work could be done (and before the mirror's current coating, from an old start)."""
        start = self.cleaned_data["start"]
        if start < self.today:
            raise forms.ValidationError(f"Start: choose today ({self.today:%d %b %Y}) or later; a recoat is not "
                                        "planned in the past.")
        if start > LAST_START:
            raise forms.ValidationError(f"Start: choose a date up to {LAST_START:%d %b %Y}.")
        return start

    def clean(self):
        """A horizon shorter than the phases take (``shortest_downtime``) is refused beside its field, saying how the
        days are made: crew work on the crew's working days, the rest (carrying, coating) on calendar days, and the
        days the work waits over weekdays the crew does not work."""
        data = super().clean()
        horizon = data.get("horizon_days")
        if horizon is None or any(name.startswith("phase_") for name in self.errors):
            return data
        phases = self.phases()
        shortest = shortest_downtime(phases, self.crew_days)
        if horizon < shortest:
            self.add_error("horizon_days", f"Horizon: the phases take at least {downtime_words(phases, shortest)}: "
                                           f"give at least {shortest} days.")
        return data


class RecipeForm(forms.Form):
    """A coating recipe: the metal and its overcoats from the metal outward."""

    metal = forms.ChoiceField(choices=[(m, METAL_NAMES[m]) for m in METALS])
    layers = forms.CharField(
        required=False, max_length=200, help_text=f"Overcoats as {layers_text.FORMAT}. Empty: bare metal.",
    )

    def clean_layers(self) -> list[dict]:
        return layers_field_clean(self.cleaned_data["layers"])


def layers_field_clean(text: str) -> list[dict]:
    """Typed overcoats (``layers_text``) as a coating event stores them; the form's error names the bad layer."""
    try:
        return layers_text.as_stored(layers_text.parse(text))
    except ValueError as exc:
        raise forms.ValidationError(f"{str(exc)[0].upper()}{str(exc)[1:]}.") from None


class CoatingEventAdminForm(forms.ModelForm):
    """A coating row of the mirror's admin page: its overcoats typed as on the mirror page, where the model keeps
    them as a JSON list."""

    layers = forms.CharField(
        required=False, widget=forms.Textarea(attrs={"rows": 3, "cols": 30}),
        help_text=f"Overcoats as {layers_text.FORMAT}. Empty: bare metal.",
    )

    class Meta:
        model = CoatingEvent
        fields = ("coated_on", "metal", "layers", "note")

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        if self.instance.pk:
            self.initial["layers"] = layers_text.as_text(self.instance.layers)

    def clean_layers(self) -> list[dict]:
        return layers_field_clean(self.cleaned_data["layers"])

    def clean(self):
        """A new coating is not logged while its recoat's removal is not finished (``coating_before_removal``), here as
        on the mirror page; nor is a stored one re-dated so (the same check, on its changed date)."""
        data = super().clean()
        day, mirror_id = data.get("coated_on"), self.instance.mirror_id
        if day is not None and mirror_id is not None and (not self.instance.pk or "coated_on" in self.changed_data):
            from .services import coating_before_removal

            if problem := coating_before_removal(Mirror.objects.get(pk=mirror_id), day):
                self.add_error("coated_on", problem[0].upper() + problem[1:] + ".")
        return data


class MirrorAdminForm(forms.ModelForm):
    """A mirror record is offered only the mirror subsystems (``TRAIN_KINDS``) in service that have none yet, and
    its own; ``Mirror.clean`` refuses any other all the same."""

    class Meta:
        model = Mirror
        fields = "__all__"

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        offered = Subsystem.objects.filter(kind__in=TRAIN_KINDS, retired_on__isnull=True, mirror__isnull=True)
        if self.instance.subsystem_id:
            offered = offered | Subsystem.objects.filter(pk=self.instance.subsystem_id)
        field = self.fields["subsystem"]
        field.queryset = offered  # each named with its site, fetched with it (the admin's ChoicesNamedWithSite)
        field.help_text = "A primary or secondary mirror subsystem in service that has no mirror record yet."


class CoatingForm(RecipeForm):
    coated_on = forms.DateField(
        widget=forms.DateInput(attrs={"type": "date"}),
        help_text="The mirror's recoat and cleaning service plans restart their counting from this date (a service "
        "record is logged for each).",
    )
    note = forms.CharField(max_length=200, required=False)
    field_order = ["coated_on", "metal", "layers", "note"]

    def repeats(self, mirror: Mirror, by) -> CoatingEvent | None:
        """The coating this form, sent again, would repeat: one of this mirror on the same day with the same recipe and
        note, by whoever logged it (the event keeps no person); None when there is none. A second copy would restart
        the recoat plans twice."""
        return mirror.coatings.filter(**self.cleaned_data).first()


#: A band edge or step typed as nan, inf or a number too large for a float.
_NOT_A_NUMBER = {"invalid": "Enter a finite number of nanometres, e.g. 400."}


def _metal_ranges() -> str:
    """Where each metal's optical data reach, for the band's help text: "Aluminium (Al) 0.12399 to 200,000 nm, ..."."""
    return ", ".join(f"{METAL_NAMES[m]} {low:,g} to {high:,g} nm"
                     for m in METALS for low, high in [wavelength_range_nm([m])])


class CalculatorForm(RecipeForm):
    """The coating calculator's recipe, band and step. Refuses, before anything is computed, a band outside the
    recipe's optical data and a grid of more than ``coating.MAX_GRID_SIZE`` wavelengths."""

    from_nm = forms.FloatField(label="Band from (nm)", initial=400, error_messages=_NOT_A_NUMBER)
    to_nm = forms.FloatField(
        label="Band to (nm)", initial=1000, error_messages=_NOT_A_NUMBER,
        help_text=f"Both edges within the optical data of the metal and its overcoats: {_metal_ranges()}; "
        "overcoats narrow the band further.",
    )
    step_nm = forms.FloatField(
        label="Step (nm)", initial=10, min_value=0.1, error_messages=_NOT_A_NUMBER,
        help_text=f"At least 0.1 nm; the curve holds at most {MAX_GRID_SIZE:,} wavelengths.",
    )
    response = forms.FileField(
        required=False,
        help_text=f"Optional CSV with columns wavelength_nm,weight, at most {response_csv.MAX_BYTES:,} bytes: "
        "weights the band mean.",
    )

    def clean_response(self):
        upload = self.cleaned_data["response"]
        if upload and upload.size > response_csv.MAX_BYTES:
            raise forms.ValidationError(
                f"Response: the file is {upload.size:,} bytes; the limit is {response_csv.MAX_BYTES:,} bytes."
            )
        return upload

    def clean(self):
        cleaned = super().clean()
        from_nm, to_nm, step_nm = (cleaned.get(name) for name in ("from_nm", "to_nm", "step_nm"))
        if from_nm is None or to_nm is None:
            return cleaned
        if "metal" in cleaned and "layers" in cleaned:
            low, high = wavelength_range_nm([cleaned["metal"], *(layer["material"] for layer in cleaned["layers"])])
            for name, label, value in (("from_nm", "Band from", from_nm), ("to_nm", "Band to", to_nm)):
                if not low <= value <= high:
                    self.add_error(name, f"{label}: {value:g} nm is outside {low:,g} to {high:,g} nm, where the "
                                         "optical data of this metal and its overcoats overlap.")
        if from_nm >= to_nm:
            self.add_error("to_nm", f"Band to: {to_nm:g} nm must be above band from ({from_nm:g} nm).")
        if self.errors:  # the grid is counted only over a band known to be within the data
            return cleaned
        size = grid_size(from_nm, to_nm, step_nm)
        if size > MAX_GRID_SIZE:
            self.add_error("step_nm", (
                f"Step: {step_nm:g} nm from {from_nm:g} to {to_nm:g} nm asks for {size:,} wavelengths; the limit is "
                f"{MAX_GRID_SIZE:,}. Choose a step of {_step_within_limit_nm(to_nm - from_nm):g} nm or more, or a "
                "narrower band."
            ))
        return cleaned


def _step_within_limit_nm(span_nm: float) -> float:
    """The finest round step (1, 2 or 5 times a power of ten) whose grid over ``span_nm`` stays within
    ``MAX_GRID_SIZE`` wavelengths: a grid of step ``s`` has at most ``span_nm / s + 2`` of them."""
    least = span_nm / (MAX_GRID_SIZE - 2)
    decade = 10.0 ** math.floor(math.log10(least))
    return next(m * decade for m in (1, 2, 5, 10) if m * decade >= least)
