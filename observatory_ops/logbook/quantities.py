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
