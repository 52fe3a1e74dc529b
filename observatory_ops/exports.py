"""CSV downloads. Every cell that a spreadsheet would read as a formula is neutralised.

A cell starting with =, +, -, @ (or a tab or carriage return) is prefixed with an apostrophe, as the
OWASP guidance on CSV injection advises, so user-written text can never run as a formula.
"""
from __future__ import annotations

import csv
import datetime as dt
from collections.abc import Iterable, Sequence

from django.http import HttpResponse
from django.shortcuts import render
from django.utils.http import url_has_allowed_host_and_scheme

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")

#: The first character of every CSV this tool writes: a spreadsheet program on Windows reads a file without it in
#: the computer's legacy code page, so "Fan, east — Ø120 mm" came out garbled (a handover review). The importers
#: read a file with or without it (they decode "utf-8-sig").
BYTE_ORDER_MARK = "\ufeff"


def safe_cell(value) -> str:
    text = "" if value is None else str(value)
    if isinstance(value, int | float) and not isinstance(value, bool):
        return text  # a number is data, even when negative
    return "'" + text if text.startswith(FORMULA_START) else text


def csv_response(filename: str, header: Sequence[str], rows: Iterable[Sequence]) -> HttpResponse:
    response = HttpResponse(content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    response.write(BYTE_ORDER_MARK)
    writer = csv.writer(response)
    writer.writerow(header)
    for row in rows:
        writer.writerow([safe_cell(v) for v in row])
    return response


#: The years a download's period may run over: beyond them a day cannot be turned into the site's time and back.
EARLIEST_YEAR, LATEST_YEAR = 1900, 2999


def period(query, first: dt.date, last: dt.date) -> tuple[dt.date, dt.date]:
    """The period a download covers: the ``from`` and ``to`` dates of ``query`` (a request's GET), each defaulting to
    ``first`` and ``last``. ValueError, in words for the person who typed them, when either is not a date as
    YYYY-MM-DD or ``from`` comes after ``to``."""
    try:
        first = dt.date.fromisoformat(query["from"]) if query.get("from") else first
        last = dt.date.fromisoformat(query["to"]) if query.get("to") else last
    except ValueError as exc:
        raise ValueError(f"from and to are dates as YYYY-MM-DD ({exc})") from None
    if first > last:
        raise ValueError(f"from ({first}) is after to ({last})")
    if first.year < EARLIEST_YEAR or last.year > LATEST_YEAR:  # a day the site's clock cannot reach (a diff review)
        raise ValueError(f"from and to are dates from {EARLIEST_YEAR} to {LATEST_YEAR}")
    return first, last


def telescope_of(query, site):
    """The telescope a download is cut to: ``telescope`` in ``query`` (a request's GET), the id of one of ``site``'s
    telescopes, or None for all of them when it is not given. ValueError, in words, for anything else."""
    given = (query.get("telescope") or "").strip()
    if not given:
        return None
    found = site.telescopes.filter(pk=int(given)).first() if given.isascii() and given.isdigit() else None
    if found is None:
        raise ValueError(f"telescope {given} is not one of {site.name}'s telescopes")
    return found


def download_refused(request, reason: str, back: str, what: str = "") -> HttpResponse:
    """The page a download asked for with a wrong period gets (400): the reason in words and a way back to the
    form it came from (the referring page of this installation, else ``back``). ``what``: what could not be read,
    when it is not a period ("The filters cannot be applied")."""
    referrer = request.META.get("HTTP_REFERER", "")
    if referrer and url_has_allowed_host_and_scheme(referrer, {request.get_host()}, request.is_secure()):
        back = referrer
    return render(request, "download_refused.html", {"reason": reason, "back": back, "what": what}, status=400)
