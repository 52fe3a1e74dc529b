"""Fresh-coating reflectance (observatory_ops.calc.coating) against outside references.

References used below:
- the normal-incidence Fresnel formula R = ((n-1)^2 + k^2) / ((n+1)^2 + k^2) (Born and Wolf, Principles of
  Optics; Macleod, Thin-Film Optical Filters), evaluated by hand from the embedded published tables;
- the `tmm` package (S. J. Byrnes), an independent transfer-matrix implementation, with the metal as the
  semi-infinite exit medium;
- Macleod, Thin-Film Optical Filters: the quarter-wave closed form and the absentee half-wave layer;
- handbook figures for evaporated aluminium and silver and glass indices, marked "from memory".
"""

import csv
from pathlib import Path

import numpy as np
import pytest
import tmm
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.coating import (
    MATERIALS,
    Layer,
    band_mean,
    coating_curve,
    reflectance,
    refractive_index,
    stack_reflectance,
    wavelength_range_nm,
)

DATA_DIR = Path(__file__).resolve().parent.parent / "observatory_ops" / "calc" / "optical_data"


def read_table(name: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The embedded n, k table read with the csv module, independently of the code under test."""
    with open(DATA_DIR / name, newline="") as handle:
        rows = [row for row in csv.reader(handle) if row and not row[0].startswith("#")]
    values = np.array(rows[1:], dtype=float)
    return 1000.0 * values[:, 0], values[:, 1], values[:, 2]


def tmm_reflectance(metal: str, layers: list[Layer], wavelength_nm: float) -> float:
    """tmm's coh_tmm, s-polarisation at normal incidence, light from air, metal as the exit medium."""
    outward = list(reversed(layers))
    n_list = [1.0] + [complex(refractive_index(layer.material, wavelength_nm)) for layer in outward]
    n_list.append(complex(refractive_index(metal, wavelength_nm)))
    d_list = [np.inf] + [layer.thickness_nm for layer in outward] + [np.inf]
    return tmm.coh_tmm("s", n_list, d_list, 0, wavelength_nm)["R"]


@pytest.mark.parametrize("metal, table", [("al", "al_rakic1995.csv"), ("ag", "ag_johnson_christy1972.csv")])
def test_bare_metal_matches_fresnel_formula_at_every_tabulated_point(metal, table):
    # Fresnel at normal incidence from the published n and k (Rakic 1995; Johnson and Christy 1972).
    wavelength, n, k = read_table(table)
    visible_to_near_ir = (wavelength >= 300) & (wavelength <= 1900)
    wavelength, n, k = wavelength[visible_to_near_ir], n[visible_to_near_ir], k[visible_to_near_ir]
    by_hand = ((n - 1) ** 2 + k**2) / ((n + 1) ** 2 + k**2)
    np.testing.assert_allclose(reflectance(metal, [], wavelength), by_hand, rtol=0, atol=1e-12)


def test_fresh_aluminium_reflects_91_to_92_percent_near_550_nm():
    # Rakic 1995 constants give 0.915; handbooks quote about 91.5 % for fresh evaporated aluminium in the
    # green (from memory: Bennett and Bennett / Hass, Handbook of Optics).
    value = reflectance("al", [], np.array([550.0]))[0]
    assert 0.91 <= value <= 0.92


def test_aluminium_reflectance_dips_to_about_86_percent_near_830_nm():
    # Aluminium's interband absorption near 1.5 eV puts its reflectance minimum near 826 nm at about
    # 86-87 % (Rakic 1995; from memory: Ehrenreich, Philipp and Segall, Phys. Rev. 132, 1918 (1963)).
    wavelength = np.arange(700.0, 951.0)
    values = reflectance("al", [], wavelength)
    assert 800 <= wavelength[np.argmin(values)] <= 850
    assert 0.86 <= values.min() <= 0.87


def test_fresh_silver_reflects_about_98_percent_at_550_nm():
    # Johnson and Christy 1972 constants; handbooks quote about 98 % for fresh silver in the visible (from memory).
    assert 0.975 <= reflectance("ag", [], np.array([550.0]))[0] <= 0.99


@pytest.mark.parametrize(
    "metal, layers",
    [
        ("al", [Layer("SiO2", 100.0)]),
        ("al", [Layer("SiO2", 250.0)]),
        ("al", [Layer("MgF2", 25.0)]),
        ("al", [Layer("Al2O3", 80.0), Layer("SiO2", 60.0)]),
        ("ag", [Layer("Al2O3", 30.0), Layer("SiO2", 120.0)]),
        ("ag", [Layer("SiO2", 10.0), Layer("Al2O3", 65.0), Layer("MgF2", 90.0)]),
    ],
)
@pytest.mark.parametrize("wavelength_nm", [400.0, 487.5, 550.0, 826.0, 1000.0])
def test_overcoated_mirror_matches_tmm_package(metal, layers, wavelength_nm):
    # Independent transfer-matrix reference: tmm.coh_tmm (S. J. Byrnes, PyPI `tmm`).
    ours = reflectance(metal, layers, np.array([wavelength_nm]))[0]
    assert ours == pytest.approx(tmm_reflectance(metal, layers, wavelength_nm), abs=1e-6)


@settings(max_examples=60, deadline=None)
@given(
    substrate=st.floats(1.0, 4.0),
    layer=st.floats(1.0, 4.0),
    wavelength_nm=st.floats(300.0, 2000.0),
)
def test_quarter_wave_layer_matches_closed_form(substrate, layer, wavelength_nm):
    # A lossless quarter-wave layer (n d = lambda/4) on a lossless substrate in air:
    # R = ((n0 ns - n1^2) / (n0 ns + n1^2))^2 (Macleod, Thin-Film Optical Filters, quarter-wave layers).
    closed_form = ((substrate - layer**2) / (substrate + layer**2)) ** 2
    value = stack_reflectance(substrate, [layer], [wavelength_nm / (4 * layer)], np.array([wavelength_nm]))[0]
    assert value == pytest.approx(closed_form, abs=1e-12)


def test_magnesium_fluoride_quarter_wave_on_crown_glass_leaves_about_1_3_percent():
    # The textbook antireflection example: n = 1.38 on n = 1.52 gives R = 1.26 % at the design wavelength
    # (Macleod, Thin-Film Optical Filters; Hecht, Optics).
    value = stack_reflectance(1.52, [1.38], [550.0 / (4 * 1.38)], np.array([550.0]))[0]
    assert value == pytest.approx(0.0126, abs=5e-5)


def test_half_wave_overcoat_is_an_absentee_layer_at_its_design_wavelength():
    # A lossless layer of optical thickness lambda/2 leaves the reflectance unchanged at lambda
    # (Macleod, Thin-Film Optical Filters: absentee layers).
    wavelength = np.array([550.0])
    half_wave_nm = 550.0 / (2 * refractive_index("SiO2", wavelength)[0].real)
    assert reflectance("al", [Layer("SiO2", half_wave_nm)], wavelength)[0] == pytest.approx(
        reflectance("al", [], wavelength)[0], abs=1e-12
    )


def test_dielectric_indices_match_handbook_values():
    # From memory: fused silica n_d = 1.4585 at 587.6 nm (Malitson 1965); sapphire n_o = 1.768 and MgF2
    # n_o = 1.378 near 589 nm (Malitson 1962; Dodge 1984).
    assert refractive_index("SiO2", 587.56).real == pytest.approx(1.4585, abs=1e-4)
    assert refractive_index("Al2O3", 589.3).real == pytest.approx(1.768, abs=1e-3)
    assert refractive_index("MgF2", 589.3).real == pytest.approx(1.378, abs=1e-3)
    assert refractive_index("sio2", 589.3).imag == 0


def test_material_names_are_case_insensitive():
    wavelength = np.array([450.0, 650.0])
    for name in MATERIALS:
        np.testing.assert_array_equal(refractive_index(name.upper(), wavelength), refractive_index(name, wavelength))


layer_strategy = st.builds(Layer, st.sampled_from(["SiO2", "MgF2", "Al2O3"]), st.floats(0.0, 5000.0, allow_nan=False))


@settings(max_examples=80, deadline=None)
@given(metal=st.sampled_from(["al", "ag"]), layers=st.lists(layer_strategy, max_size=4))
def test_reflectance_stays_between_zero_and_one_for_any_overcoat(metal, layers):
    # Energy conservation: a passive stack reflects between none and all of the light.
    values = reflectance(metal, layers, np.linspace(400.0, 1000.0, 61))
    assert np.all((values >= 0) & (values <= 1))


@settings(max_examples=40, deadline=None)
@given(metal=st.sampled_from(["al", "ag"]), layers=st.lists(layer_strategy, max_size=3))
def test_zero_thickness_layer_changes_nothing(metal, layers):
    wavelength = np.linspace(400.0, 1000.0, 13)
    with_empty = [Layer("MgF2", 0.0), *layers]
    np.testing.assert_allclose(reflectance(metal, with_empty, wavelength), reflectance(metal, layers, wavelength))


def test_absorbing_layer_thousands_of_nanometres_thick_reflects_like_the_bulk():
    # An opaque layer hides what lies under it; the scaled matrix must not overflow on the way.
    wavelength = np.array([550.0])
    thick_silver = stack_reflectance(
        refractive_index("al", wavelength), [refractive_index("ag", wavelength)], [5e4], wavelength
    )
    assert thick_silver[0] == pytest.approx(reflectance("ag", [], wavelength)[0], abs=1e-12)


def test_band_mean_of_a_straight_line_is_its_midpoint_value():
    # The trapezoid rule integrates a straight line exactly.
    wavelength = np.linspace(400.0, 1000.0, 7)
    assert band_mean(wavelength, 0.8 + 1e-4 * (wavelength - 400.0)) == pytest.approx(0.83)


def test_band_mean_weights_by_the_response_curve():
    wavelength = np.array([400.0, 500.0, 600.0, 700.0])
    values = np.array([0.9, 0.8, 0.6, 0.5])
    # Trapezoids by hand: integral of R w = (0.9 + 0.8) / 2 * 100 + (0.8 + 0) / 2 * 100 = 125, of w = 150.
    assert band_mean(wavelength, values, weight=np.array([1.0, 1.0, 0.0, 0.0])) == pytest.approx(125 / 150)


def test_coating_curve_covers_the_default_band_every_10_nm():
    result = coating_curve("al", [Layer("SiO2", 100.0)])
    wavelengths = [point["wavelength_nm"] for point in result["curve"]]
    assert wavelengths[0] == 400.0 and wavelengths[-1] == 1000.0 and len(wavelengths) == 61
    values = [point["reflectance"] for point in result["curve"]]
    assert result["band_mean"] == pytest.approx(band_mean(np.array(wavelengths), np.array(values)))


def test_coating_curve_ends_exactly_at_the_band_edge_when_the_step_does_not_divide_it():
    wavelengths = [point["wavelength_nm"] for point in coating_curve("ag", [], 450.0, 700.0, 60.0)["curve"]]
    assert wavelengths == [450.0, 510.0, 570.0, 630.0, 690.0, 700.0]


def test_coating_curve_band_mean_follows_the_response():
    # A response that is zero below 700 nm makes the band mean that of 700-1000 nm alone.
    response = (np.array([400.0, 699.0, 700.0, 1000.0]), np.array([0.0, 0.0, 1.0, 1.0]))
    weighted = coating_curve("al", [], step_nm=1.0, response=response)["band_mean"]
    red_only = coating_curve("al", [], from_nm=700.0, step_nm=1.0)["band_mean"]
    assert weighted == pytest.approx(red_only, abs=2e-4)


@pytest.mark.parametrize(
    "call, message",
    [
        (lambda: refractive_index("gold", [500.0]), "unknown material"),
        (lambda: reflectance("SiO2", [], [500.0]), "mirror metal"),
        (lambda: reflectance("al", [Layer("SiO2", -5.0)], [500.0]), "thickness"),
        (lambda: reflectance("al", [Layer("ZnS", 50.0)], [500.0]), "unknown material"),
        (lambda: coating_curve("al", [], 1000.0, 400.0), "band start"),
        (lambda: coating_curve("al", [], 400.0, 400.0), "band start"),
        (lambda: coating_curve("al", [], step_nm=0.0), "step"),
        (lambda: coating_curve("ag", [], 400.0, 2500.0), "silver"),
        (lambda: coating_curve("al", [Layer("SiO2", 100.0)], 150.0, 500.0), "SiO2"),
        (lambda: band_mean([400.0, 500.0], [0.9]), "same length"),
        (lambda: band_mean([400.0, 500.0], [0.9, 0.9], [0.0, 0.0]), "response is zero"),
    ],
)
def test_bad_input_is_refused_with_a_clear_message(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_out_of_range_message_names_the_material_and_its_range():
    with pytest.raises(ValueError, match=r"silver \(ag\).*187\.9-1937 nm"):
        refractive_index("ag", [2000.0])


def test_wavelength_range_is_where_every_materials_optical_data_overlap():
    # The metals' tables end where the embedded copies of Rakic 1995 and Johnson and Christy 1972 end (read here
    # with the csv module); the dielectrics' formulas hold over their published ranges (refractiveindex.info:
    # Malitson 1965 0.21-3.71 um, Dodge 1984 0.2-7 um, Malitson 1962 0.2652-5.577 um).
    al_nm, _, _ = read_table("al_rakic1995.csv")
    ag_nm, _, _ = read_table("ag_johnson_christy1972.csv")
    assert wavelength_range_nm(["al"]) == pytest.approx((al_nm[0], al_nm[-1]))
    assert wavelength_range_nm(["ag", "SiO2"]) == pytest.approx((210.0, ag_nm[-1]))
    assert wavelength_range_nm(["al", "mgf2"]) == pytest.approx((200.0, 7000.0))
    assert wavelength_range_nm(MATERIALS) == pytest.approx((265.2, 1937.0))
    low, high = wavelength_range_nm(MATERIALS)
    for material in MATERIALS:  # refractive_index answers at both ends for every material
        assert np.all(np.isfinite(refractive_index(material, [low, high])))


def test_wavelength_range_needs_a_known_material():
    with pytest.raises(ValueError, match="unknown material 'gold'"):
        wavelength_range_nm(["al", "gold"])
    with pytest.raises(ValueError, match="at least one material"):
        wavelength_range_nm([])
