"""A detector or filter response curve uploaded to weight the band average of a coating.

Format: UTF-8 CSV with a header line naming the columns ``wavelength_nm`` and ``weight`` (any order,
other columns refused); wavelengths strictly increasing; weights 0 or more, not all zero.
"""
from __future__ import annotations

import csv
import io
import math

import numpy as np

MAX_BYTES = 1024 * 1024


def parse(data: bytes) -> tuple[np.ndarray, np.ndarray]:
    """(wavelength_nm, weight) arrays; ValueError naming the line and the problem. ``data`` may be read only up to
    one byte past ``MAX_BYTES``: a file longer than that is refused."""
    if len(data) > MAX_BYTES:
        raise ValueError(f"the response file is over the limit of {MAX_BYTES:,} bytes")
    if b"\x00" in data:
        raise ValueError("the response file is not a text CSV file")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ValueError("the response file is not UTF-8 text") from None
    reader = csv.reader(io.StringIO(text))
    header = [h.strip().lower() for h in next(reader, [])]
    if sorted(header) != ["wavelength_nm", "weight"]:
        raise ValueError("line 1: the header must name exactly the columns wavelength_nm and weight")
    waves, weights = [], []
    for row in reader:
        if not any(c.strip() for c in row):
            continue
        line = reader.line_num
        if len(row) != 2:
            raise ValueError(f"line {line}: expected 2 fields, found {len(row)}")
        record = dict(zip(header, row, strict=True))
        try:
            wave, weight = float(record["wavelength_nm"]), float(record["weight"])
        except ValueError:
            raise ValueError(f"line {line}: wavelength_nm and weight must be numbers") from None
        if not (math.isfinite(wave) and math.isfinite(weight)) or weight < 0 or wave <= 0:
            raise ValueError(f"line {line}: wavelength must be positive and weight 0 or more")
        if waves and wave <= waves[-1]:
            raise ValueError(f"line {line}: wavelengths must increase ({wave:g} after {waves[-1]:g})")
        waves.append(wave)
        weights.append(weight)
    if len(waves) < 2 or not any(weights):
        raise ValueError("the response needs at least two rows and a weight above zero")
    return np.array(waves), np.array(weights)
