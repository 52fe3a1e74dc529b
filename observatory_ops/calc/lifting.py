"""Lifting figures for a mirror or a tube: mass from geometry, sling leg tension, rated capacity margin.

The tool shows numbers and what a competent person must check; it never says a lift is safe. Masses
here are estimates from geometry and handbook densities, not weighings.

Units: lengths are astropy Quantities at the edges of :func:`mirror_mass`; angles are angle Quantities
in :func:`load_factor` and :func:`sling_leg_tension`. A load may be given as a mass (kg, lb), read as
the force its weight exerts (kilogram-force expressed as a kilogram mass-equivalent, as rigging tables
and sling tags do), or as a force (N); the leg tension comes back in the load's own unit.
:func:`lift_figures` takes plain numbers in mm, kg and degrees for the Django layer.
"""

from __future__ import annotations

import math
import operator
from dataclasses import dataclass, replace

import astropy.units as u
import numpy as np
from astropy import constants

CRC_HANDBOOK = "CRC Handbook of Chemistry and Physics"


@dataclass(frozen=True)
class Density:
    """A material density and where the figure comes from."""

    g_cm3: float
    source: str


DENSITY: dict[str, Density] = {
    "borosilicate": Density(2.23, CRC_HANDBOOK),
    "fused_silica": Density(2.20, CRC_HANDBOOK),
    "glass_ceramic": Density(2.53, f"{CRC_HANDBOOK} (low-expansion glass-ceramic)"),
    "aluminium": Density(2.70, CRC_HANDBOOK),
    "plate_glass": Density(2.5, "from memory (soda-lime plate glass, about 2.5)"),
    "titanium_silicate": Density(2.21, "from memory (ULE-type titanium silicate glass, about 2.21)"),
}

# Rigged legs beyond two are not counted: a rigid load on three or four legs of slightly unequal length may
# hang on two of them (common practice, no published source).
MAX_BEARING_LEGS = 2

# Below this sling angle leg tension climbs steeply (load factor 2 at 30 degrees); rigging practice
# advises against flatter angles.
SHALLOW_ANGLE_DEG = 30.0

# Rule of thumb for a whole optical tube assembly: a 1 m class tube weighs roughly 550 kg (about 1200 lb),
# common practice, no published source. Mass is scaled as aperture**2.5, between area scaling (2) and
# geometric similarity (3), because small tubes carry focusers, baffles and instruments that do not shrink
# with the aperture (common practice, no published source).
TUBE_REFERENCE_APERTURE_M = 1.0
TUBE_REFERENCE_MASS_KG = 550.0
TUBE_MASS_EXPONENT = 2.5
TUBE_MASS_TOLERANCE_FACTOR = 3.0

LIFT_CHECKS: tuple[str, ...] = (
    "Rated capacity (working load limit) of every item in the rigging: slings, shackles, eye bolts, lifting "
    "fixture, spreader beam, hook, and the crane or hoist, each at least the load it carries.",
    "Capacity reductions for the hitch type (choker, basket) and for slings bent over edges; pad sharp edges.",
    "Condition of every sling and fitting, inspected before use; anything damaged or without a legible "
    "rating tag taken out of service.",
    "Centre of gravity of the load, with its cell and fixture, directly under the hook, so the legs share the "
    "load as assumed here.",
    "Sling angle measured as rigged; the tension figures hold only for the angle entered.",
    "Mass confirmed from the maker's drawing or a weighing where possible; the mirror mass here is an "
    "estimate from geometry and handbook density.",
    "Clear path and exclusion zone: nobody under or beside the load, the set-down place ready and blocked.",
    "Tag lines to control rotation, one person giving signals, and signals agreed before the lift.",
    "A written lift plan reviewed by a competent person before the lift.",
)


def _require(condition: bool, message: str) -> None:
    if not condition:
        raise ValueError(message)


def _finite_number(value: float, name: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, got {value!r}") from None
    _require(math.isfinite(number), f"{name} must be finite, got {value!r}")
    return number


def _quantity_of(value: u.Quantity, physical_types: tuple[str, ...], name: str, example: str) -> u.Quantity:
    _require(
        isinstance(value, u.Quantity) and value.unit.physical_type in physical_types,
        f"{name} must be a Quantity of {' or '.join(physical_types)}, for example {example}; got {value!r}",
    )
    _require(bool(np.all(np.isfinite(value.value))), f"{name} must be finite, got {value!r}")
    return value


def _density(material: str) -> Density:
    try:
        return DENSITY[material]
    except (KeyError, TypeError):
        known = ", ".join(sorted(DENSITY))
        raise ValueError(f"unknown material {material!r}; known materials: {known}") from None


def bearing_legs(legs: int) -> int:
    """Number of sling legs counted as carrying the load.

    Parameters
    ----------
    legs : int
        Legs rigged, at least 1.

    Returns
    -------
    int
        ``min(legs, 2)``: a load on three or more legs may ride on two of them (common practice, no
        published source).
    """
    try:
        count = operator.index(legs)
    except TypeError:
        raise ValueError(f"legs must be a whole number, got {legs!r}") from None
    _require(count >= 1, f"at least one sling leg is needed, got {count}")
    return min(count, MAX_BEARING_LEGS)


def load_factor(angle: u.Quantity) -> float | np.ndarray:
    """Load factor of a sling leg at an angle from the horizontal.

    Method: resolve the leg tension into its vertical component, which carries the load, so the
    factor is ``1 / sin(a)`` with ``a`` measured from the horizontal (ASME B30.9 and rigging handbooks
    tabulate 1.155 at 60 degrees, 1.414 at 45 and 2.000 at 30).

    Parameters
    ----------
    angle : Quantity (angle)
        Sling angle from the horizontal, above 0 and at most 90 degrees (90 is a vertical lift).
        Arrays are accepted.

    Returns
    -------
    float or ndarray
        Load factor, 1 for a vertical leg; a float for a scalar angle.
    """
    angle_deg = np.asarray(_quantity_of(angle, ("angle",), "sling angle", "60 * u.deg").to_value(u.deg), dtype=float)
    _require(
        bool(np.all((angle_deg > 0) & (angle_deg <= 90))),
        f"sling angle from the horizontal must be above 0 and at most 90 degrees, got {angle}",
    )
    factor = 1.0 / np.sin(np.deg2rad(angle_deg))
    return float(factor) if factor.ndim == 0 else factor


def sling_leg_tension(load: u.Quantity, legs: int, angle_from_horizontal: u.Quantity) -> u.Quantity:
    """Tension in each load-bearing leg of a multi-leg sling.

    Method: ``T = W / (n sin a)`` with ``a`` the leg angle from the horizontal and ``n`` the legs
    counted as bearing, at most two however many are rigged (ASME B30.9 and rigging handbooks for the
    formula; the two-leg rule is common practice, no published source).

    Parameters
    ----------
    load : Quantity (mass or force)
        Weight of everything below the hook. A mass stands for its weight (kilogram-force as a
        kilogram mass-equivalent, as sling tags state capacity). Must not be negative.
    legs : int
        Sling legs rigged, at least 1.
    angle_from_horizontal : Quantity (angle)
        Leg angle from the horizontal, above 0 and at most 90 degrees.

    Returns
    -------
    Quantity
        Tension per bearing leg, in the unit of ``load``.
    """
    weight = _quantity_of(load, ("mass", "force"), "load", "550 * u.kg")
    _require(bool(np.all(weight.value >= 0)), f"load must not be negative, got {load}")
    return weight * load_factor(angle_from_horizontal) / bearing_legs(legs)


def mirror_mass(
    diameter: u.Quantity,
    thickness: u.Quantity,
    material: str,
    hole_diameter: u.Quantity = 0 * u.mm,
    lightweighting_fraction: float = 0.0,
) -> u.Quantity:
    """Mass of a mirror blank as a solid disc with a central hole.

    Method: volume ``pi/4 (D**2 - H**2) t`` times ``(1 - lightweighting fraction)``, times the handbook
    density of the material (CRC Handbook of Chemistry and Physics; see ``DENSITY`` for each source).
    Curvature of the faces and bevels are ignored, so a meniscus or a deeply dished blank weighs less.

    Parameters
    ----------
    diameter, thickness : Quantity (length)
        Outer diameter and edge thickness, positive. Arrays are accepted.
    material : str
        A key of ``DENSITY``.
    hole_diameter : Quantity (length)
        Central hole, zero or more and smaller than the diameter.
    lightweighting_fraction : float
        Fraction of the solid volume removed by pockets or a cellular structure, in [0, 1).

    Returns
    -------
    Quantity
        Mass in kg.
    """
    density = _density(material)
    outer = _quantity_of(diameter, ("length",), "diameter", "1000 * u.mm").to(u.m)
    edge = _quantity_of(thickness, ("length",), "thickness", "150 * u.mm").to(u.m)
    hole = _quantity_of(hole_diameter, ("length",), "hole diameter", "250 * u.mm").to(u.m)
    removed = np.asarray(lightweighting_fraction, dtype=float)
    _require(bool(np.all(outer.value > 0)), f"diameter must be positive, got {diameter}")
    _require(bool(np.all(edge.value > 0)), f"thickness must be positive, got {thickness}")
    _require(bool(np.all(hole.value >= 0)), f"hole diameter must not be negative, got {hole_diameter}")
    _require(
        bool(np.all(hole < outer)),
        f"central hole ({hole_diameter}) must be smaller than the mirror diameter ({diameter})",
    )
    _require(
        bool(np.all((removed >= 0) & (removed < 1))),
        f"lightweighting fraction must be at least 0 and below 1, got {lightweighting_fraction}",
    )
    volume = np.pi / 4 * (outer**2 - hole**2) * edge * (1 - removed)
    return (volume * density.g_cm3 * u.g / u.cm**3).to(u.kg)


@dataclass(frozen=True)
class LiftFigures:
    """Numbers for a lift and what a competent person must check; never a statement that it is safe.

    Masses are kilograms and pounds; tensions are kilogram-force expressed as kilograms (and pounds),
    the way sling tags state working load limits. ``margin`` is the working load limit entered divided
    by the leg tension, or None when no limit was entered. ``fixture_kg`` is None when the cell / fixture mass
    was not entered: the load and tensions are then the mirror's alone.
    """

    mirror_kg: float
    fixture_kg: float | None
    total_kg: float
    total_lb: float
    legs_rigged: int
    legs_bearing: int
    angle_deg: float
    load_factor: float
    leg_tension_kg: float
    leg_tension_lb: float
    wll_kg: float | None
    margin: float | None
    warnings: tuple[str, ...]
    checks: tuple[str, ...]

    @property
    def leg_tension_n(self) -> float:
        """The tension per bearing leg as a force in newtons: its kilograms times standard gravity, g0 = 9.80665
        m/s² (3rd CGPM, 1901; ``astropy.constants.g0``)."""
        return float((self.leg_tension_kg * u.kg * constants.g0).to_value(u.N))

    @property
    def over_limit(self) -> bool:
        """The tension per bearing leg exceeds the working load limit entered (margin below 1)."""
        return self.margin is not None and self.margin < 1

    @property
    def too_flat(self) -> bool:
        """The sling angle is below ``SHALLOW_ANGLE_DEG`` from the horizontal, flatter than rigging practice
        advises (load factor above 2)."""
        return self.angle_deg < SHALLOW_ANGLE_DEG

    @property
    def no_limit(self) -> bool:
        """No working load limit was entered, so the legs' rated capacity is not compared with their tension."""
        return self.wll_kg is None

    @property
    def fixture_not_entered(self) -> bool:
        """No cell / fixture mass was entered (0 is entered: a mirror lifted without its cell), so the load and the
        leg tension are the mirror's alone, less than those of the mirror in its cell."""
        return self.fixture_kg is None


def lift_figures(
    diameter_mm: float,
    thickness_mm: float,
    material: str,
    hole_mm: float = 0,
    fixture_kg: float | None = None,
    legs: int = 2,
    angle_deg: float = 60,
    wll_kg: float | None = None,
    lightweighting_fraction: float = 0,
) -> LiftFigures:
    """Mirror mass, total suspended load, sling leg tension and rated-capacity margin for a mirror lift.

    Method: :func:`mirror_mass` (handbook densities) plus the fixture mass, then
    :func:`sling_leg_tension` (``T = W / (n sin a)``, ASME B30.9 and rigging handbooks).

    Parameters
    ----------
    diameter_mm, thickness_mm, hole_mm : float
        Mirror outer diameter, edge thickness and central hole in millimetres.
    material : str
        A key of ``DENSITY``.
    fixture_kg : float or None
        Mass of the cell, lifting fixture and anything else below the hook, kg, not negative; 0 for nothing but the
        mirror; None when not entered (the figures are then the mirror alone, with a warning).
    legs : int
        Sling legs rigged, at least 1.
    angle_deg : float
        Leg angle from the horizontal in degrees, above 0 and at most 90.
    wll_kg : float or None
        Working load limit of one sling leg as rigged, kg, positive; None when not known.
    lightweighting_fraction : float
        Fraction of the solid blank removed, in [0, 1).

    Returns
    -------
    LiftFigures
        The figures, warnings about the input, and the checks a competent person must make.
    """
    bearing = bearing_legs(legs)
    fixture = None if fixture_kg is None else _finite_number(fixture_kg, "fixture mass")
    _require(fixture is None or fixture >= 0, f"fixture mass must not be negative, got {fixture_kg}")
    angle = _finite_number(angle_deg, "sling angle") * u.deg
    limit = None if wll_kg is None else _finite_number(wll_kg, "working load limit")
    _require(limit is None or limit > 0, f"working load limit must be positive, got {wll_kg}")

    mirror = mirror_mass(
        _finite_number(diameter_mm, "diameter") * u.mm,
        _finite_number(thickness_mm, "thickness") * u.mm,
        material,
        _finite_number(hole_mm, "hole diameter") * u.mm,
        _finite_number(lightweighting_fraction, "lightweighting fraction"),
    )
    total = mirror + (fixture or 0) * u.kg
    factor = load_factor(angle)
    tension = sling_leg_tension(total, legs, angle)
    margin = None if limit is None else limit / float(tension.to_value(u.kg))

    figures = LiftFigures(
        mirror_kg=float(mirror.to_value(u.kg)),
        fixture_kg=fixture,
        total_kg=float(total.to_value(u.kg)),
        total_lb=float(total.to_value(u.imperial.lb)),
        legs_rigged=operator.index(legs),
        legs_bearing=bearing,
        angle_deg=float(angle.value),
        load_factor=factor,
        leg_tension_kg=float(tension.to_value(u.kg)),
        leg_tension_lb=float(tension.to_value(u.imperial.lb)),
        wll_kg=limit,
        margin=margin,
        warnings=(),
        checks=LIFT_CHECKS,
    )
    return replace(figures, warnings=_warnings(figures))


def _warnings(figures: LiftFigures) -> tuple[str, ...]:
    """What is wrong or unknown in a lift's input, read from its figures: the conditions that stop a work order
    being issued (``LiftFigures.over_limit``, ``LiftFigures.too_flat``) or started (those,
    ``LiftFigures.no_limit`` and ``LiftFigures.fixture_not_entered``) are the ones these warnings state."""
    warnings = []
    if figures.fixture_not_entered:
        warnings.append(
            "Cell / fixture mass not entered: the figures are the mirror alone, less than the load of the mirror in "
            "its cell."
        )
    if figures.too_flat:
        warnings.append(
            f"Sling angle {figures.angle_deg:g} degrees from horizontal is below {SHALLOW_ANGLE_DEG:g}: rigging "
            f"practice advises against such flat angles (load factor {figures.load_factor:.2f})."
        )
    if figures.legs_rigged > figures.legs_bearing:
        warnings.append(
            f"{figures.legs_rigged} legs rigged, but only {figures.legs_bearing} are counted as bearing: the load "
            "may ride on two of them."
        )
    if figures.legs_rigged == 1 and figures.angle_deg < 90:
        warnings.append(
            f"A single leg hangs vertically above the centre of gravity; check the angle entered "
            f"({figures.angle_deg:g} degrees)."
        )
    if figures.no_limit:
        warnings.append("No working load limit entered: the sling legs' rated capacity has not been compared.")
    elif figures.over_limit:
        warnings.append(
            f"Leg tension {figures.leg_tension_kg:.0f} kg exceeds the working load limit of {figures.wll_kg:g} kg "
            f"entered (margin {figures.margin:.2f})."
        )
    return tuple(warnings)


def expected_tube_mass_kg(aperture_m: float) -> float:
    """Rough mass of an optical tube assembly of a given aperture.

    Method: ``550 kg * (aperture / 1 m) ** 2.5``; the 550 kg for a 1 m class tube and the exponent are
    common practice, no published source.

    Parameters
    ----------
    aperture_m : float
        Clear aperture in metres, positive.

    Returns
    -------
    float
        Expected tube mass in kg.
    """
    aperture = _finite_number(aperture_m, "aperture")
    _require(aperture > 0, f"aperture must be positive, got {aperture_m}")
    return TUBE_REFERENCE_MASS_KG * (aperture / TUBE_REFERENCE_APERTURE_M) ** TUBE_MASS_EXPONENT


def tube_mass_warning(aperture_m: float, tube_mass_kg: float) -> str | None:
    """Warn when a registered tube mass is far from the rule of thumb for its aperture.

    Method: compare with :func:`expected_tube_mass_kg` (common practice, no published source) and warn
    when the registered mass is more than three times larger or smaller.

    Parameters
    ----------
    aperture_m : float
        Clear aperture in metres, positive.
    tube_mass_kg : float
        Registered tube mass in kg, positive.

    Returns
    -------
    str or None
        A warning naming both masses, or None when they agree within a factor of three.
    """
    expected = expected_tube_mass_kg(aperture_m)
    mass = _finite_number(tube_mass_kg, "tube mass")
    _require(mass > 0, f"tube mass must be positive, got {tube_mass_kg}")
    ratio = mass / expected
    if 1 / TUBE_MASS_TOLERANCE_FACTOR <= ratio <= TUBE_MASS_TOLERANCE_FACTOR:
        return None
    comparison = f"{ratio:.1f} times" if ratio > 1 else f"1/{1 / ratio:.1f} of"
    return (
        f"Registered tube mass {mass:g} kg is {comparison} the roughly {expected:.0f} kg a {aperture_m:g} m tube "
        "usually weighs (rule of thumb: common practice, no published source); check the mass and the aperture "
        "before planning a lift."
    )
