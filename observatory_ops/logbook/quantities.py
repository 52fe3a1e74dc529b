"""Quantities a technician measures, with their units and plausible ranges. A new quantity takes a line in
both tables."""
import math

from observatory_ops.registry.catalogue import KINDS

QUANTITIES: dict[str, tuple[str, str]] = {
    # code: (label, unit)
    "settle_time_s": ("Settle time after a slew", "s"),
    "following_error_arcsec": ("RMS following error", "arcsec"),
    "motor_current_a": ("Motor current", "A"),
    "brake_pressure_bar": ("Brake air pressure", "bar"),
    "brake_release_s": ("Brake release time", "s"),
    # Always the mean over the mirror's band: the decline fit takes band means (a value at one wavelength is logged on
    # the mirror's measurement form, which keeps its wavelength).
    "reflectance": ("Band reflectance", "fraction"),
    "fan_current_a": ("Fan current", "A"),
    "supply_voltage_v": ("Supply voltage", "V"),
    "ripple_mv": ("Supply ripple", "mV"),
    "encoder_signal_pct": ("Encoder signal level", "%"),
    "temperature_c": ("Temperature", "degC"),
    "open_close_time_s": ("Open or close time", "s"),  # a shutter, roof or mirror cover, end to end
    "rcd_trip_time_ms": ("RCD trip time", "ms"),  # as a residual-current device tester reads it
    "focus_backlash_mm": ("Focus backlash", "mm"),
    "clearance_mm": ("Feeler-gauge clearance", "mm"),  # a mirror clip's or a brake pad's gap
}
QUANTITY_CHOICES = [(code, f"{label} ({unit})") for code, (label, unit) in QUANTITIES.items()]

#: code: (lowest, highest) reading accepted, in the quantity's unit. Apart from reflectance (a fraction)
#: these are plausibility bounds of our own, not published limits: wide enough for the equipment of any
#: small observatory, so a reading outside one is a typing or unit mistake (a settle time of 1e300 s once
#: sent a trend to infinity). Only temperature can truly be below zero.
PLAUSIBLE_RANGE: dict[str, tuple[float, float]] = {
    "settle_time_s": (0, 3600),  # an hour: a mount still settling then is broken, not slow
    "following_error_arcsec": (0, 3600),  # one degree
    "motor_current_a": (0, 200),
    "brake_pressure_bar": (0, 50),  # air brakes run at a few bar (from memory)
    "brake_release_s": (0, 60),
    "reflectance": (0, 1),  # a fraction, by definition
    "fan_current_a": (0, 50),
    "supply_voltage_v": (0, 1000),  # up to a three-phase supply or a drive's DC bus
    "ripple_mv": (0, 10_000),  # 10 V
    "encoder_signal_pct": (0, 200),  # percent of the nominal level; above 100 is a strong signal
    "temperature_c": (-90, 150),  # the coldest air on record is about -89 degC (from memory)
    "open_close_time_s": (0, 3600),  # an hour: a shutter or cover still moving then is stuck, not slow
    "rcd_trip_time_ms": (0, 10_000),  # ten seconds: a tester gives up long before (from memory)
    "focus_backlash_mm": (0, 100),  # more than a focuser's whole travel
    "clearance_mm": (0, 100),  # a feeler-gauge set stops at about 1 mm (from memory); 100 mm is a unit slip
}

#: Decimals every reflectance is written to (a measurement, an estimate, a recoat line, a computed fresh value), on
#: pages, in sentences and on charts alike, so one figure reads the same wherever it appears and an estimate can be
#: compared with its recoat line digit for digit (a choice of display, as the mirror page lists its measurements).
REFLECTANCE_DECIMALS = 4


def reflectance_text(value: float) -> str:
    """A reflectance as every page, sentence and chart writes it: 0.82768 -> "0.8277", 0.839 -> "0.8390"."""
    return f"{value:.{REFLECTANCE_DECIMALS}f}"


def significant(value: float, figures: int = 3, signed: bool = False) -> str:
    """``value`` to ``figures`` significant figures, with thousands separators and no exponent: 0.002457 ->
    "0.00246", 714.499 -> "714", 5.216 -> "5.22", 12345.6 -> "12,300"; ``signed`` puts "+" before a positive
    value (a trend), so both ends of an interval read alike: "+0.00210 to +0.00265"."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g}"
    decimals = figures - 1 - math.floor(math.log10(abs(value)))
    return f"{'+' if signed and value > 0 else ''}{round(value, decimals):,.{max(decimals, 0)}f}"


def unit_of(code: str) -> str:
    return QUANTITIES[code][1]


#: A reflectance typed above 1 and up to this is a fraction mistyped (1.2 for 0.92, or a 1 too many), not a percentage:
#: 1.2 % is no reading of a telescope mirror, whose fresh aluminium reflects about 90 %. Our own bound (common practice,
#: no published source); above it a value is read as a percentage (87 for 0.87).
REFLECTANCE_ABOVE_ONE_NOT_PERCENT = 1.5


def value_problem(code: str, value: float) -> str | None:
    """Why a reading cannot be right (None when it can): not finite, or outside ``PLAUSIBLE_RANGE``."""
    label, unit = QUANTITIES[code]
    low, high = PLAUSIBLE_RANGE[code]
    if not math.isfinite(value):
        return f"{label} must be a finite number"
    if code == "reflectance" and not low <= value <= high:
        if 1 < value <= REFLECTANCE_ABOVE_ONE_NOT_PERCENT:
            return f"a reflectance is at most 1 (a fraction, 0.87 for 87 %), and {value:g} is above it"
        percent = f": {value:g} % is {value / 100:g}" if 1 < value <= 100 else ""
        return f"a reflectance is a fraction between 0 and 1{percent}"
    if value < low:
        if low == 0:
            return f"{label} cannot be negative (got {value:g})"
        return f"{label} cannot be below {low:g} {unit} (got {value:g})"
    if value > high:
        return f"{label} cannot be above {high:,g} {unit} (got {value:g}); a larger reading is not plausible"
    return None


def usual_for_kind(kind: str) -> set[str]:
    """What a reading of a subsystem of this kind usually is (``registry.catalogue``): the quantities the kind's
    default plans watch (reading triggers) or ask for on their work orders, and the others measured on it
    (``Kind.quantities``). Empty for a kind on which nothing is usually measured."""
    if kind not in KINDS:
        return set()
    plans = KINDS[kind].plans
    watched = {trigger[2] for plan in plans for trigger in plan.triggers if len(trigger) > 2}
    return watched | {quantity for plan in plans for quantity, _limit in plan.readings} | set(KINDS[kind].quantities)
