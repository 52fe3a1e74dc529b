"""A coating's overcoats typed as text, as the ``coating`` command, the mirror page, the coating calculator and the
admin's coating rows all take them.

Format: one layer per line or comma-separated, from the metal outward, each ``MATERIAL:THICKNESS_NM`` with a
material of ``calc.coating.MATERIALS`` (any letter case) and a thickness of 0 to ``MAX_LAYER_NM`` nm: ``SiO2:100``, or
``Al2O3:30, SiO2:80``. Empty text is a bare metal.
"""
from __future__ import annotations

import math
import re
from collections.abc import Iterable

from observatory_ops.calc.coating import MATERIALS, Layer

#: The thickest overcoat taken, in nm: protective layers are tens to a few hundred nanometres thick, so 10 micrometres
#: is a unit slip (um typed as nm), not a coating. Our own bound, common practice, no published source.
MAX_LAYER_NM = 10_000

#: The format in a few words, for help texts and messages.
FORMAT = "MATERIAL:THICKNESS_NM from the metal outward, one layer per line or comma-separated, e.g. SiO2:100"

_CANONICAL = {name.lower(): name for name in MATERIALS}


def parse_layer(text: str) -> Layer:
    """One layer, ``"SiO2:100"``; ValueError naming the layer and what is wrong with it."""
    material, sep, thickness = (part.strip() for part in text.strip().partition(":"))
    if not sep:
        raise ValueError(f"layer {text.strip()!r}: write MATERIAL:THICKNESS_NM, e.g. SiO2:100")
    if material.lower() not in _CANONICAL:
        raise ValueError(f"layer {text.strip()!r}: {material!r} is not a known material; "
                         f"known materials: {', '.join(MATERIALS)}")
    try:
        nm = float(thickness)
    except ValueError:
        nm = math.nan
    if not math.isfinite(nm) or nm < 0:
        raise ValueError(f"layer {text.strip()!r}: the thickness must be a number of nanometres, 0 or more")
    if nm > MAX_LAYER_NM:
        raise ValueError(f"layer {text.strip()!r}: {nm:,.0f} nm is thicker than any overcoat (at most {MAX_LAYER_NM:,} "
                         "nm); give the thickness in nanometres")
    return Layer(_CANONICAL[material.lower()], nm)


def parse(text: str) -> list[Layer]:
    """Every layer of ``text`` in order (none for empty text); ValueError naming the first bad layer."""
    return [parse_layer(part) for part in re.split(r"[,\n]", text) if part.strip()]


def as_stored(layers: Iterable[Layer]) -> list[dict]:
    """Layers as a coating event stores them (``CoatingEvent.layers``)."""
    return [{"material": layer.material, "thickness_nm": layer.thickness_nm} for layer in layers]


def as_text(stored: Iterable[dict]) -> str:
    """A coating event's stored layers back in the typed format, one a line."""
    return "\n".join(f"{layer['material']}:{layer['thickness_nm']:g}" for layer in stored)
