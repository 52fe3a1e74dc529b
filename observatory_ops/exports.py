"""CSV downloads. Every cell that a spreadsheet would read as a formula is neutralised.

A cell starting with =, +, -, @ (or a tab or carriage return) is prefixed with an apostrophe, as the
OWASP guidance on CSV injection advises, so user-written text can never run as a formula.
"""
from __future__ import annotations

import csv
from collections.abc import Iterable, Sequence

from django.http import HttpResponse

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def safe_cell(value) -> str:
    text = "" if value is None else str(value)
    if isinstance(value, int | float) and not isinstance(value, bool):
        return text  # a number is data, even when negative
    return "'" + text if text.startswith(_FORMULA_START) else text


def csv_response(filename: str, header: Sequence[str], rows: Iterable[Sequence]) -> HttpResponse:
    response = HttpResponse(content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    writer = csv.writer(response)
    writer.writerow(header)
    for row in rows:
        writer.writerow([safe_cell(v) for v in row])
    return response
