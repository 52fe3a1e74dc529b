"""Quantities a technician measures, with their units. Add a line to add a quantity."""

QUANTITIES: dict[str, tuple[str, str]] = {
    # code: (label, unit)
    "settle_time_s": ("Settle time after a slew", "s"),
    "following_error_arcsec": ("RMS following error", "arcsec"),
    "motor_current_a": ("Motor current", "A"),
    "brake_pressure_bar": ("Brake air pressure", "bar"),
    "brake_release_s": ("Brake release time", "s"),
    "reflectance": ("Reflectance", "fraction"),
    "fan_current_a": ("Fan current", "A"),
    "supply_voltage_v": ("Supply voltage", "V"),
    "ripple_mv": ("Supply ripple", "mV"),
    "encoder_signal_pct": ("Encoder signal level", "%"),
    "temperature_c": ("Temperature", "degC"),
}
QUANTITY_CHOICES = [(code, f"{label} ({unit})") for code, (label, unit) in QUANTITIES.items()]


def unit_of(code: str) -> str:
    return QUANTITIES[code][1]


#: Quantities that can truly be below zero; every other one is a magnitude.
MAY_BE_NEGATIVE = {"temperature_c"}


def value_problem(code: str, value: float) -> str | None:
    """Why a reading cannot be right (None when it can): a negative magnitude, a reflectance outside 0..1."""
    label = QUANTITIES[code][0]
    if value != value or value in (float("inf"), float("-inf")):
        return f"{label} must be a finite number"
    if code == "reflectance" and not 0 <= value <= 1:
        return "a reflectance is a fraction between 0 and 1"
    if value < 0 and code not in MAY_BE_NEGATIVE:
        return f"{label} cannot be negative (got {value:g})"
    return None
