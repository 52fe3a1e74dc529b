"""The ingest API for control software (post nights, read the due list) and the planned-work calendar a calendar
application subscribes to. Thin: services do the work."""
from __future__ import annotations

import json

from django.http import HttpResponse, JsonResponse

from observatory_ops.logbook import services
from observatory_ops.logbook.nights_csv import object_from_pairs
from observatory_ops.mirrors import calendar_export
from observatory_ops.planning.selectors import due_records
from observatory_ops.planning.services import sites_bring_up_to_date

from .decorators import api_token_required
from .models import ApiToken
from .responses import error, errors

#: Largest request body accepted by the nights endpoint (about a thousand nights), in bytes.
BODY_MAX_BYTES = 256 * 1024


def _too_large(size: int | None) -> JsonResponse:
    said = f"{size:,} bytes" if size else f"over {BODY_MAX_BYTES:,} bytes"
    return error(413, f"the body is {said}; the limit is {BODY_MAX_BYTES:,} bytes: send fewer nights at once")


@api_token_required("POST")
def nights_post(request, site):
    if "HTTP_TRANSFER_ENCODING" in request.META:
        # Under WSGI Django reads a body only as far as its Content-Length: a chunked body, which has none, would be
        # read as empty (and one over the limit too). RFC 9110, section 15.5.12: 411 Length Required.
        return error(411, "send the body with a Content-Length header; chunked transfer encoding is not accepted")
    declared = (request.META.get("CONTENT_LENGTH") or "").strip()
    if declared and not declared.isdigit():  # RFC 9110, section 8.6: a length is decimal digits
        return error(400, f"the Content-Length header, {declared[:40]!r}, is not a number of bytes")
    if declared.isdigit() and int(declared) > BODY_MAX_BYTES:
        return _too_large(int(declared))
    body = request.read(BODY_MAX_BYTES + 1)  # the declared length may be wrong
    if len(body) > BODY_MAX_BYTES:
        return _too_large(None)
    if not body.strip():
        return error(400, "the body is empty: send one night (a JSON object) or a list of nights")
    try:
        # RFC 8259, section 8.1: JSON exchanged between systems is UTF-8 (a byte order mark is tolerated).
        text = body.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        return error(400, f"the body is not UTF-8 text (byte 0x{body[exc.start]:02x} at offset {exc.start}): send "
                          "JSON as UTF-8")
    try:
        payload = json.loads(text, object_pairs_hook=object_from_pairs)
    except RecursionError:
        return error(400, "the body nests lists or objects too deeply: send a night as one object, or a list of them")
    except ValueError as exc:  # JSONDecodeError
        if "integer string conversion" in str(exc):  # Python's own limit on a whole number's digits
            return error(400, "the body holds a whole number thousands of digits long: no figure of a night is")
        sent_as = request.content_type or ""
        hint = (f" (it was sent as {sent_as}: this endpoint takes JSON only; a CSV file goes to the site's import "
                "page or the import_nights command)" if sent_as and "json" not in sent_as else "")
        return error(400, f"the body is not valid JSON: {exc}{hint}")
    records = [payload] if isinstance(payload, dict) else payload
    if not isinstance(records, list):
        return error(400, "the body must be one night (a JSON object) or a list of nights")
    token = request.api_token
    report = services.nights_ingest(site, records, reason=f"sent with API token {token.prefix}... ({token.name})"[:100])
    if report.errors:
        return errors(400, [(p.position, p.field, p.reason) for p in report.errors])
    # The three counts stay as they were (control software reads them); by_telescope says whose nights they are.
    # "changes": every figure of a stored night the request changed, as the import page lists them (an API review:
    # a month of past nights rewritten by a slip showed only as a count). "check": nights stored as sent whose open
    # hours exceed the night at the site, for the operator to look at.
    return JsonResponse({"created": report.created, "updated": report.updated, "unchanged": report.unchanged,
                         "by_telescope": report.by_telescope, "changes": [
                             {"night": c.night.isoformat(), "telescope": c.telescope, "field": c.column, "old": c.old,
                              "new": c.new} for c in report.changes], "check": report.to_check})


@api_token_required("GET")
def due_list(request, site):
    """The site's due list, one object per plan (``planning.selectors.due_records``, as ``due --json`` prints it)."""
    sites_bring_up_to_date([site])
    return JsonResponse(due_records(site), safe=False)


@api_token_required("GET", purpose=ApiToken.Purpose.CALENDAR)
def planned_work_calendar(request, site):
    """The site's planned work, as the signed-in download has it, for a calendar application to fetch again and
    again: events keep their UIDs, so a moved or withdrawn order moves or is marked off in the subscriber's
    calendar (``calendar_export``)."""
    body = calendar_export.site_calendar(site, request.build_absolute_uri("/"))
    return HttpResponse(body, content_type="text/calendar; charset=utf-8")
