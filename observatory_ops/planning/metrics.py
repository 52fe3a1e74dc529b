"""What a trigger can count. Adding a trigger metric: add it here (with its bound in ``MAX_LIMIT``), then teach
``observatory_ops.planning.services`` how to read it (``UsageLog.per_night`` for a quantity of the nightly
log, ``_site_recompute`` for anything else)."""

from observatory_ops.calc.triggers import CALENDAR_DAYS  # the due status reads it there (calc.triggers.due_status)

OPEN_HOURS = "open_hours"
SLEWS = "slews"
BRAKE_CYCLES = "brake_cycles"
AXIS1_TRAVEL = "axis1_travel_deg"
AXIS2_TRAVEL = "axis2_travel_deg"
DUST_HOURS = "dust_hours"
READING = "reading"
RECOAT_LINE = "recoat_line"

METRICS: dict[str, tuple[str, str]] = {
    # code: (label, unit)
    CALENDAR_DAYS: ("Calendar days", "days"),
    OPEN_HOURS: ("Open-dome hours", "h"),
    SLEWS: ("Slews", "slews"),
    BRAKE_CYCLES: ("Brake cycles", "cycles"),
    AXIS1_TRAVEL: ("Axis 1 travel (RA / azimuth)", "deg"),
    AXIS2_TRAVEL: ("Axis 2 travel (Dec / elevation)", "deg"),
    DUST_HOURS: ("Dust-weighted open hours", "h"),
    READING: ("Reading crossing a limit", ""),
    RECOAT_LINE: ("Mirror reflectance reaching its recoat line", ""),
}
METRIC_CHOICES = [(code, label) for code, (label, _unit) in METRICS.items()]


def rate_unit(metric: str, unit: str) -> str:
    """The unit of a metric's rate per day as sentences write it: a dust-weighted hour is an open hour times the
    night's dust weight, so a dusty site's day can count more than 24 of them, which "h per day" alone reads as an
    error; "dust-weighted h per day" does not."""
    return f"dust-weighted {unit}" if metric == DUST_HOURS else unit


#: The largest limit a trigger of each metric takes, with why (a reading trigger's limit is held to its quantity's
#: own range instead, ``logbook.quantities.PLAUSIBLE_RANGE``). Plausibility bounds of our own (common practice, no
#: published source): 100 years for the calendar and for hours, and for counts 100 years of busy nights; each is over
#: 200 times the catalogue's longest default interval of its metric. A limit beyond one is a typing or unit slip,
#: refused before the recompute meets it (a calendar limit of 1e308 days overflowed it; 5,000,000 days ran past 9999).
MAX_LIMIT: dict[str, tuple[float, str]] = {
    CALENDAR_DAYS: (36_500, "100 years"),
    OPEN_HOURS: (876_000, "every hour of 100 years"),
    DUST_HOURS: (876_000, "every hour of 100 years, as open hours"),
    SLEWS: (10_000_000, "about 270 slews a night for 100 years"),
    BRAKE_CYCLES: (10_000_000, "about 270 cycles a night for 100 years"),
    AXIS1_TRAVEL: (100_000_000, "about 7 turns a night for 100 years"),
    AXIS2_TRAVEL: (100_000_000, "about 7 turns a night for 100 years"),
    # The mirror's own recoat line governs such a trigger (mirrors.services); its limit is kept as a fraction.
    RECOAT_LINE: (1, "a reflectance is a fraction"),
}

#: Metrics summed from the nightly usage log, with the NightUsage field each one reads.
USAGE_FIELDS = {
    OPEN_HOURS: "open_hours",
    SLEWS: "slews",
    BRAKE_CYCLES: "brake_cycles",
    AXIS1_TRAVEL: "axis1_travel_deg",
    AXIS2_TRAVEL: "axis2_travel_deg",
}
