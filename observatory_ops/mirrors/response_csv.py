"""A detector or filter response curve uploaded to weight the band average of a coating.

Format: UTF-8 CSV with a header line naming the columns ``wavelength_nm`` and ``weight`` (any order,
other columns refused); wavelengths strictly increasing; weights 0 or more, not all zero.
"""
from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterator

import numpy as np

MAX_BYTES = 1024 * 1024


#: A response whose wavelengths all lie below this many "nm" was written in micrometres (0.4 to 1.0): no detector or
#: filter responds only below 20 nm, the coating data start above 200 nm.
MICROMETRES_BELOW = 20


def parse(data: bytes) -> tuple[np.ndarray, np.ndarray]:
    """(wavelength_nm, weight) arrays; ValueError naming the line and the problem. ``data`` may be read only up to
    one byte past ``MAX_BYTES``: a file longer than that is refused."""
    if len(data) > MAX_BYTES:
        raise ValueError(f"the response file is over the limit of {MAX_BYTES:,} bytes")
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):  # the byte order marks of UTF-16, which spreadsheets may save
        raise ValueError("the response file is UTF-16 text; save it as UTF-8 CSV")
    if b"\x00" in data:
        raise ValueError("the response file is not a text CSV file")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ValueError("the response file is not UTF-8 text") from None
    rows = _rows(text)
    _line, first_row = next(rows, (1, []))
    header = [h.strip().lower() for h in first_row]
    if sorted(header) != ["wavelength_nm", "weight"]:
        joined = ",".join(first_row)
        apart = next((f"'{mark}'" if mark != "\t" else "tabs" for mark in (";", "\t") if mark in joined), "")
        hint = f" (its columns look separated by {apart}: this format separates them by commas)" if apart else ""
        raise ValueError(f"line 1: the header must name exactly the columns wavelength_nm and weight{hint}")
    waves, weights = [], []
    for line, row in rows:
        if not any(c.strip() for c in row):
            continue
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
    if waves[-1] < MICROMETRES_BELOW:
        raise ValueError(f"wavelengths {waves[0]:g} to {waves[-1]:g} look like micrometres: the column wavelength_nm "
                         f"is in nanometres ({waves[0] * 1000:g} to {waves[-1] * 1000:g})")
    # Only the weights' proportions count (a band mean divides by their sum): scaled to a largest of 1, weights of
    # 1e308 (a bad-input review's) no longer overflow the sum and print "Band mean: nan".
    weights_ = np.array(weights)
    return np.array(waves), weights_ / weights_.max()


def _rows(text: str) -> Iterator[tuple[int, list[str]]]:
    """Each row of the file with the number of the line it ends on; ValueError naming the line that is not CSV.

    Line ends are read as such (universal newlines: a file saved with carriage returns alone reads as lines), and
    ``parse`` has refused NUL bytes, so the one error Python's csv module has left to raise is a cell over its field
    limit: most often a quote never closed, which runs one cell on line after line.
    """
    reader = csv.reader(io.StringIO(text, newline=None))
    while True:
        try:
            row = next(reader)
        except StopIteration:
            return
        except csv.Error:
            raise ValueError(f"line {reader.line_num}: a cell is longer than {csv.field_size_limit():,} characters, "
                             "the most one cell may hold (is a quote left open?)") from None
        yield reader.line_num, row
