"""What a trigger can count. Adding a trigger metric: add it here, then teach
``observatory_ops.planning.services`` how to read it (``UsageLog.per_night`` for a quantity of the nightly
log, ``_site_recompute`` for anything else)."""

CALENDAR_DAYS = "calendar_days"
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

#: Metrics summed from the nightly usage log, with the NightUsage field each one reads.
USAGE_FIELDS = {
    OPEN_HOURS: "open_hours",
    SLEWS: "slews",
    BRAKE_CYCLES: "brake_cycles",
    AXIS1_TRAVEL: "axis1_travel_deg",
    AXIS2_TRAVEL: "axis2_travel_deg",
}
