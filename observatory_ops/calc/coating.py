"""Reflectance of a fresh mirror coating by the characteristic-matrix (transfer-matrix) method.

A coating is an opaque metal (aluminium or silver) under zero or more thin dielectric overcoats, seen
from air at normal incidence. Each layer is a 2x2 characteristic matrix; their product carries the
metal's optical admittance out to the air, and the reflectance follows from the admittance mismatch
(H. A. Macleod, Thin-Film Optical Filters, chapter 2, "Basic theory": the characteristic matrix of an
assembly of thin films).

Optical constants come from the embedded files in ``optical_data/``, copied once from the public-domain
refractiveindex.info database (nothing is fetched at run time):

- aluminium: A. D. Rakic, Appl. Opt. 34, 4755 (1995), evaporated film, tabulated n and k;
- silver: P. B. Johnson and R. W. Christy, Phys. Rev. B 6, 4370 (1972), tabulated n and k;
- SiO2: fused silica, Sellmeier formula of I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965);
- MgF2: ordinary ray, Sellmeier formula of M. J. Dodge, Appl. Opt. 23, 1980 (1984);
- Al2O3: sapphire, ordinary ray, Sellmeier formula of I. H. Malitson, J. Opt. Soc. Am. 52, 1377 (1962).

The dielectric indices are those of the bulk materials; an evaporated or sputtered overcoat is often a
little less dense (notably amorphous Al2O3, whose index is lower than sapphire's), so a real coating
can differ by a few tenths of a percent in reflectance. Metal films also age: these are fresh-film
values.
"""

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cache
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike
from scipy.integrate import trapezoid

_DATA_DIR = Path(__file__).parent / "optical_data"


@dataclass(frozen=True)
class _Source:
    label: str
    file: str
    # Range of the published dispersion formula; None for a table, whose own wavelengths bound it.
    formula_range_nm: tuple[float, float] | None = None


_SOURCES: dict[str, _Source] = {
    "al": _Source("aluminium (al), Rakic 1995", "al_rakic1995.csv"),
    "ag": _Source("silver (ag), Johnson and Christy 1972", "ag_johnson_christy1972.csv"),
    "sio2": _Source("SiO2, Malitson 1965", "sio2_malitson1965.csv", (210.0, 3710.0)),
    "mgf2": _Source("MgF2, Dodge 1984", "mgf2_dodge1984.csv", (200.0, 7000.0)),
    "al2o3": _Source("Al2O3, Malitson 1962", "al2o3_malitson1962.csv", (265.2, 5577.0)),
}

MATERIALS: tuple[str, ...] = ("al", "ag", "SiO2", "MgF2", "Al2O3")
"""Material names accepted (case-insensitive) by :func:`refractive_index` and :class:`Layer`."""

METALS: tuple[str, ...] = ("al", "ag")
"""Materials that can be the opaque mirror metal in :func:`reflectance`."""

DEFAULT_BAND_NM: tuple[float, float] = (400.0, 1000.0)
"""A common science band (common practice, no published source)."""

MAX_GRID_SIZE = 10_000
"""Most wavelengths :func:`coating_curve` computes at once. Our own bound, no published source: it holds the default
band at a 0.1 nm step (6,001) and aluminium's whole table at a 50 nm step, and keeps the calculator's page to about
half a second, where an unbounded grid took minutes or more memory than there is."""


@dataclass(frozen=True)
class Layer:
    """One overcoat layer: a material from :data:`MATERIALS` and its physical thickness in nm."""

    material: str
    thickness_nm: float


def _key(material: str) -> str:
    key = str(material).lower()
    if key not in _SOURCES:
        raise ValueError(f"unknown material {material!r}; known materials: {', '.join(MATERIALS)}")
    return key


@cache
def _read_columns(file: str) -> dict[str, np.ndarray]:
    lines = [line for line in (_DATA_DIR / file).read_text().splitlines() if line and not line.startswith("#")]
    header = lines[0].split(",")
    values = np.array([[float(cell) for cell in line.split(",")] for line in lines[1:]])
    return {name: values[:, i] for i, name in enumerate(header)}


def _valid_range_nm(source: _Source) -> tuple[float, float]:
    if source.formula_range_nm is not None:
        return source.formula_range_nm
    wavelength_nm = 1000.0 * _read_columns(source.file)["wavelength_um"]
    # To 1e-9 nm: the table's micrometres times 1000 carry the float's last bit (0.12399000000000002 nm), and a range
    # printed as 0.12399 must accept 0.12399 typed back.
    return round(float(wavelength_nm[0]), 9), round(float(wavelength_nm[-1]), 9)


def refractive_index(material: str, wavelength_nm: ArrayLike) -> np.ndarray:
    """Complex refractive index ``n + ik`` of a material at the given vacuum wavelengths.

    Tabulated metals are interpolated linearly in wavelength between the published points (Rakic 1995
    for aluminium, Johnson and Christy 1972 for silver); dielectrics are evaluated from their published
    Sellmeier formula, ``n^2 - 1 = sum B_i lambda^2 / (lambda^2 - C_i^2)`` (Malitson 1965, Dodge 1984,
    Malitson 1962), with ``k = 0``.

    Parameters
    ----------
    material : str
        One of :data:`MATERIALS`, any letter case.
    wavelength_nm : array_like
        Vacuum wavelengths in nanometres, any shape.

    Returns
    -------
    numpy.ndarray
        Complex array of the same shape, ``n + ik`` with ``k >= 0`` for absorption.

    Raises
    ------
    ValueError
        Unknown material, or a wavelength outside the range of its table or formula.
    """
    source = _SOURCES[_key(material)]
    wavelength = np.asarray(wavelength_nm, dtype=float)
    low, high = _valid_range_nm(source)
    if wavelength.size and not (
        np.all(np.isfinite(wavelength)) and wavelength.min() >= low and wavelength.max() <= high
    ):
        raise ValueError(
            f"{source.label}: optical constants cover {low:g}-{high:g} nm; "
            f"wavelengths asked span {np.nanmin(wavelength):g}-{np.nanmax(wavelength):g} nm"
        )
    columns = _read_columns(source.file)
    if source.formula_range_nm is None:
        table_nm = 1000.0 * columns["wavelength_um"]
        return np.interp(wavelength, table_nm, columns["n"]) + 1j * np.interp(wavelength, table_nm, columns["k"])
    lambda_sq = (wavelength / 1000.0)[..., np.newaxis] ** 2
    n_squared = 1.0 + np.sum(columns["b"] * lambda_sq / (lambda_sq - columns["resonance_um"] ** 2), axis=-1)
    return np.sqrt(n_squared).astype(complex)


def wavelength_range_nm(materials: Sequence[str]) -> tuple[float, float]:
    """Wavelengths over which the optical constants of every given material are known.

    The overlap of each material's published table (Rakic 1995, Johnson and Christy 1972) or the range
    its published Sellmeier formula was fitted over (Malitson 1965, Dodge 1984, Malitson 1962): where
    :func:`refractive_index` answers for all of them, so where :func:`reflectance` of a coating made of
    them can be computed.

    Parameters
    ----------
    materials : sequence of str
        At least one of :data:`MATERIALS`, any letter case.

    Returns
    -------
    (float, float)
        Lowest and highest wavelength in nm.
    """
    if not materials:
        raise ValueError("name at least one material")
    ranges = [_valid_range_nm(_SOURCES[_key(material)]) for material in materials]
    return max(low for low, _ in ranges), min(high for _, high in ranges)


def stack_reflectance(
    substrate_index: ArrayLike,
    layer_indices: Sequence[ArrayLike],
    thickness_nm: Sequence[float],
    wavelength_nm: ArrayLike,
    incident_index: float = 1.0,
) -> np.ndarray:
    """Normal-incidence reflectance of a thin-film stack on a semi-infinite substrate.

    Characteristic-matrix method (Macleod, Thin-Film Optical Filters, chapter 2): with
    ``delta = 2 pi N d / lambda`` for each layer,
    ``[B, C] = prod_j [[cos delta_j, i sin delta_j / N_j], [i N_j sin delta_j, cos delta_j]] [1, N_s]``,
    the product taken from the layer next to the incident medium down to the one on the substrate,
    ``Y = C / B`` and ``R = |(N_0 - Y) / (N_0 + Y)|^2``. Macleod writes ``N = n - ik``; indices here are
    ``n + ik`` and are conjugated on entry, which leaves ``|r|^2`` unchanged.

    Parameters
    ----------
    substrate_index : array_like
        Complex index ``n + ik`` of the substrate, scalar or one value per wavelength.
    layer_indices : sequence of array_like
        Complex index of each layer, listed from the substrate outward.
    thickness_nm : sequence of float
        Physical thickness of each layer in nm, same order.
    wavelength_nm : array_like
        Vacuum wavelengths in nm.
    incident_index : float
        Real index of the incident medium (air: 1).

    Returns
    -------
    numpy.ndarray
        Reflectance (0 to 1) at each wavelength.
    """
    if len(layer_indices) != len(thickness_nm):
        raise ValueError(f"{len(layer_indices)} layer indices but {len(thickness_nm)} thicknesses")
    wavelength = np.asarray(wavelength_nm, dtype=float)
    b_field = np.ones_like(wavelength, dtype=complex)
    c_field = np.conj(np.asarray(substrate_index, dtype=complex)) * b_field
    for index, thickness in zip(layer_indices, thickness_nm, strict=True):
        admittance = np.conj(np.asarray(index, dtype=complex))
        delta = 2.0 * np.pi * admittance * thickness / wavelength
        # Scale the matrix by exp(-|Im delta|): Y = C/B ignores a common factor, and cos/sin of a thick
        # absorbing layer would otherwise overflow.
        damping = np.abs(delta.imag)
        forward = np.exp(1j * delta - damping)
        backward = np.exp(-1j * delta - damping)
        cos_d = 0.5 * (forward + backward)
        sin_d = -0.5j * (forward - backward)
        b_field, c_field = (
            cos_d * b_field + 1j * sin_d / admittance * c_field,
            1j * admittance * sin_d * b_field + cos_d * c_field,
        )
    amplitude = (incident_index * b_field - c_field) / (incident_index * b_field + c_field)
    return np.abs(amplitude) ** 2


def reflectance(metal: str, layers: Sequence[Layer], wavelength_nm: ArrayLike) -> np.ndarray:
    """Normal-incidence reflectance in air of an opaque metal under dielectric overcoats.

    Indices from :func:`refractive_index`, stack by :func:`stack_reflectance` (characteristic-matrix
    method, Macleod, Thin-Film Optical Filters). The metal is taken as thick enough to be opaque
    (semi-infinite), as a mirror coating of about 100 nm is in the visible.

    Parameters
    ----------
    metal : str
        One of :data:`METALS`.
    layers : sequence of Layer
        Overcoats listed from the metal outward: ``layers[0]`` lies on the metal, ``layers[-1]`` faces
        the air. Empty for a bare metal.
    wavelength_nm : array_like
        Vacuum wavelengths in nm.

    Returns
    -------
    numpy.ndarray
        Reflectance (0 to 1) at each wavelength.
    """
    if str(metal).lower() not in METALS:
        raise ValueError(f"mirror metal must be one of {', '.join(METALS)}; got {metal!r}")
    for layer in layers:
        if not np.isfinite(layer.thickness_nm) or layer.thickness_nm < 0:
            raise ValueError(f"layer of {layer.material}: thickness must be >= 0 nm, got {layer.thickness_nm}")
    wavelength = np.asarray(wavelength_nm, dtype=float)
    return stack_reflectance(
        refractive_index(metal, wavelength),
        [refractive_index(layer.material, wavelength) for layer in layers],
        [layer.thickness_nm for layer in layers],
        wavelength,
    )


def band_mean(wavelength_nm: ArrayLike, reflectance: ArrayLike, weight: ArrayLike | None = None) -> float:
    """Mean reflectance over a band, flat or weighted by a response curve.

    ``integral(R w d lambda) / integral(w d lambda)`` by the trapezoid rule over the given samples
    (``w = 1`` when no weight is given).

    Parameters
    ----------
    wavelength_nm : array_like
        Strictly increasing wavelengths in nm (at least two).
    reflectance : array_like
        Reflectance at each wavelength.
    weight : array_like, optional
        Non-negative response (detector efficiency, filter transmission...) at each wavelength.

    Returns
    -------
    float
        The band-mean reflectance.
    """
    wavelength = np.asarray(wavelength_nm, dtype=float)
    values = np.asarray(reflectance, dtype=float)
    weights = np.ones_like(wavelength) if weight is None else np.asarray(weight, dtype=float)
    if wavelength.ndim != 1 or wavelength.size < 2:
        raise ValueError("band mean needs at least two wavelengths in a one-dimensional array")
    if values.shape != wavelength.shape or weights.shape != wavelength.shape:
        raise ValueError(
            f"wavelength, reflectance and weight must have the same length; got {wavelength.size}, "
            f"{values.size} and {weights.size}"
        )
    if not np.all(np.diff(wavelength) > 0):
        raise ValueError("wavelengths must be strictly increasing")
    if np.any(weights < 0):
        raise ValueError("response weights must be >= 0")
    norm = trapezoid(weights, wavelength)
    if norm <= 0:
        raise ValueError("the response is zero over the whole band")
    return float(trapezoid(values * weights, wavelength) / norm)


def grid_size(from_nm: float, to_nm: float, step_nm: float) -> int:
    """Number of wavelengths on the grid :func:`coating_curve` would build, counted without building it.

    The grid runs from ``from_nm`` in steps of ``step_nm`` and always ends at ``to_nm`` (added when the step does
    not land on it).

    Parameters
    ----------
    from_nm, to_nm : float
        Band edges in nm, finite, ``from_nm < to_nm``.
    step_nm : float
        Grid step in nm, finite and > 0.

    Returns
    -------
    int
        The number of wavelengths.

    Raises
    ------
    ValueError
        A band edge or the step that is not a finite number, a band whose start is not below its end, a step
        not above zero.
    """
    if not (np.isfinite(from_nm) and np.isfinite(to_nm)):
        raise ValueError(f"band edges must be finite numbers of nm; got {from_nm} to {to_nm}")
    if not from_nm < to_nm:
        raise ValueError(f"band start must be below its end; got {from_nm} to {to_nm} nm")
    if not (np.isfinite(step_nm) and step_nm > 0):
        raise ValueError(f"wavelength step must be a finite number > 0 nm; got {step_nm}")
    intervals = (to_nm - from_nm) / step_nm
    if not np.isfinite(intervals):
        raise ValueError(f"a step of {step_nm:g} nm from {from_nm:g} to {to_nm:g} nm gives too many wavelengths")
    steps = math.floor(intervals + 1e-9)
    lands_on_end = to_nm - (from_nm + step_nm * steps) <= 1e-9 * step_nm
    return steps + 1 if lands_on_end else steps + 2


def coating_curve(
    metal: str,
    layers: Sequence[Layer],
    from_nm: float = DEFAULT_BAND_NM[0],
    to_nm: float = DEFAULT_BAND_NM[1],
    step_nm: float = 10.0,
    response: tuple[ArrayLike, ArrayLike] | None = None,
) -> dict:
    """Reflectance curve of a fresh coating over a band, and its band mean.

    The grid runs from ``from_nm`` in steps of ``step_nm`` and always ends at ``to_nm`` (:func:`grid_size`), at
    most :data:`MAX_GRID_SIZE` wavelengths. The default band, 400-1000 nm, is a common science band (common
    practice, no published source).

    Parameters
    ----------
    metal, layers
        As for :func:`reflectance`.
    from_nm, to_nm : float
        Band edges in nm, ``from_nm < to_nm``.
    step_nm : float
        Grid step in nm, > 0.
    response : (array_like, array_like), optional
        ``(wavelength_nm, weight)`` of a response curve, interpolated linearly onto the grid (zero
        outside its wavelengths) to weight the band mean.

    Returns
    -------
    dict
        ``{"band_mean": R, "curve": [{"wavelength_nm": W, "reflectance": R}, ...]}`` with plain floats.

    Raises
    ------
    ValueError
        As :func:`grid_size`; a grid of more than :data:`MAX_GRID_SIZE` wavelengths (refused before it is built);
        as :func:`reflectance` (wavelengths outside the optical data).
    """
    size = grid_size(from_nm, to_nm, step_nm)
    if size > MAX_GRID_SIZE:
        raise ValueError(
            f"a step of {step_nm:g} nm from {from_nm:g} to {to_nm:g} nm gives {size:,} wavelengths; "
            f"the limit is {MAX_GRID_SIZE:,}"
        )
    grid = np.append(from_nm + step_nm * np.arange(size - 1), to_nm)
    curve = reflectance(metal, layers, grid)
    weight = None
    if response is not None:
        response_nm, response_weight = (np.asarray(a, dtype=float) for a in response)
        if response_nm.shape != response_weight.shape or response_nm.ndim != 1 or response_nm.size < 2:
            raise ValueError(
                "response needs matching one-dimensional wavelength and weight arrays (two points or more)"
            )
        if not np.all(np.diff(response_nm) > 0):
            raise ValueError("response wavelengths must be strictly increasing")
        weight = np.interp(grid, response_nm, response_weight, left=0.0, right=0.0)
    return {
        "band_mean": band_mean(grid, curve, weight),
        "curve": [{"wavelength_nm": float(w), "reflectance": float(r)} for w, r in zip(grid, curve, strict=True)],
    }
