"""Sites, telescopes and the tree of subsystems."""
from __future__ import annotations

import datetime as dt
import unicodedata
import zoneinfo

from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.urls import reverse
from django.utils import timezone
from simple_history.models import HistoricalRecords

from observatory_ops.calc import night_of, windows

from .catalogue import KIND_CHOICES, KINDS

#: How far from the equator both a site and its time zone's named place must be before their hemispheres are compared
#: (``Site._clean_latitude_against_zone``): a zone may reach a little across the equator (Ecuador, Kenya, Indonesia).
#: Our own margin, no published source.
ZONE_HEMISPHERE_MIN_DEG = 15.0


def name_key(name: str) -> str:
    """A name as the register compares names: capitals and surrounding spaces aside ("Azimuth drive " is
    "azimuth drive")."""
    return name.strip().casefold()


def name_alike(name: str, others) -> str | None:
    """The first of ``others`` (names) that is ``name`` but for capitals and surrounding spaces, None if none is."""
    wanted = name_key(name)
    return next((other for other in others if name_key(other) == wanted), None)


def named_anew(record: models.Model, *fields: str) -> bool:
    """Whether the names-alike check of ``record`` runs: it is new, or one of ``fields`` (its name and what scopes the
    name: its telescope, its subsystem) differs from the stored record's, capitals and spaces aside. A record stored
    beside a twin before the check existed is then still saved by an edit of its other fields."""
    if record.pk is None:
        return True
    stored = type(record).objects.filter(pk=record.pk).values(*fields).first()
    if stored is None:
        return True
    return any(name_key(value) != name_key(getattr(record, field)) if isinstance(value, str)
               else value != getattr(record, field) for field, value in stored.items())


def validate_one_line(value: str) -> None:
    """A name that heads a mail's subject, a page's title or a printed order's header: one line, no control characters
    (a line break in a subject makes the mail library refuse the whole message). Sites, telescopes, subsystems,
    service plans, parts, work order titles and isolation points."""
    if any(unicodedata.category(c) in ("Cc", "Zl", "Zp") for c in value):  # C0, DEL, C1, and the line separators
        raise ValidationError("Write the name on one line, without tabs or other control characters.")


def validate_time_zone(value: str) -> None:
    try:
        night_of.zone(value)
    except ValueError as exc:
        raise ValidationError(f"{str(exc)[0].upper()}{str(exc)[1:]}.") from None


def validate_crew_weekdays(value: str) -> None:
    try:
        windows.crew_weekdays_from(value)
    except ValueError as exc:
        raise ValidationError(f"{str(exc)[0].upper()}{str(exc)[1:]}.") from None


def crew_weekdays_text(digits: str) -> str:
    """The crew weekdays stored as ISO weekday digits in short words: "12345" is "Mon–Fri"."""
    return windows.weekdays_text(windows.crew_weekdays_from(digits))


def validate_hazards(value) -> None:
    from observatory_ops.workorders.cautions import HAZARDS

    if not isinstance(value, list) or any(h not in HAZARDS for h in value):
        raise ValidationError(f"hazards must be a list drawn from: {', '.join(HAZARDS)}")


def text_newlines_normalised(record: models.Model) -> None:
    """End every line of the record's multi-line text fields with "\\n". A browser sends a text box's lines ended by
    "\\r\\n" (the HTML standard's form encoding), so a text saved unchanged in the admin would otherwise differ from the
    stored one and show in the change history as changed. Called first thing in each registered model's ``clean()``."""
    for field in record._meta.concrete_fields:
        value = getattr(record, field.attname) if isinstance(field, models.TextField) else None
        if isinstance(value, str) and "\r" in value:
            setattr(record, field.attname, value.replace("\r\n", "\n").replace("\r", "\n"))


def latitude_text(degrees: float) -> str:
    """A latitude as pages write it: 39.6072 -> "39.607° N", -27.35 -> "27.350° S"."""
    return f"{abs(degrees):.3f}° {'N' if degrees >= 0 else 'S'}"


def longitude_text(degrees: float) -> str:
    """A longitude as pages write it: -110.3741 -> "110.374° W", 2.35 -> "2.350° E"."""
    return f"{abs(degrees):.3f}° {'E' if degrees >= 0 else 'W'}"


#: How far (hours) a site's time zone may run from the mean solar time of its longitude before the longitude is
#: refused as mistyped. Zones are wide, and some are kept far from the Sun: western China keeps UTC+8 at about
#: 74° E, some 3.1 h ahead of it (from memory); a longitude with the wrong sign is off by twice its own hours
#: (109° W typed as 109° E with America/Denver: over 9 h).
MAX_ZONE_GAP_H = 3.5

#: Plausibility bounds of our own (common practice, no published source) for a site's elevation, metres: the
#: lowest land is the Dead Sea shore at about -430 m and the highest observatories stand at about 5,600 m (both
#: from memory), so a figure outside is a slip of the keyboard or of the unit (feet).
ELEVATION_RANGE_M = (-500, 6000)
#: How far ahead (days) a forecast may count as due: one day to a year, our own bound (common practice, no
#: published source). Beyond a year nearly every plan would be listed as due.
LOOK_AHEAD_RANGE_DAYS = (1, 365)


class Site(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    name = models.CharField(max_length=120, validators=[validate_one_line])
    slug = models.SlugField(unique=True)
    latitude_deg = models.FloatField(
        validators=[MinValueValidator(-90), MaxValueValidator(90)], help_text="Degrees, north positive, south negative."
    )
    longitude_deg = models.FloatField(
        validators=[MinValueValidator(-180), MaxValueValidator(180)],
        help_text="Degrees, east positive, west negative (the Americas are negative).",
    )
    elevation_m = models.FloatField(
        default=0,
        validators=[
            MinValueValidator(ELEVATION_RANGE_M[0], f"An elevation below {ELEVATION_RANGE_M[0]:,} m is lower than any "
                              "land: check the figure, in metres above sea level."),
            MaxValueValidator(ELEVATION_RANGE_M[1], f"An elevation above {ELEVATION_RANGE_M[1]:,} m is higher than any "
                              "observatory: check the figure and its unit (metres, not feet)."),
        ],
        help_text=f"Metres above sea level, {ELEVATION_RANGE_M[0]:,} to {ELEVATION_RANGE_M[1]:,} (a plausibility "
        "bound of our own).",
    )
    time_zone = models.CharField(
        max_length=64, validators=[validate_time_zone], help_text="IANA name, e.g. America/Denver or Europe/Madrid."
    )
    dust_climate = models.TextField(blank=True, help_text="When and from where dust arrives at this site.")
    look_ahead_days = models.PositiveIntegerField(
        default=30,
        validators=[
            MinValueValidator(LOOK_AHEAD_RANGE_DAYS[0], f"Look ahead at least {LOOK_AHEAD_RANGE_DAYS[0]} day."),
            MaxValueValidator(LOOK_AHEAD_RANGE_DAYS[1], f"Look ahead at most {LOOK_AHEAD_RANGE_DAYS[1]} days: beyond "
                              "a year nearly every plan would count as due."),
        ],
        help_text=f"Items forecast within this many days count as due: {LOOK_AHEAD_RANGE_DAYS[0]} to "
        f"{LOOK_AHEAD_RANGE_DAYS[1]} (a bound of our own).",
    )
    crew_weekdays = models.CharField(
        max_length=7, default="12345", validators=[validate_crew_weekdays],
        error_messages={"blank": "Crew weekdays must give at least one working day."},
        help_text="The days the maintenance crew works, as ISO weekday digits: 1 Monday to 7 Sunday, so 12345 is "
        "Monday to Friday. The recoat planner starts the phases at the telescope (removal, reinstall, realignment) "
        "on these days and pauses them over the others.",
    )
    shared_enclosure = models.BooleanField(
        "one enclosure over every telescope", default=False,
        help_text="Ticked when the site's telescopes stand under one enclosure (a roll-off roof, one dome) registered "
        "as a subsystem of one of them: its isolation points are then locked for work with a moving telescope or "
        "enclosure at any of them, and its service plans count the whole site's nights, not that telescope's.",
    )
    digest_to = models.ManyToManyField(
        "auth.User", blank=True, related_name="digest_sites", verbose_name="due digest to",
        help_text="The engineers who get this site's daily due digest. Left empty, every engineer and administrator "
        "with an e-mail address gets it (a network's engineers each list their own sites).",
    )
    digest_sent_on = models.DateField(
        null=True, blank=True, editable=False,
        help_text="The site's local day of the last due digest sent: at most one a day (planning.digest).",
    )
    digest_refused = models.CharField(
        max_length=500, blank=True, editable=False,
        help_text="The addresses the mail server refused for good on the day of the last digest, with its reply; "
        "empty when it refused none (planning.digest.refused_for_good).",
    )

    class Meta:
        ordering = ["name"]

    def __str__(self) -> str:
        return self.name

    def get_absolute_url(self) -> str:
        return reverse("site-dashboard", args=[self.slug])

    @property
    def zone(self) -> zoneinfo.ZoneInfo:
        return zoneinfo.ZoneInfo(self.time_zone)

    def clean(self) -> None:
        text_newlines_normalised(self)
        errors: dict[str, list[str]] = {}  # each field's refusal, so one does not hide the other
        for check in (self._clean_longitude_against_zone, self._clean_latitude_against_zone, self._clean_slug_kept,
                      self._clean_name_unlike_the_others):
            try:
                check()
            except ValidationError as refused:
                errors.update(refused.message_dict)
        if errors:
            raise ValidationError(errors)

    def _clean_name_unlike_the_others(self) -> None:
        """Refuse the name of another site but for capitals or spaces: the site list, the due list's filter and the
        choices that name records with their site would show two alike (a site review added "vestal ridge
        observatory" beside "Vestal Ridge Observatory")."""
        if not self.name or not named_anew(self, "name"):
            return
        others = Site.objects.exclude(pk=self.pk).values_list("name", flat=True)
        if (alike := name_alike(self.name, others)) is not None:
            raise ValidationError({"name": (
                f"Name {self.name.strip()!r} is another site's, {alike!r} (capitals and spaces aside): the lists and "
                "choices would show the two alike. Give this site a name of its own."
            )})

    def _clean_slug_kept(self) -> None:
        """Refuse a new slug once anything reaches the site by the old one (``selectors.slug_uses``): the API and
        calendar addresses, the ``--site`` of commands and cron lines, and the pages' links would find no site."""
        from .selectors import SLUG_KEPT, slug_uses  # the selectors read other apps' models, which import this module

        stored = Site.objects.filter(pk=self.pk).values_list("slug", flat=True).first() if self.pk else None
        if stored is None or stored == self.slug:
            return
        uses = slug_uses(Site(pk=self.pk, slug=stored))
        if uses:
            raise ValidationError({"slug": (
                f"The slug {stored!r} is in use: {uses}. {SLUG_KEPT}, so it stays as it is; the site's name can "
                "still change."
            )})

    def _clean_longitude_against_zone(self) -> None:
        """Refuse a longitude far from its time zone's (``calc.night_of.zone_gap_h``): most often one typed with
        the wrong sign, which would put every sunset and dark hour of the site hours out."""
        if self.longitude_deg is None or not self.time_zone:
            return
        year = timezone.now().year
        try:
            gap, _ = night_of.zone_gap_h(self.longitude_deg, self.time_zone, year)
        except ValueError:
            return  # an unknown zone: the time zone's own validator says so
        if abs(gap) <= MAX_ZONE_GAP_H:
            return
        solar = self.longitude_deg / 15
        flipped, _ = night_of.zone_gap_h(-self.longitude_deg, self.time_zone, year)
        # Both of the zone's offsets, named by month: the one the gap was measured from may be daylight time, which
        # the zone does not keep in the other half of the year.
        january, july = night_of.zone_offsets_h(self.time_zone, year)
        kept = (f"UTC{january:+g} h all year" if january == july
                else f"UTC{january:+g} h in January and UTC{july:+g} h in July")
        hint = (
            f"East is positive and west negative: is it {longitude_text(-self.longitude_deg)} "
            f"({-self.longitude_deg:g})?" if abs(flipped) <= MAX_ZONE_GAP_H
            else "Check the longitude and the time zone."
        )
        raise ValidationError({"longitude_deg": (
            f"Longitude {longitude_text(self.longitude_deg)} ({self.longitude_deg:g}) has its mean solar time at "
            f"UTC{solar:+.1f} h, but {self.time_zone} keeps {kept}: more than {MAX_ZONE_GAP_H:g} hours apart, "
            f"farther than a time zone is from the places that keep it. {hint}"
        )})

    def _clean_latitude_against_zone(self) -> None:
        """Refuse a latitude in the other hemisphere from the place its time zone is named after
        (``calc.night_of.zone_reference_latitude``), both at least ``ZONE_HEMISPHERE_MIN_DEG`` from the equator: most
        often one typed without its minus sign, which turns every season of dark hours round (a site review saved
        29.8 N with Australia/Perth). Near the equator, where a zone may reach across it, nothing is checked."""
        if self.latitude_deg is None or not self.time_zone:
            return
        reference = night_of.zone_reference_latitude(self.time_zone)
        if reference is None or min(abs(reference), abs(self.latitude_deg)) < ZONE_HEMISPHERE_MIN_DEG:
            return
        if (reference > 0) == (self.latitude_deg > 0):
            return
        raise ValidationError({"latitude_deg": (
            f"Latitude {latitude_text(self.latitude_deg)} ({self.latitude_deg:g}) is in the other hemisphere from "
            f"{self.time_zone} (the time zone database places it at {latitude_text(reference)}). North is positive "
            f"and south negative: is it {latitude_text(-self.latitude_deg)} ({-self.latitude_deg:g})? Otherwise "
            "check the time zone."
        )})

    @property
    def crew_days(self) -> frozenset[int]:
        """The crew's working days as ISO weekday numbers (1 Monday .. 7 Sunday)."""
        return windows.crew_weekdays_from(self.crew_weekdays)

    @property
    def crew_days_text(self) -> str:
        """The crew's working days in short words, e.g. "Mon–Fri"."""
        return crew_weekdays_text(self.crew_weekdays)


class CrewDayOff(models.Model):
    """A whole day the site's maintenance crew is off besides its weekly days off (a public holiday, a site
    closure): the recoat planner neither starts nor works a phase at the telescope on it."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    site = models.ForeignKey(Site, on_delete=models.CASCADE, related_name="crew_days_off")
    date = models.DateField(
        help_text="A day the crew is off besides the weekdays not ticked above; the recoat planner pauses work at "
        "the telescope over it, with the telescope down, so its night counts in a window's cost."
    )
    note = models.CharField(max_length=120, blank=True, help_text="Why, e.g. public holiday.")

    class Meta:
        ordering = ["site", "date"]
        constraints = [models.UniqueConstraint(fields=["site", "date"], name="one_crew_day_off_per_site_date")]
        verbose_name = "crew day off"
        verbose_name_plural = "crew days off"

    def __str__(self) -> str:
        return f"{self.date:%a %d %b %Y}" + (f" ({self.note})" if self.note else "")

    def clean(self) -> None:
        latest = timezone.localdate() + dt.timedelta(days=366 * 10)
        if self.date and not dt.date(2000, 1, 1) <= self.date <= latest:
            raise ValidationError({"date": f"{self.date:%d %b %Y} looks mistyped: a crew day off falls between "
                                           f"2000 and ten years from now ({latest:%d %b %Y})."})
        stored = CrewDayOff.objects.filter(site=self.site_id, date=self.date).exclude(pk=self.pk)
        if self.site_id and self.date and stored.exists():
            raise ValidationError({"date": f"{self.date:%a %d %b %Y} is already listed among this site's crew days "
                                           "off: give each date once."})


class Telescope(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    class Mount(models.TextChoices):
        FORK = "fork", "Equatorial fork"
        GERMAN = "german", "German equatorial"
        HORSESHOE = "horseshoe", "Horseshoe equatorial"
        ALT_AZ = "altaz", "Alt-azimuth"
        OTHER = "other", "Other"

    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="telescopes")
    name = models.CharField(
        max_length=120, validators=[validate_one_line],
        help_text="Also the name its control software gives for nights of its own (the nights CSV's telescope column "
        "and the API's telescope key): renamed here, it must be renamed there too, or those nights are refused.",
    )
    aperture_m = models.FloatField(validators=[MinValueValidator(0.01), MaxValueValidator(20)])
    mount = models.CharField(max_length=16, choices=Mount.choices)
    tube_mass_kg = models.FloatField(null=True, blank=True, validators=[MinValueValidator(0)])
    notes = models.TextField(blank=True)

    class Meta:
        ordering = ["site__name", "name"]
        constraints = [models.UniqueConstraint(fields=["site", "name"], name="telescope_name_unique_per_site")]

    def __str__(self) -> str:
        return f"{self.name} ({self.aperture_m:g} m)"

    @property
    def site_label(self) -> str:
        """The telescope named with its site, where a choice lists several sites' telescopes (names repeat across
        sites): "Vestal Ridge: MC-80 (0.8 m)". Pages of one site name it without (``__str__``)."""
        return f"{self.site.name}: {self}"

    def clean(self) -> None:
        text_newlines_normalised(self)
        if self.site_id and self.name:
            self._clean_name_unlike_the_others()
        stored = Telescope.objects.filter(pk=self.pk).values_list("site_id", flat=True).first() if self.pk else None
        if stored is not None and stored != self.site_id:
            self._clean_site_kept()

    def _clean_site_kept(self) -> None:
        """Refuse a move to another site once anything is recorded of the telescope (``selectors.records_of``):
        the records belong to its site's log and history, which the move would rewrite."""
        from .selectors import records_of  # the selectors read other apps' models, which import this module

        recorded = records_of(list(self.subsystems.values_list("pk", flat=True)), telescope=self)
        if recorded:
            raise ValidationError({"site": (
                f"This telescope has records at its site: {recorded}. They stay in that site's log and history, so "
                "it cannot move to another site. Register it at the new site as a new telescope."
            )})

    def _clean_name_unlike_the_others(self) -> None:
        """Refuse a name another telescope of the site has but for capitals or surrounding spaces: the nights CSV
        and the API find a telescope by its name ignoring those (``logbook.nights_csv``), so a night could go to
        the wrong one. Checked here, not by the database, so the message can say why."""
        others = Telescope.objects.filter(site=self.site_id).exclude(pk=self.pk).values_list("name", flat=True)
        if (alike := name_alike(self.name, others)) is not None:
            raise ValidationError({"name": (
                f"Name {self.name.strip()!r} is another telescope's at this site, {alike!r}, but for capitals or "
                "spaces: nights sent by the CSV or the API name their telescope ignoring those, so they could go to "
                "the wrong one. Give this telescope a name of its own."
            )})


#: The earliest "in service since" date taken as typed; an earlier one is a slip of the keyboard.
EARLIEST_IN_SERVICE = dt.date(1900, 1, 1)


class SubsystemQuerySet(models.QuerySet):
    def in_service(self):
        return self.filter(retired_on__isnull=True)


def is_shared_enclosure(site: Site, kind: str) -> bool:
    """A subsystem of ``kind`` at ``site`` is the enclosure all its telescopes share: the site says it has one, and
    the kind has a supply of its own (``catalogue.Kind.separate_supply``: the dome's or roof's drives)."""
    return site.shared_enclosure and kind in KINDS and KINDS[kind].separate_supply


class Subsystem(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    telescope = models.ForeignKey(Telescope, on_delete=models.PROTECT, related_name="subsystems")
    parent = models.ForeignKey("self", null=True, blank=True, on_delete=models.PROTECT, related_name="children")
    kind = models.CharField(max_length=32, choices=KIND_CHOICES)
    name = models.CharField(max_length=120, validators=[validate_one_line])
    hazards = models.JSONField(default=list, blank=True, validators=[validate_hazards])
    no_hazards_found = models.BooleanField(
        "no hazards found", default=False,
        help_text="Tick only when an engineer has checked the work done on it and found none of the hazards above. "
        "A subsystem of a kind that brings no hazards of its own (Other) carries at least one hazard or this tick: "
        "without either, nobody has recorded its hazards, and its work orders are neither issued nor started.",
    )
    serial_number = models.CharField(max_length=80, blank=True)
    notes = models.TextField(blank=True)
    in_service_since = models.DateField(
        "in service since", null=True, blank=True,
        help_text="The day it went into service: the start of the operating hours (the open hours of its "
        "telescope's nightly log) counted for its reliability figures. Leave empty to count from the earliest day "
        "the record shows it in service: its earliest service record or its service plans' earliest 'counting from' "
        "date, whichever is earlier (without either, the day it was registered, else the first logged night).",
    )
    retired_on = models.DateField(null=True, blank=True)

    objects = SubsystemQuerySet.as_manager()

    class Meta:
        ordering = ["telescope__name", "name"]

    def __str__(self) -> str:
        return f"{self.telescope.name}: {self.name}"

    def get_absolute_url(self) -> str:
        return reverse("subsystem-detail", args=[self.pk])

    @property
    def kind_label(self) -> str:
        return KINDS[self.kind].label if self.kind in KINDS else self.kind

    @property
    def hazards_recorded(self) -> bool:
        """Someone has recorded its hazards: it carries at least one, or an engineer recorded that it has none
        (``no_hazards_found``), or its kind brings hazards of its own (the catalogue's, given to it when it was
        registered: one without any had them taken off in the admin, which warns). A subsystem of the kind "Other"
        brings none, so it has neither until an engineer says; its work orders then cannot know their cautions or
        whether to isolate."""
        return bool(self.hazards) or self.no_hazards_found or bool(self.kind in KINDS and KINDS[self.kind].hazards)

    @property
    def serves_the_whole_site(self) -> bool:
        """An enclosure (a kind with a supply of its own) that every telescope of its site stands under
        (``Site.shared_enclosure``)."""
        return is_shared_enclosure(self.telescope.site, self.kind)

    def clean(self) -> None:
        text_newlines_normalised(self)
        if self.parent_id and self.parent.telescope_id != self.telescope_id:
            raise ValidationError({"parent": "The parent must belong to the same telescope."})
        if self.parent_id and self.pk and self.parent_id == self.pk:
            raise ValidationError({"parent": "A subsystem cannot be its own parent."})
        if self.pk and self.telescope_id:
            stored = (Subsystem.objects.filter(pk=self.pk)
                      .values_list("telescope_id", "telescope__site_id", "telescope__name").first())
            if stored is not None and stored[0] != self.telescope_id:
                self._clean_telescope_kept(moves_site=stored[1] != self.telescope.site_id, leaves=stored[2])
        if self.telescope_id and self.name and not self.retired_on and named_anew(self, "name", "telescope_id"):
            self._clean_name_unlike_the_others()
        if self.in_service_since:
            self._clean_in_service_since()
        if self.retired_on:
            self._clean_retired_on()
        self._clean_hazards_recorded()

    def _clean_hazards_recorded(self) -> None:
        """Refuse a subsystem of a kind that brings no hazards (``Other``) with no hazard and no record that it has
        none (``hazards_recorded``), and any with both: the tags choose the cautions and the energy isolation of its
        work orders, so "none" is said on purpose. A new one gets its kind's hazards besides those ticked
        (``services.subsystem_create``, the admin's add page); taking a kind's own off a stored one is the admin's to
        warn of (``SubsystemAdmin.save_model``)."""
        own = KINDS[self.kind].hazards if self.kind in KINDS else ()
        hazards = [*(self.hazards if isinstance(self.hazards, list) else []), *(() if self.pk else own)]
        if hazards and self.no_hazards_found:
            from observatory_ops.workorders.cautions import HAZARDS  # work orders build on the register

            named = ", ".join(HAZARDS.get(code, code) for code in dict.fromkeys(hazards))
            kinds = f" (a new {self.kind_label} gets its kind's)" if own and not self.pk else ""
            raise ValidationError({"no_hazards_found": (
                f"'No hazards found' is ticked, but it has hazards{kinds}: {named}. Untick one or the other."
            )})
        if not hazards and not self.no_hazards_found and not own:
            raise ValidationError({"hazards": (
                f"The kind {self.kind_label!r} brings no hazards of its own, so nobody has recorded this subsystem's "
                "hazards: tick those its work involves, or, once an engineer has checked that there are none, tick "
                "'No hazards found'. Its work orders take their safety cautions and energy isolation from them."
            )})

    def _clean_telescope_kept(self, moves_site: bool, leaves: str) -> None:
        """Refuse a move to another telescope while a work order not yet done names the subsystem or one of its parts
        (which move with it): the order locks out the telescope it was made for (``selectors.open_orders_of``). And
        refuse a move to another telescope once anything is recorded of them (``selectors.records_of``): records at
        another site belong to their site's log and history; at the same site, the counters since the last service
        would count the other telescope's nights as if it had always been there (a site review moved a cable routing
        and its axis travel since its service went from 39,744 to 94,260 deg, its reliability hours with it), unless
        the admin's form says it was registered on the wrong telescope (``registered_on_wrong_telescope``, set by
        ``forms.SubsystemAdminForm``): its records were then always the other telescope's. ``leaves``: the name of
        the telescope it is stored on, read with the move's other stored figures."""
        from .selectors import open_orders_of, parts_of, records_of  # they read models that import this module

        parts = parts_of(self)
        ids = [self.pk, *(part.pk for part in parts)]
        whose = "This subsystem and its parts have" if parts else "This subsystem has"
        orders = open_orders_of(ids)
        if orders:
            raise ValidationError({"telescope": (
                f"{whose} work orders not yet done: {', '.join(f'{o.number} ({o.state})' for o in orders)}. Each locks "
                "out the telescope it was made for, so it stays on that one until they are finished or withdrawn."
            )})
        recorded = records_of(ids)
        if recorded and moves_site:
            raise ValidationError({"telescope": (
                f"{whose} records at its site: {recorded}. They stay in that site's log and history, so it cannot "
                "move to a telescope at another site. Register it there as a new subsystem, and retire this one."
            )})
        # An enclosure all the site's telescopes share counts the site's nights wherever it is registered
        # (``serves_the_whole_site``): moved, it counts the same nights.
        whole_site = is_shared_enclosure(self.telescope.site, self.kind)
        if recorded and not whole_site and not getattr(self, "registered_on_wrong_telescope", False):
            raise ValidationError({"telescope": (
                f"{whose} records on {leaves}: {recorded}. Its counters since its last "
                "service count that telescope's nights; moved, they would count the other telescope's nights back "
                "to that service, as if it had always been there, and its reliability hours with them. If the part "
                "was moved, register it on the other telescope as a new subsystem, with the day it was fitted there "
                "as its 'in service since' and its plans' 'counting from', and retire this one on that day. If it "
                "was registered on the wrong telescope and has always been on the other one, tick 'It was registered "
                "on the wrong telescope'."
            )})

    def _clean_name_unlike_the_others(self) -> None:
        """Refuse the name of another subsystem in service on the telescope but for capitals or spaces, whatever their
        parents: the pages, the due list and the work-order choices name a subsystem by its telescope and its own
        name ("T70: Encoder"), so they would list two alike, each with plans of its own (a site review added
        "azimuth drive " beside "Azimuth drive"; a part named as a part of another parent reads the same). A retired
        one's name may be taken again by its replacement."""
        others = (Subsystem.objects.filter(telescope_id=self.telescope_id, retired_on__isnull=True)
                  .exclude(pk=self.pk).values_list("name", flat=True))
        if (alike := name_alike(self.name, others)) is not None:
            raise ValidationError({"name": (
                f"Name {self.name.strip()!r} is another subsystem's in service on this telescope, {alike!r} (capitals "
                "and spaces aside): the pages and the work-order choices name both as "
                f"'{self.telescope.name}: {alike.strip()}'. Give it a name of its own (a part with its parent's: "
                "'Axis 2 encoder'); if it replaces that one, retire that one first."
            )})

    def _clean_service_date(self, field: str, label: str, when_future: str) -> None:
        """A date of the subsystem's service life (``field``, called ``label`` on the page): from
        ``EARLIEST_IN_SERVICE`` on (an earlier one is a typing slip), and not after the site's today."""
        from observatory_ops.planning.services import site_today  # planning's models import this module

        day = getattr(self, field)
        if day < EARLIEST_IN_SERVICE:
            raise ValidationError({field: f"{label} {day:%d %b %Y} looks mistyped: give a date from "
                                          f"{EARLIEST_IN_SERVICE:%Y} on."})
        if self.telescope_id:
            today = site_today(self.telescope.site)
            if day > today:
                raise ValidationError({field: f"{label} {day:%d %b %Y} is in the future: the site's today is "
                                              f"{today:%d %b %Y}. {when_future}"})

    def _clean_retired_on(self) -> None:
        self._clean_service_date("retired_on", "Retired on", "Retire it on the day it leaves service, not before.")

    def _clean_in_service_since(self) -> None:
        self._clean_service_date("in_service_since", "In service since",
                                 "Give the day it went into service, or leave it empty.")
        since = self.in_service_since
        if self.retired_on and since > self.retired_on:
            raise ValidationError({"in_service_since": f"In service since {since:%d %b %Y} is after the day it was "
                                                       f"retired ({self.retired_on:%d %b %Y})."})
