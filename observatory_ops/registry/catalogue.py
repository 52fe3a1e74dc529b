"""The catalogue of subsystem kinds: what each kind is, its hazards and its default service plans.

Adding a kind: add one ``Kind`` to ``KINDS`` below (code, label, hazards, plans). Existing
subsystems are not changed; new subsystems of the kind get its default plans, which the engineer can
then edit per subsystem. Every default interval says where it comes from in ``basis``: "common
practice" (a rule of thumb of the trade, no published source) or "from memory". Replace them with the
manufacturer's figures for your own equipment.

Trigger metrics are listed in ``observatory_ops.planning.metrics``.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from observatory_ops.calc.trend import SERVO_LOOP_HZ, SETTLE_TIME_LIMIT_S

COMMON_PRACTICE = "common practice, no published source"
FROM_MEMORY = "from memory"


@dataclass(frozen=True)
class PlanTemplate:
    name: str
    task: str
    triggers: tuple[tuple, ...]  # (metric, limit), or (metric, limit, quantity) for a reading trigger
    basis: str
    dust_sensitivity: float = 0.0
    hazards: tuple[str, ...] = ()  # extra hazards of the task itself (beyond the subsystem's)
    steps: tuple[str, ...] = ()
    estimated_hours: float = 1.0
    tools: tuple[str, ...] = ()
    parts: tuple[str, ...] = ()  # spare-part names; matched to the site's stock by name on a work order
    readings: tuple[tuple[str, str], ...] = ()  # (quantity, limit as text) to record on the work order


@dataclass(frozen=True)
class Kind:
    code: str
    label: str
    hazards: tuple[str, ...]
    plans: tuple[PlanTemplate, ...] = field(default=())


_INSPECT_STEPS = (
    "Read the last service record and open faults for this subsystem.",
    "Inspect for wear, looseness, contamination and damage; photograph anything unusual.",
    "Record the readings listed on this work order, if any.",
    "Restore the subsystem to service and test it under observation.",
)

KINDS: dict[str, Kind] = {
    k.code: k
    for k in (
        Kind(
            "primary_mirror",
            "Primary mirror",
            ("optical_surface",),
            (
                PlanTemplate(
                    "Inspect and CO2-snow clean primary",
                    "Inspect the coating, clean with CO2 snow, measure reflectance at the marked positions.",
                    (("dust_hours", 400.0), ("calendar_days", 120.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("cryogen", "height", "moving_machinery"),
                    tools=("CO2 snow gun with dry-gas purge", "reflectometer", "head torch"),
                    parts=("CO2 cylinder for snow cleaning",),
                    readings=(("reflectance", "record before and after; compare with the mirror page"),),
                    steps=(
                        "Close the dome and park the telescope pointing at the horizon stop.",
                        "Open the mirror cover; let the mirror reach ambient temperature to avoid condensation.",
                        "Measure reflectance at the marked positions before cleaning.",
                        "Clean with CO2 snow from the centre outward, keeping the nozzle moving.",
                        "Measure reflectance again at the same positions and record both sets.",
                    ),
                    estimated_hours=3.0,
                ),
                PlanTemplate(
                    "Recoat primary",
                    "Remove, strip and recoat the primary mirror (aluminium is commonly recoated every one to two "
                    "years).",
                    (("recoat_line", 1.0), ("calendar_days", 730.0)),
                    COMMON_PRACTICE,
                    hazards=("suspended_load", "chemical", "vacuum_plant", "moving_machinery"),
                    estimated_hours=40.0,
                ),
            ),
        ),
        Kind(
            "secondary_mirror",
            "Secondary mirror",
            ("optical_surface", "height"),
            (
                PlanTemplate(
                    "Inspect and clean secondary",
                    "Inspect the secondary coating and clean with CO2 snow.",
                    (("dust_hours", 800.0), ("calendar_days", 180.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("cryogen", "moving_machinery"),
                    tools=("CO2 snow gun with dry-gas purge",),
                    estimated_hours=2.0,
                ),
            ),
        ),
        Kind(
            "mirror_cover",
            "Mirror cover",
            ("moving_machinery", "electrical"),
            (
                PlanTemplate(
                    "Check cover petals, hinges and seals",
                    "Check petal motion, hinge play, seal condition and the closed-position switch.",
                    (("calendar_days", 180.0), ("open_hours", 1500.0)),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "mirror_cell",
            "Mirror cell and support",
            ("optical_surface", "suspended_load"),
            (
                PlanTemplate(
                    "Check support points, pads and clips",
                    "Check axial and lateral support pads, clip clearances and the cell's fixing bolts.",
                    (("calendar_days", 365.0),),
                    COMMON_PRACTICE,
                    hazards=("moving_machinery",),
                    steps=_INSPECT_STEPS,
                    estimated_hours=2.0,
                ),
            ),
        ),
        Kind(
            "axis1_drive",
            "Right ascension / azimuth drive",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect axis 1 drive and check tracking",
                    "Inspect motor, couplings and mounting; check following error, settle time and motor current.",
                    # Settle time: a well-tuned direct-drive mount settles within about 1 s after a slew.
                    (
                        ("calendar_days", 180.0),
                        ("axis1_travel_deg", 250000.0),
                        ("reading", SETTLE_TIME_LIMIT_S, "settle_time_s"),
                    ),
                    FROM_MEMORY + "; settle-time limit " + COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                    tools=("laptop with the mount's tuning software", "clamp meter"),
                    readings=(("following_error_arcsec", "as the mount's acceptance test"), ("motor_current_a", "")),
                    estimated_hours=2.0,
                ),
            ),
        ),
        Kind(
            "axis2_drive",
            "Declination / elevation drive",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect axis 2 drive and check tracking",
                    "Inspect motor, couplings and mounting; check following error, settle time and motor current.",
                    # Settle time: a well-tuned direct-drive mount settles within about 1 s after a slew.
                    (
                        ("calendar_days", 180.0),
                        ("axis2_travel_deg", 150000.0),
                        ("reading", SETTLE_TIME_LIMIT_S, "settle_time_s"),
                    ),
                    FROM_MEMORY + "; settle-time limit " + COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                    tools=("laptop with the mount's tuning software", "clamp meter"),
                    readings=(("following_error_arcsec", "as the mount's acceptance test"), ("motor_current_a", "")),
                    estimated_hours=2.0,
                ),
            ),
        ),
        Kind(
            "drive_rollers",
            "Drive rollers",
            ("moving_machinery",),
            (
                PlanTemplate(
                    "Clean and inspect rollers and drive disc",
                    "Clean the roller and disc contact surfaces with solvent wipes; check for flats and pitting.",
                    (("calendar_days", 180.0), ("axis1_travel_deg", 150000.0), ("dust_hours", 1500.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=0.5,
                    hazards=("chemical",),
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "encoder",
            "Encoder scale and read head",
            ("moving_machinery", "optical_surface"),
            (
                PlanTemplate(
                    "Clean encoder scale, check read-head signal",
                    "Clean the scale with the maker's solvent, check read-head signal level along the full travel.",
                    (("calendar_days", 180.0), ("dust_hours", 600.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    hazards=("chemical",),
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "brake",
            "Brake",
            ("pneumatic", "moving_machinery"),
            (
                PlanTemplate(
                    "Check brake pads, air pressure and holding",
                    "Check pad wear, supply pressure, release time and that the brake holds the axis out of balance.",
                    (("calendar_days", 180.0), ("brake_cycles", 5000.0)),
                    FROM_MEMORY,
                    steps=_INSPECT_STEPS,
                    tools=("pressure gauge with quick coupling", "feeler gauges"),
                    parts=("Brake pad set",),
                    readings=(("brake_pressure_bar", "within the maker's range"), ("brake_release_s", "")),
                ),
            ),
        ),
        Kind(
            "limits",
            "Limits and interlocks",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Test limit switches and interlocks",
                    "Drive slowly onto each soft and hard limit; test emergency stops and dome interlocks.",
                    (("calendar_days", 90.0),),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "cable_routing",
            "Cable routing and cable wraps",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Inspect cable wraps for chafe and strain",
                    "Move each axis through its full range slowly and watch every cable wrap for snagging and wear.",
                    (("calendar_days", 180.0), ("axis1_travel_deg", 200000.0)),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "cooling_fans",
            "Cooling fans and filters",
            ("electrical",),
            (
                PlanTemplate(
                    "Replace fan filters",
                    "Replace the intake filters of the mirror-cell and electronics fans.",
                    (("dust_hours", 500.0), ("calendar_days", 180.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.5,
                    steps=_INSPECT_STEPS,
                    estimated_hours=0.5,
                    parts=("Fan intake filter 120 mm",),
                ),
                PlanTemplate(
                    "Check fan bearings and current",
                    "Listen for bearing noise, measure fan current, replace fans that drift.",
                    (("open_hours", 4000.0), ("calendar_days", 365.0)),
                    FROM_MEMORY,
                    steps=_INSPECT_STEPS,
                    estimated_hours=0.5,
                ),
            ),
        ),
        Kind(
            "focus_mechanism",
            "Focus and tip-tilt mechanism",
            ("moving_machinery", "height"),
            (
                PlanTemplate(
                    "Check focus and tip-tilt travel, lubricate",
                    "Run the focuser over its full range, check backlash, lubricate screws per the maker.",
                    (("calendar_days", 365.0), ("open_hours", 2000.0)),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "truss",
            "Trusses and top end",
            ("height",),
            (
                PlanTemplate(
                    "Check truss fasteners and collimation",
                    "Check fastener torque marks on trusses and spider, then check collimation.",
                    (("calendar_days", 365.0),),
                    COMMON_PRACTICE,
                    hazards=("laser", "moving_machinery"),
                    tools=("torque wrench", "alignment laser or autocollimator"),
                    steps=_INSPECT_STEPS,
                    estimated_hours=3.0,
                ),
            ),
        ),
        Kind(
            "ac_power",
            "AC power and switching",
            ("electrical",),
            (
                PlanTemplate(
                    "Inspect AC distribution and test residual-current devices",
                    "Inspect enclosures and terminations for heat marks, test residual-current devices.",
                    (("calendar_days", 180.0),),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "dc_supplies",
            "DC power supplies",
            ("electrical",),
            (
                PlanTemplate(
                    "Check DC supply voltages and ripple",
                    "Measure each DC rail under load; record voltage and ripple.",
                    (("calendar_days", 365.0),),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "computers",
            "Control computers",
            ("electrical",),
            (
                PlanTemplate(
                    "Check disks, backups, clock and intake filters",
                    "Check disk health, that backups restore, time synchronisation, and clean the intake filters.",
                    (("calendar_days", 90.0), ("dust_hours", 1000.0)),
                    COMMON_PRACTICE,
                    dust_sensitivity=1.0,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "servo_drives",
            "Servo drives",
            ("electrical", "moving_machinery"),
            (
                PlanTemplate(
                    "Check servo drive fault log and tuning",
                    "Read the fault log, check the drive's cooling, and step-test the loop: a direct-drive mount's "
                    f"loop closes at about {SERVO_LOOP_HZ / 1000:g} kHz and settles within about "
                    f"{SETTLE_TIME_LIMIT_S:g} s ({COMMON_PRACTICE}).",
                    (("calendar_days", 180.0), ("slews", 30000.0)),
                    FROM_MEMORY,
                    steps=_INSPECT_STEPS,
                ),
            ),
        ),
        Kind(
            "enclosure",
            "Enclosure (dome, shutter, roof)",
            ("moving_machinery", "electrical", "height"),
            (
                PlanTemplate(
                    "Inspect shutter and rotation drive, lubricate",
                    "Inspect shutter and rotation drives, wheels, seals and rain sensor; lubricate as the maker says.",
                    (("calendar_days", 90.0), ("open_hours", 1000.0)),
                    COMMON_PRACTICE,
                    steps=_INSPECT_STEPS,
                    estimated_hours=3.0,
                ),
            ),
        ),
        Kind("other", "Other", ()),
    )
}

KIND_CHOICES = [(k.code, k.label) for k in KINDS.values()]


def kind(code: str) -> Kind:
    try:
        return KINDS[code]
    except KeyError:
        raise ValueError(f"unknown subsystem kind {code!r}; known kinds: {', '.join(KINDS)}") from None
