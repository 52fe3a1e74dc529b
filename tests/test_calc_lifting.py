"""Specifications for observatory_ops.calc.lifting: mirror mass, sling leg tension, lift figures."""

import math

import astropy.units as u
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc import lifting
from observatory_ops.calc.lifting import (
    DENSITY,
    bearing_legs,
    expected_tube_mass_kg,
    lift_figures,
    load_factor,
    mirror_mass,
    sling_leg_tension,
    tube_mass_warning,
)

# Exact definition of the international avoirdupois pound (International Yard and Pound Agreement, 1959).
KG_PER_LB = 0.45359237


# Sling angle load factors as tabulated by ASME B30.9 and rigging handbooks (three decimals).
@pytest.mark.parametrize(("angle_deg", "expected"), [(60, 1.155), (45, 1.414), (30, 2.000)])
def test_load_factor_matches_rigging_table(angle_deg, expected):
    assert round(load_factor(angle_deg * u.deg), 3) == expected


def test_load_factor_accepts_radians_and_arrays():
    # Same ASME B30.9 / rigging handbook table, angles given in radians as an array.
    factors = load_factor(np.deg2rad([60.0, 45.0, 30.0]) * u.rad)
    np.testing.assert_allclose(factors, [1.155, 1.414, 2.000], atol=5e-4)


def test_vertical_lift_has_load_factor_one_and_shares_load_between_two_legs():
    # sin 90 deg = 1: each of two vertical legs carries half the weight.
    assert load_factor(90 * u.deg) == 1.0
    assert sling_leg_tension(1000 * u.kg, 2, 90 * u.deg) == 500 * u.kg


def test_two_leg_tension_at_60_degrees_matches_rigging_formula():
    # T = W / (n sin a) (ASME B30.9 / rigging handbooks): 1000 kg on two legs at 60 deg,
    # 1000 / (2 * 0.8660254) = 577.35 kg-force per leg.
    tension = sling_leg_tension(1000 * u.kg, 2, 60 * u.deg)
    assert tension.unit == u.kg
    assert tension.value == pytest.approx(577.35, abs=0.01)


def test_tension_keeps_the_unit_of_the_load():
    # 2000 lb on two legs at 45 deg: 2000 * 1.414 / 2 = 1414 lb (rigging handbook load factor 1.414).
    tension = sling_leg_tension(2000 * u.imperial.lb, 2, 45 * u.deg)
    assert tension.unit == u.imperial.lb
    assert tension.value == pytest.approx(1414.2, abs=0.1)
    assert sling_leg_tension(9806.65 * u.N, 1, 90 * u.deg).unit == u.N


def test_four_legs_rigged_count_as_two_bearing():
    # Common practice, no published source: a rigid load may ride on two legs of a four-leg bridle.
    assert bearing_legs(4) == 2
    assert bearing_legs(3) == 2
    assert bearing_legs(1) == 1
    assert sling_leg_tension(1000 * u.kg, 4, 60 * u.deg) == sling_leg_tension(1000 * u.kg, 2, 60 * u.deg)


def test_mirror_mass_matches_hand_calculation_with_crc_density():
    # Hand calculation, borosilicate 2.23 g/cm3 (CRC Handbook of Chemistry and Physics):
    # D = 100 cm, H = 25 cm, t = 15 cm; V = pi/4 * (100**2 - 25**2) * 15 = pi/4 * 140625 = 110446.6 cm3;
    # m = 110446.6 * 2.23 = 246296 g = 246.30 kg.
    mass = mirror_mass(1000 * u.mm, 150 * u.mm, "borosilicate", hole_diameter=250 * u.mm)
    assert mass.unit == u.kg
    assert mass.value == pytest.approx(246.30, abs=0.01)


def test_lightweighted_fused_silica_mirror_matches_hand_calculation():
    # Hand calculation, fused silica 2.20 g/cm3 (CRC Handbook of Chemistry and Physics):
    # D = 0.5 m = 50 cm, t = 8 cm, no hole; V = pi/4 * 2500 * 8 = 15707.96 cm3; 60 % removed leaves 40 %:
    # m = 15707.96 * 0.4 * 2.20 = 13823.0 g = 13.823 kg.
    mass = mirror_mass(0.5 * u.m, 8 * u.cm, "fused_silica", lightweighting_fraction=0.6)
    assert mass.to_value(u.kg) == pytest.approx(13.823, abs=0.001)


def test_mirror_mass_is_vectorised_over_diameters():
    # Aluminium 2.70 g/cm3 (CRC): 10 cm x 1 cm disc = pi/4 * 100 * 1 * 2.70 = 212.06 g; double D, four times.
    masses = mirror_mass([100, 200] * u.mm, 10 * u.mm, "aluminium")
    np.testing.assert_allclose(masses.to_value(u.g), [212.06, 848.23], atol=0.01)


def test_every_density_names_its_source_and_handbook_values_match_crc():
    # Densities in g/cm3 from the CRC Handbook of Chemistry and Physics (densities of solids and glasses; the
    # glass-ceramic value that of the low-expansion glass-ceramics used for mirror blanks), from memory.
    crc = {"borosilicate": 2.23, "fused_silica": 2.20, "glass_ceramic": 2.53, "aluminium": 2.70}
    for material, g_cm3 in crc.items():
        assert DENSITY[material].g_cm3 == g_cm3
        assert "CRC" in DENSITY[material].source
    for material, density in DENSITY.items():
        assert "CRC" in density.source or "from memory" in density.source, material


def test_1200_lb_is_544_3_kg():
    # Exact definition 1 lb = 0.45359237 kg: 1200 * 0.45359237 = 544.310844 kg.
    assert (1200 * u.imperial.lb).to_value(u.kg) == pytest.approx(1200 * KG_PER_LB, rel=1e-12)
    assert round((1200 * u.imperial.lb).to_value(u.kg), 1) == 544.3


def test_lift_figures_for_a_one_metre_mirror_on_a_fixture():
    # Hand calculation as above (CRC borosilicate 2.23): mirror 246.30 kg, plus 100 kg fixture = 346.30 kg;
    # two legs at 60 deg, load factor 1.155 (ASME B30.9 table): 346.30 * 1.1547 / 2 = 199.94 kg per leg;
    # pounds by 1 lb = 0.45359237 kg exactly.
    figures = lift_figures(1000, 150, "borosilicate", hole_mm=250, fixture_kg=100, legs=2, angle_deg=60, wll_kg=1000)
    assert figures.mirror_kg == pytest.approx(246.30, abs=0.01)
    assert figures.total_kg == pytest.approx(346.30, abs=0.01)
    assert figures.total_lb == pytest.approx(figures.total_kg / KG_PER_LB, rel=1e-12)
    assert figures.load_factor == pytest.approx(1.155, abs=5e-4)
    assert figures.leg_tension_kg == pytest.approx(199.94, abs=0.01)
    assert figures.leg_tension_lb == pytest.approx(figures.leg_tension_kg / KG_PER_LB, rel=1e-12)
    assert figures.margin == pytest.approx(1000 / figures.leg_tension_kg)
    assert (figures.legs_rigged, figures.legs_bearing, figures.angle_deg) == (2, 2, 60.0)
    assert figures.warnings == ()


def test_lift_figures_list_checks_and_never_claim_safety():
    figures = lift_figures(500, 80, "fused_silica")
    text = " ".join(figures.checks).lower()
    for item in ("rated capacity", "condition", "centre of gravity", "hitch", "clear path", "tag lines", "lift plan"):
        assert item in text
    assert "is safe" not in " ".join(figures.checks + figures.warnings).lower()


def test_lift_figures_warn_without_a_working_load_limit():
    figures = lift_figures(500, 80, "fused_silica")
    assert figures.wll_kg is None and figures.margin is None
    assert any("working load limit" in warning for warning in figures.warnings)


def test_lift_figures_warn_when_tension_exceeds_working_load_limit():
    figures = lift_figures(1000, 150, "borosilicate", legs=2, angle_deg=60, wll_kg=50)
    assert figures.margin < 1
    assert any("exceeds the working load limit" in warning for warning in figures.warnings)


def test_lift_figures_warn_that_extra_legs_are_not_counted():
    figures = lift_figures(1000, 150, "borosilicate", legs=4, wll_kg=1000)
    assert (figures.legs_rigged, figures.legs_bearing) == (4, 2)
    assert any("only 2 are counted" in warning for warning in figures.warnings)


def test_shallow_angle_is_computed_with_a_warning():
    # Rigging practice advises against angles under 30 deg; 20 deg still computes, load factor 1/sin 20 = 2.924.
    figures = lift_figures(1000, 150, "borosilicate", angle_deg=20, wll_kg=1000)
    assert figures.load_factor == pytest.approx(2.924, abs=5e-4)
    assert any("below 30" in warning for warning in figures.warnings)


def test_single_leg_at_an_angle_gets_a_warning():
    figures = lift_figures(300, 50, "glass_ceramic", legs=1, angle_deg=60, wll_kg=1000)
    assert figures.legs_bearing == 1
    assert any("single leg" in warning for warning in figures.warnings)


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: load_factor(0 * u.deg), "above 0"),
        (lambda: load_factor(-10 * u.deg), "above 0"),
        (lambda: load_factor(90.5 * u.deg), "at most 90"),
        (lambda: load_factor(60), "Quantity"),
        (lambda: load_factor(60 * u.m), "Quantity"),
        (lambda: sling_leg_tension(-1 * u.kg, 2, 60 * u.deg), "negative"),
        (lambda: sling_leg_tension(100 * u.m, 2, 60 * u.deg), "Quantity"),
        (lambda: sling_leg_tension(100 * u.kg, 0, 60 * u.deg), "at least one"),
        (lambda: sling_leg_tension(100 * u.kg, 2.5, 60 * u.deg), "whole number"),
        (lambda: mirror_mass(-1 * u.m, 10 * u.cm, "borosilicate"), "diameter must be positive"),
        (lambda: mirror_mass(1 * u.m, -10 * u.cm, "borosilicate"), "thickness must be positive"),
        (lambda: mirror_mass(1 * u.m, 10 * u.cm, "borosilicate", -5 * u.cm), "must not be negative"),
        (lambda: mirror_mass(1 * u.m, 10 * u.cm, "borosilicate", 1 * u.m), "smaller than the mirror"),
        (lambda: mirror_mass(1 * u.m, 10 * u.cm, "borosilicate", 2 * u.m), "smaller than the mirror"),
        (lambda: mirror_mass(1 * u.m, 10 * u.cm, "borosilicate", lightweighting_fraction=1.0), "below 1"),
        (lambda: mirror_mass(1 * u.m, 10 * u.cm, "borosilicate", lightweighting_fraction=-0.1), "at least 0"),
        (lambda: mirror_mass(1000, 100, "borosilicate"), "length"),
        (lambda: mirror_mass(1 * u.m, 10 * u.cm, "unobtainium"), "borosilicate"),
        (lambda: mirror_mass(np.nan * u.m, 10 * u.cm, "borosilicate"), "finite"),
        (lambda: lift_figures(1000, 150, "borosilicate", wll_kg=0), "working load limit must be positive"),
        (lambda: lift_figures(1000, 150, "borosilicate", wll_kg=-5), "working load limit must be positive"),
        (lambda: lift_figures(1000, 150, "borosilicate", fixture_kg=-1), "fixture mass"),
        (lambda: lift_figures(1000, 150, "borosilicate", legs=0), "at least one"),
        (lambda: lift_figures(1000, 150, "borosilicate", angle_deg=0), "above 0"),
        (lambda: lift_figures(1000, 150, "borosilicate", angle_deg=95), "at most 90"),
        (lambda: lift_figures(1000, 150, "borosilicate", hole_mm=1000), "smaller than the mirror"),
        (lambda: lift_figures(1000, 150, "borosilicate", lightweighting_fraction=1), "below 1"),
        (lambda: lift_figures("wide", 150, "borosilicate"), "diameter must be a number"),
        (lambda: tube_mass_warning(0, 500), "aperture must be positive"),
        (lambda: tube_mass_warning(1, -500), "tube mass must be positive"),
    ],
)
def test_bad_input_raises_value_error_naming_the_problem(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_unknown_material_lists_the_known_ones():
    with pytest.raises(ValueError) as excinfo:
        mirror_mass(1 * u.m, 10 * u.cm, "unobtainium")
    for material in DENSITY:
        assert material in str(excinfo.value)


def test_tube_mass_rule_of_thumb_scales_from_550_kg_at_one_metre():
    # Common practice, no published source: 1 m class tube about 550 kg (about 1200 lb), scaled as aperture**2.5;
    # 2 m: 550 * 2**2.5 = 550 * 5.657 = 3111.3 kg.
    assert expected_tube_mass_kg(1.0) == pytest.approx(lifting.TUBE_REFERENCE_MASS_KG)
    assert expected_tube_mass_kg(2.0) == pytest.approx(3111.3, abs=0.1)


@pytest.mark.parametrize("tube_mass_kg", [550, 1650, 550 / 3, 400, 1000])
def test_tube_mass_within_a_factor_of_three_gives_no_warning(tube_mass_kg):
    assert tube_mass_warning(1.0, tube_mass_kg) is None


@pytest.mark.parametrize("tube_mass_kg", [55, 180, 1700, 5000])
def test_tube_mass_beyond_a_factor_of_three_gives_a_warning(tube_mass_kg):
    warning = tube_mass_warning(1.0, tube_mass_kg)
    assert warning is not None and "550 kg" in warning


angles = st.floats(min_value=0.01, max_value=90.0, allow_nan=False)
loads = st.floats(min_value=0.0, max_value=1e6, allow_nan=False)
leg_counts = st.integers(min_value=1, max_value=8)


@settings(deadline=None)  # shared machines: no per-example time limit
@given(load=loads, legs=leg_counts, angle_deg=angles)
def test_tension_is_never_below_an_even_share_of_the_load(load, legs, angle_deg):
    # T = W / (min(n, 2) sin a) >= W / n because sin a <= 1 and min(n, 2) <= n (rigging formula, ASME B30.9).
    tension = sling_leg_tension(load * u.kg, legs, angle_deg * u.deg).to_value(u.kg)
    assert tension >= load / legs * (1 - 1e-12)


@settings(deadline=None)  # shared machines: no per-example time limit
@given(load=st.floats(min_value=1.0, max_value=1e6), legs=leg_counts, low=angles, high=angles)
def test_tension_decreases_as_the_angle_rises_toward_vertical(load, legs, low, high):
    # sin a increases on (0, 90] deg, so T = W / (n sin a) falls as the legs steepen.
    low, high = sorted((low, high))
    tension_low = sling_leg_tension(load * u.kg, legs, low * u.deg).value
    tension_high = sling_leg_tension(load * u.kg, legs, high * u.deg).value
    assert tension_high <= tension_low
    if high - low >= 0.01:
        assert tension_high < tension_low


@settings(deadline=None)  # shared machines: no per-example time limit
@given(diameter_mm=st.floats(10, 4000), hole_share=st.floats(0, 0.99), thickness_mm=st.floats(1, 500))
def test_mirror_mass_is_positive_and_lighter_with_a_hole(diameter_mm, hole_share, thickness_mm):
    # Volume pi/4 (D**2 - H**2) t shrinks as the hole grows and stays positive while H < D.
    solid = mirror_mass(diameter_mm * u.mm, thickness_mm * u.mm, "borosilicate")
    holed = mirror_mass(diameter_mm * u.mm, thickness_mm * u.mm, "borosilicate", diameter_mm * hole_share * u.mm)
    assert 0 < holed.value <= solid.value
    assert math.isclose(holed.value, solid.value * (1 - hole_share**2), rel_tol=1e-9, abs_tol=1e-12)
