"""Specifications for the ingest API: tokens, POST nights, GET due, and every way a request is refused.

A refused request answers JSON ``{"errors": [{"index", "field", "message"}]}`` with its status code and
stores nothing (every NightUsage row, every field, unchanged; no recompute). The nights endpoint applies
the CSV import's rules (``nights_csv.ParsedNights.add``); a property test checks that a CSV cell and the same
value sent as JSON give the same stored values or a refusal of the same field.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import json
from io import BytesIO, StringIO

import hypothesis
import pytest
from django.contrib.auth.models import Group, User
from django.core.management import CommandError, call_command
from django.test import Client, RequestFactory
from django.urls import URLResolver, get_resolver, reverse
from hypothesis import HealthCheck, given
from hypothesis import strategies as st

from observatory_ops.api import services as api_services
from observatory_ops.api import views
from observatory_ops.api.decorators import API_ACCESS, api_token_required
from observatory_ops.api.models import ApiToken
from observatory_ops.logbook import nights_csv
from observatory_ops.logbook import services as logbook_services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.selectors import due_record, due_rows
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db

NIGHT = dt.date(2024, 3, 14)
EXAMPLES = hypothesis.settings(
    max_examples=60, deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    """Record due-state recomputes instead of running them (each costs seconds of sky computation).

    The real recompute runs in test_posted_nights_reach_the_due_list_the_api_returns.
    """
    return recomputes_recorded


@pytest.fixture
def secret(site) -> str:
    return api_services.api_token_create(site, "east dome control computer")[1]


@pytest.fixture
def other_site(db) -> Site:
    return Site.objects.create(
        name="Other Mesa", slug="other-mesa", latitude_deg=-30.0, longitude_deg=20.0, time_zone="Africa/Johannesburg"
    )


@pytest.fixture
def stored(site):
    """Five nights already stored, so a refused request has something to leave unchanged."""
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=NIGHT - dt.timedelta(days=i), open_hours=4.0 + i, slews=20, pm10_ugm3=30.0)
        for i in range(1, 6)
    )
    return site


def night(day: dt.date = NIGHT, **figures) -> dict:
    return {
        "night": day.isoformat(), "open_hours": 7.5, "slews": 41, "axis1_travel_deg": 1030.5,
        "axis2_travel_deg": 610, "brake_cycles": 43, "pm10_ugm3": 38.2, "humidity_pct": 31, "dew": False,
        "rain": False, **figures,
    }


def post(client, slug: str, body, secret: str | None, **extra):
    data = body if isinstance(body, bytes) else json.dumps(body)
    if secret is not None:
        extra["HTTP_AUTHORIZATION"] = f"Bearer {secret}"
    return client.post(reverse("api-nights", args=[slug]), data=data, content_type="application/json", **extra)


def get_due(client, slug: str, secret: str | None, **extra):
    if secret is not None:
        extra["HTTP_AUTHORIZATION"] = f"Bearer {secret}"
    return client.get(reverse("api-due", args=[slug]), **extra)


def snapshot() -> list[dict]:
    """Every NightUsage row of every site, every field (including recorded_at)."""
    return list(NightUsage.objects.order_by("site_id", "night").values())


def error_body(response) -> list[dict]:
    assert response["Content-Type"] == "application/json"
    body = json.loads(response.content)
    assert set(body) == {"errors"} and body["errors"]
    for item in body["errors"]:
        assert set(item) == {"index", "field", "message"} and item["message"].strip()
    return body["errors"]


# --- accepted posts -----------------------------------------------------------------------------------


def answer(created: int, updated: int, unchanged: int, changes: list | None = None) -> dict:
    """The answer to nights of the whole site alone: the three counts, and the same under ``by_telescope``'s "" (the
    whole site's nights; each telescope's under its name: tests/test_usage_per_telescope_ingest.py), the figures
    changed (``changes``), and no night to check (``check``: tests/test_nights_longer_than_the_night.py)."""
    counts = {"created": created, "updated": updated, "unchanged": unchanged}
    return counts | {"by_telescope": {"": counts}, "changes": changes or [], "check": []}



def test_one_night_as_an_object_is_stored_from_the_control_software(client, site, secret, recomputes):
    response = post(client, site.slug, night(), secret)
    assert response.status_code == 200
    assert response.json() == answer(1, 0, 0)
    usage = NightUsage.objects.get(site=site)
    assert (usage.night, usage.open_hours, usage.slews, usage.axis2_travel_deg) == (NIGHT, 7.5, 41, 610.0)
    assert (usage.pm10_ugm3, usage.humidity_pct, usage.dew, usage.rain) == (38.2, 31.0, False, False)
    assert usage.source == NightUsage.Source.API
    assert recomputes == [site.pk]


def test_a_list_of_nights_is_stored_in_one_request(client, site, secret):
    days = [NIGHT + dt.timedelta(days=i) for i in range(3)]
    response = post(client, site.slug, [night(d, open_hours=5.0 + i) for i, d in enumerate(days)], secret)
    assert response.json() == answer(3, 0, 0)
    stored_hours = dict(NightUsage.objects.filter(site=site).values_list("night", "open_hours"))
    assert stored_hours == {days[0]: 5.0, days[1]: 6.0, days[2]: 7.0}


def test_the_same_nights_sent_twice_change_nothing(client, site, secret, recomputes):
    body = [night(NIGHT), night(NIGHT + dt.timedelta(days=1), open_hours=3.25)]
    assert post(client, site.slug, body, secret).json() == answer(2, 0, 0)
    after_first = snapshot()
    response = post(client, site.slug, body, secret)
    assert response.status_code == 200
    assert response.json() == answer(0, 0, 2)
    assert snapshot() == after_first
    assert recomputes == [site.pk]  # only the request that changed something refreshes the due states


def test_a_night_sent_again_with_other_figures_is_updated_in_place(client, site, secret, recomputes):
    post(client, site.slug, [night(NIGHT), night(NIGHT + dt.timedelta(days=1))], secret)
    before = {row["night"]: row for row in snapshot()}
    response = post(client, site.slug, [night(NIGHT, open_hours=9.25, pm10_ugm3=None)], secret)
    # Every figure changed is named, as the import page lists them (an API review: only the count was said).
    said = NIGHT.isoformat()
    assert response.json() == answer(0, 1, 0, [
        {"night": said, "telescope": "", "field": "open_hours", "old": 7.5, "new": 9.25},
        {"night": said, "telescope": "", "field": "pm10_ugm3", "old": 38.2, "new": None}])
    after = {row["night"]: row for row in snapshot()}
    assert (after[NIGHT]["open_hours"], after[NIGHT]["pm10_ugm3"]) == (9.25, None)
    assert after[NIGHT]["id"] == before[NIGHT]["id"]
    assert after[NIGHT + dt.timedelta(days=1)] == before[NIGHT + dt.timedelta(days=1)]
    assert recomputes == [site.pk, site.pk]


def test_null_means_not_given_and_booleans_or_csv_words_are_flags(client, site, secret):
    body = [
        {"night": NIGHT.isoformat(), "open_hours": 6, "slews": None, "pm10_ugm3": None, "dew": True, "rain": None},
        {"night": (NIGHT + dt.timedelta(days=1)).isoformat(), "open_hours": "4.5", "slews": "12", "dew": "yes",
         "rain": 0},
    ]
    assert post(client, site.slug, body, secret).status_code == 200
    first, second = NightUsage.objects.filter(site=site).order_by("night")
    assert (first.open_hours, first.slews, first.pm10_ugm3, first.dew, first.rain) == (6.0, 0, None, True, False)
    assert (second.open_hours, second.slews, second.dew, second.rain) == (4.5, 12, True, False)


def test_tonight_can_be_logged_once_it_has_begun_not_before(client, site, secret, monkeypatch):
    """A night is dated by its evening and runs from local noon (calc.night_of): tonight's figures may come
    from the afternoon on; before noon a night dated today has not begun (a morning-dated night, a slip)."""
    from django.utils import timezone

    latest_night = logbook_services.latest_night
    today = site_today(site)
    morning = dt.datetime.combine(today, dt.time(9, 0), tzinfo=site.zone)
    monkeypatch.setattr(timezone, "now", lambda: morning)
    assert latest_night(site) == today - dt.timedelta(days=1)
    refused = post(client, site.slug, night(today), secret)
    assert refused.status_code == 400 and "has not begun yet" in error_body(refused)[0]["message"]
    monkeypatch.setattr(timezone, "now", lambda: morning + dt.timedelta(hours=4))
    assert post(client, site.slug, night(today), secret).status_code == 200


def test_the_api_needs_no_csrf_token_and_sets_no_cookie(site, secret):
    client = Client(enforce_csrf_checks=True)
    response = post(client, site.slug, night(), secret)
    assert response.status_code == 200
    assert not response.cookies
    assert "Cookie" not in response.get("Vary", "")


def test_a_signed_in_session_without_a_token_is_refused(client, site, users):
    client.force_login(users["administrator"])
    assert post(client, site.slug, night(), None).status_code == 401
    assert get_due(client, site.slug, None).status_code == 401
    assert not NightUsage.objects.exists()


# --- one set of rules for CSV rows and JSON objects ----------------------------------------------------

FLOAT_COLUMNS = {"open_hours": 24.0, "axis1_travel_deg": 1e5, "axis2_travel_deg": 1e5, "pm10_ugm3": 2e3,
                 "humidity_pct": 100.0}
WHOLE_COLUMNS = ("slews", "brake_cycles")


@st.composite
def typed_records(draw) -> dict:
    """A JSON night with values in and out of range; ``None`` is JSON null."""
    record = {"night": (NIGHT + dt.timedelta(days=draw(st.integers(-400, 400)))).isoformat()}
    for name, top in FLOAT_COLUMNS.items():
        value = draw(st.none() | st.floats(-10, top * 1.5, allow_nan=False) | st.integers(-5, int(top * 1.5)))
        if value is not None or name != "open_hours" or draw(st.booleans()):
            record[name] = value
    for name in WHOLE_COLUMNS:
        record[name] = draw(st.none() | st.integers(-5, 2**32) | st.floats(0, 10).map(float))
    for name in ("dew", "rain"):
        record[name] = draw(st.none() | st.booleans())
    return record


def as_csv_cells(record: dict) -> dict[str, str]:
    """The same record as a CSV row reads it: every value a string, null an empty cell."""
    def cell(value) -> str:
        if value is None:
            return ""
        if isinstance(value, bool):
            return "yes" if value else "no"
        return value if isinstance(value, str) else repr(value)

    return {name: cell(value) for name, value in record.items()}


@EXAMPLES
@given(record=typed_records())
def test_a_json_object_and_the_same_csv_row_give_the_same_values_or_fail_on_the_same_field(record):
    latest = NIGHT + dt.timedelta(days=200)
    outcomes = []
    # Each checked as its own path checks a record: the API's parse_objects as JSON, the importer's parse as a row.
    for form, as_json in ((record, True), (as_csv_cells(record), False)):
        parsed = nights_csv.ParsedNights(latest, as_json=as_json)
        parsed.add(0, form)
        outcomes.append(("refused", parsed.errors[0].field) if parsed.errors else ("stored", parsed.rows[0][1]))
    assert outcomes[0] == outcomes[1]


def test_the_api_and_the_csv_import_store_identical_rows(client, site, secret, other_site):
    rows = [night(NIGHT + dt.timedelta(days=i), open_hours=5.5 + i, pm10_ugm3=None if i else 12.5) for i in range(3)]
    assert post(client, site.slug, rows, secret).status_code == 200
    header = ",".join(nights_csv.COLUMNS)
    lines = [",".join(as_csv_cells(row).get(c, "") for c in nights_csv.COLUMNS) for row in rows]
    logbook_services.nights_import(other_site, "\n".join([header, *lines]).encode())
    ignored = {"id", "site_id", "source", "recorded_at"}

    def figures(s: Site) -> list[dict]:
        return [{k: v for k, v in row.items() if k not in ignored} for row in
                NightUsage.objects.filter(site=s).order_by("night").values()]

    assert figures(site) == figures(other_site)


# --- refused bodies: 400, nothing stored ----------------------------------------------------------------

FUTURE = object()  # replaced by the site's tomorrow in the test


@pytest.mark.parametrize(
    ("body", "expected"),
    [
        (b"{not json", [(None, None, "the body is not valid JSON")]),
        (b"", [(None, None, "the body is empty: send one night (a JSON object) or a list of nights")]),
        (b" \n", [(None, None, "the body is empty")]),
        (b'{"night": "2024-03-14", "open_hours": 5, "open_hours": 6}',
         [(0, "open_hours", '"open_hours" is given more than once in this night; send each key once')]),
        (b"[" * 100_000 + b"]" * 100_000, [(None, None, "the body nests lists or objects too deeply")]),
        (b'{"night": "2024-03-14", "open_hours": ' + b"9" * 5_000 + b"}",
         [(None, None, "the body holds a whole number thousands of digits long")]),
        (b"\xff\xfe\x00{", [(None, None, "the body is not UTF-8 text (byte 0xff at offset 0): send JSON as UTF-8")]),
        ('"2024-03-14,5"', [(None, None, "the body must be one night (a JSON object) or a list of nights")]),
        ([], [(None, None, "the list of nights is empty")]),
        ([night(), 7], [(1, None, "each night must be an object with the CSV column names as keys, not a number")]),
        ([night(open_hours=24.5)], [(0, "open_hours", "open_hours cannot be above 24 (got 24.5)")]),
        ([night(open_hours=-1)], [(0, "open_hours", "open_hours cannot be below 0 (got -1)")]),
        ([night(axis1_travel_deg=-0.5)], [(0, "axis1_travel_deg", "axis1_travel_deg cannot be below 0 (got -0.5)")]),
        ([night(humidity_pct=140)], [(0, "humidity_pct", "humidity_pct cannot be above 100 (got 140)")]),
        ([night(slews=2.5)], [(0, "slews", "slews must be a whole number, not 2.5")]),
        ([night(brake_cycles=2**31)], [(0, "brake_cycles", "brake_cycles cannot be above 10,000")]),
        ([night(open_hours=True)], [(0, "open_hours", "open_hours must be a number, not true")]),
        ([night(open_hours="five")], [(0, "open_hours", 'open_hours must be a number, not "five"')]),
        (b'{"night": "2024-03-14", "open_hours": NaN}', [(0, "open_hours", "open_hours must be a finite number")]),
        ([night(dew="maybe")], [(0, "dew", 'dew must be true or false (or "yes" or "no", 1 or 0), not "maybe"')]),
        ([night(rain=2)], [(0, "rain", 'rain must be true or false (or "yes" or "no", 1 or 0), not 2')]),
        ([night(dome="east")], [(0, "dome", 'unknown field "dome" (known: night, telescope, open_hours,')]),
        ([night(Open_Hours=5)], [(0, "Open_Hours", 'unknown field "Open_Hours"')]),
        ([{"night": "2024-03-14"}], [(0, "open_hours", "open_hours is missing")]),
        ([night(open_hours=None)], [(0, "open_hours", "open_hours cannot be null")]),
        ([night(open_hours="")], [(0, "open_hours", "open_hours is empty")]),
        ([night(night=None)], [(0, "night", "night cannot be null")]),
        ([{"open_hours": 5}], [(0, "night", "night is missing")]),
        ([night(night="14/03/2024")], [(0, "night", 'night must be a date as YYYY-MM-DD, not "14/03/2024"')]),
        ([night(night=20240314)], [(0, "night", "night must be a date as YYYY-MM-DD, not 20240314")]),
        ([night(), night(open_hours=3)], [(1, "night", "night 2024-03-14 already appears at index 0")]),
        (
            [night(NIGHT - dt.timedelta(days=9)), night(open_hours=30), night(NIGHT + dt.timedelta(days=1)),
             night(slews=-4)],
            [(1, "open_hours", "open_hours cannot be above 24"), (3, "slews", "slews cannot be below 0")],
        ),
        ([night(night=FUTURE)], [(0, "night", "has not begun yet (a night is dated by its evening; the latest")]),
    ],
)
def test_each_bad_body_is_refused_with_400_naming_index_and_field_and_nothing_is_stored(
    client, stored, secret, recomputes, body, expected
):
    if isinstance(body, list):
        tomorrow = (site_today(stored) + dt.timedelta(days=1)).isoformat()
        body = [{k: tomorrow if v is FUTURE else v for k, v in item.items()} if isinstance(item, dict) else item
                for item in body]
    before = snapshot()
    response = post(client, stored.slug, body, secret)
    assert response.status_code == 400
    errors = error_body(response)
    assert [(e["index"], e["field"]) for e in errors] == [(index, field) for index, field, _ in expected]
    for error, (_, _, message) in zip(errors, expected, strict=True):
        assert message in error["message"]
    assert snapshot() == before
    assert recomputes == []


def test_a_night_in_the_future_names_the_latest_night_that_can_be_logged(client, site, secret):
    today = site_today(site)
    response = post(client, site.slug, night(today + dt.timedelta(days=1)), secret)
    assert response.status_code == 400
    assert error_body(response) == [{
        "index": 0, "field": "night",
        "message": f"night {today + dt.timedelta(days=1)} has not begun yet (a night is dated by its evening; the "
                   f"latest that can be logged now is {logbook_services.latest_night(site)})",
    }]


def test_one_bad_night_among_good_ones_stores_none_of_them(client, site, secret):
    body = [night(NIGHT + dt.timedelta(days=i)) for i in range(5)]
    body[3]["open_hours"] = 25
    response = post(client, site.slug, body, secret)
    assert response.status_code == 400
    assert [(e["index"], e["field"]) for e in error_body(response)] == [(3, "open_hours")]
    assert not NightUsage.objects.exists()


json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False) | st.text(max_size=12),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(
        st.sampled_from([*nights_csv.COLUMNS, "x"]) | st.text(max_size=6), inner, max_size=6
    ),
    max_leaves=20,
)


@EXAMPLES
@given(body=json_values | st.binary(max_size=200))
def test_any_body_at_all_is_answered_200_or_400_and_a_refusal_stores_nothing(client, stored, secret, body):
    before = snapshot()
    response = post(client, stored.slug, body, secret)
    assert response.status_code in (200, 400)
    if response.status_code == 400:
        error_body(response)
        assert snapshot() == before


# --- tokens, sites, methods and sizes --------------------------------------------------------------------


@pytest.mark.parametrize(
    ("authorization", "challenge", "message"),
    [
        (None, "Bearer", "send the site's API token as 'Authorization: Bearer <token>'"),
        ("Bearer", "Bearer", "send the site's API token as 'Authorization: Bearer <token>'"),
        ("Token {secret}", "Bearer", "send the site's API token as 'Authorization: Bearer <token>'"),
        ("Bearer not-a-token-of-ours", 'Bearer error="invalid_token"', "the API token is not known"),
    ],
)
def test_a_missing_or_unknown_token_is_refused_with_401(client, site, secret, authorization, challenge, message):
    extra = {} if authorization is None else {"HTTP_AUTHORIZATION": authorization.format(secret=secret)}
    for response in (post(client, site.slug, night(), None, **extra), get_due(client, site.slug, None, **extra)):
        assert response.status_code == 401
        assert response["WWW-Authenticate"] == challenge
        assert error_body(response) == [{"index": None, "field": None, "message": message}]
    assert not NightUsage.objects.exists()


def test_the_bearer_scheme_is_case_insensitive(client, site, secret):
    # RFC 7235, section 2.1: the authentication scheme is a case-insensitive token.
    assert post(client, site.slug, night(), None, HTTP_AUTHORIZATION=f"bearer {secret}").status_code == 200


def test_a_revoked_token_is_refused_and_nothing_is_stored(client, stored, secret):
    token = ApiToken.objects.get(site=stored)
    api_services.api_token_revoke(token)
    before = snapshot()
    response = post(client, stored.slug, night(), secret)
    assert response.status_code == 401
    assert response["WWW-Authenticate"] == 'Bearer error="invalid_token"'
    assert "was revoked on" in error_body(response)[0]["message"]
    assert get_due(client, stored.slug, secret).status_code == 401
    assert snapshot() == before


def test_a_token_of_one_site_can_neither_write_nor_read_another(client, site, other_site, secret):
    other_secret = api_services.api_token_create(other_site, "mesa dome")[1]
    post(client, other_site.slug, night(), other_secret)
    before = snapshot()
    response = post(client, other_site.slug, night(open_hours=1.0), secret)
    assert response.status_code == 403
    assert error_body(response)[0]["message"] == 'this API token belongs to site "test-hill", not "other-mesa"'
    assert get_due(client, other_site.slug, secret).status_code == 403
    assert snapshot() == before


def test_an_unknown_site_is_404(client, site, secret):
    response = post(client, "nowhere", night(), secret)
    assert response.status_code == 404
    assert error_body(response)[0]["message"] == 'no site with slug "nowhere"'
    assert get_due(client, "nowhere", secret).status_code == 404
    assert not NightUsage.objects.exists()


@pytest.mark.parametrize(("method", "name", "allowed"), [
    ("get", "api-nights", ["POST"]), ("put", "api-nights", ["POST"]), ("delete", "api-nights", ["POST"]),
    ("head", "api-nights", ["POST"]), ("post", "api-due", ["GET", "HEAD"]), ("patch", "api-due", ["GET", "HEAD"]),
])
def test_a_wrong_method_is_405_with_the_allowed_one(client, site, secret, method, name, allowed):
    response = getattr(client, method)(reverse(name, args=[site.slug]), HTTP_AUTHORIZATION=f"Bearer {secret}")
    assert response.status_code == 405
    assert response["Allow"] == ", ".join(allowed)
    if method != "head":  # a HEAD answer has no body
        assert error_body(response)[0]["message"].endswith(f"use {' or '.join(allowed)}")
    assert not NightUsage.objects.exists()


def padded(body: list[dict], size: int) -> bytes:
    """The JSON of ``body`` followed by spaces (insignificant in JSON) up to ``size`` bytes."""
    data = json.dumps(body).encode()
    return data + b" " * (size - len(data))


def test_a_body_over_the_limit_is_413_and_one_at_the_limit_is_read(client, stored, secret):
    limit = views.BODY_MAX_BYTES
    assert limit == 256 * 1024  # the figure README.md documents
    before = snapshot()
    response = post(client, stored.slug, padded([night()], limit + 1), secret)
    assert response.status_code == 413
    message = error_body(response)[0]["message"]
    assert message == f"the body is {limit + 1:,} bytes; the limit is {limit:,} bytes: send fewer nights at once"
    assert snapshot() == before
    assert post(client, stored.slug, padded([night()], limit), secret).json()["created"] == 1


def test_a_body_longer_than_its_declared_length_is_413_too(stored, secret):
    """The view counts the bytes it reads rather than trust the stream to end at the declared length."""
    request = RequestFactory().post("/", content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}")
    del request.META["CONTENT_LENGTH"]
    request._stream = BytesIO(padded([night()], views.BODY_MAX_BYTES + 10))
    before = snapshot()
    response = views.nights_post(request, slug=stored.slug)
    assert response.status_code == 413
    assert "the body is over 262,144 bytes" in error_body(response)[0]["message"]
    assert snapshot() == before


def test_every_api_url_declares_token_access_and_refuses_a_request_without_one(client, site):
    """The role walk of tests/test_roles.py covers the pages; API views carry required_role = "api-token"."""

    def walk(patterns, prefix=""):
        for entry in patterns:
            if isinstance(entry, URLResolver):
                yield from walk(entry.url_patterns, prefix + str(entry.pattern))
            else:
                yield prefix + str(entry.pattern), entry.callback

    api = [(route, view) for route, view in walk(get_resolver().url_patterns) if route.startswith("api/")]
    assert len(api) == 3  # nights, due list, planned-work calendar (tests/test_calendar_subscription.py)
    assert [route for route, view in api if getattr(view, "required_role", None) != API_ACCESS] == []
    for route, _ in api:
        url = "/" + route.replace("<slug:slug>", site.slug)
        for response in (client.get(url), client.post(url, {}), client.put(url)):
            assert response.status_code == 401, url
            error_body(response)
    assert not NightUsage.objects.exists()


def test_api_token_required_needs_the_methods_named():
    with pytest.raises(ValueError, match="name the HTTP methods"):
        api_token_required()


# --- the due list --------------------------------------------------------------------------------------


def test_posted_nights_reach_the_due_list_the_api_returns(client, site, telescope, other_site, secret, monkeypatch):
    monkeypatch.undo()  # the real recompute, with the sky computation
    mirror = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2024, 1, 1))
    other_scope = other_site.telescopes.create(name="M1", aperture_m=0.4, mount="fork")
    subsystem_create(other_scope, "brake", "Brake", counting_from=dt.date(2024, 1, 1))
    body = [night(dt.date(2024, 1, 5) + dt.timedelta(days=i), open_hours=5.0, pm10_ugm3=60) for i in range(3)]
    assert post(client, site.slug, body, secret).status_code == 200

    response = get_due(client, site.slug, secret)
    assert response.status_code == 200
    records = response.json()
    assert records == [due_record(s) for s in due_rows().filter(site=site)]
    assert len(records) == PlanStatus.objects.filter(site=site).count() > 0
    assert {r["site"] for r in records} == {site.slug}
    inspect = next(r for r in records if r["subsystem_id"] == mirror.pk and r["plan"].startswith("Inspect and CO2"))
    status = PlanStatus.objects.get(plan_id=inspect["plan_id"])
    dust = next(t for t in status.trigger_rows if t["metric"] == "dust_hours")
    # Hand computation with calc.exposure.dust_weight: sensitivity 1 at PM10 60 weighs 1 + (60 - 20) / 20 = 3;
    # 3 nights x 5 h x 3 = 45 dust-weighted hours.
    assert dust["value"] == pytest.approx(45.0)


def test_the_due_list_of_a_site_with_nothing_computed_is_an_empty_list(client, site, secret):
    response = get_due(client, site.slug, secret)
    assert response.status_code == 200
    assert response.json() == []


# --- the service ---------------------------------------------------------------------------------------


def test_nights_ingest_reports_index_and_field_of_each_problem(site):
    report = logbook_services.nights_ingest(site, [night(), night(open_hours=-2)])
    assert [(p.position, p.field) for p in report.errors] == [(1, "open_hours")]
    assert report.errors == [(1, "open_hours cannot be below 0 (got -2)")]
    assert not report.stored and not NightUsage.objects.exists()


def test_nights_ingest_refuses_what_is_not_a_list(site):
    with pytest.raises(ValueError, match="the nights must be a list of objects, not dict"):
        logbook_services.nights_ingest(site, night())


def test_a_night_inserted_by_a_concurrent_writer_is_counted_once(site, monkeypatch):
    """Two senders of the same new night: the one whose insert hits the unique constraint starts again."""
    logbook_services.nights_ingest(site, [night()])
    real = logbook_services._stored_nights
    reads = []

    def first_read_misses_it(*args):
        reads.append(args)
        return {} if len(reads) == 1 else real(*args)

    monkeypatch.setattr(logbook_services, "_stored_nights", first_read_misses_it)
    report = logbook_services.nights_ingest(site, [night()])
    assert (report.created, report.updated, report.unchanged) == (0, 0, 1)
    assert len(reads) == 2
    assert NightUsage.objects.filter(site=site).count() == 1


# --- tokens: storage, command, admin -------------------------------------------------------------------


def test_the_secret_is_stored_only_as_its_sha256_and_a_prefix(site):
    # FIPS 180-2, appendix B.1 (one-block message "abc"): the published SHA-256 digest.
    assert api_services.secret_digest("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    token, secret = api_services.api_token_create(site, "east dome", by=None)
    other, other_secret = api_services.api_token_create(site, "west dome", by=None)
    assert secret != other_secret and len(secret) >= 43  # 32 random bytes, base64url
    row = ApiToken.objects.filter(pk=token.pk).values().get()
    assert row["secret_sha256"] == hashlib.sha256(secret.encode()).hexdigest()
    assert row["prefix"] == secret[:8]
    assert not any(secret in str(value) for value in row.values())


def test_a_token_needs_a_name_and_is_revoked_only_once(site):
    with pytest.raises(ValueError, match="a token needs a name"):
        api_services.api_token_create(site, "  ")
    token, _ = api_services.api_token_create(site, "east dome")
    api_services.api_token_revoke(token)
    with pytest.raises(ValueError, match=f"token {token.pk} \\(east dome\\) was already revoked on"):
        api_services.api_token_revoke(token)


def run(*args: str) -> tuple[str, str]:
    out, err = StringIO(), StringIO()
    call_command("api_token", *args, stdout=out, stderr=err)
    return out.getvalue(), err.getvalue()


def test_command_creates_a_token_that_works_lists_it_and_revokes_it(client, site):
    out, err = run("create", "--site", site.slug, "--name", "east dome")
    secret = out.strip()
    token = ApiToken.objects.get(site=site)
    assert f"Token {token.pk} (east dome) for site test-hill. Copy it now: it is shown once." in err
    assert "Stored in the SQLite file" in err or "Stored in the PostgreSQL database" in err  # which (an IT review)
    assert post(client, site.slug, night(), secret).status_code == 200

    listing, _ = run("list")
    assert f"{token.prefix}…" in listing and "active" in listing and secret not in listing
    assert listing.splitlines()[0].split() == ["id", "site", "purpose", "begins", "created", "last", "used", "(site",
                                               "time)", "state", "name"]
    token.refresh_from_db()  # the night sent above used it; times at the site (Europe/Madrid), as its pages show them
    assert token.last_used_at is not None and f"{token.last_used_at.astimezone(site.zone):%Y-%m-%d %H:%M}" in listing
    header, row = listing.splitlines()[:2]
    assert row.index(f"{token.prefix}…") == header.index("begins")  # the columns line up whatever the slug's length

    out, _ = run("revoke", str(token.pk))
    assert out.strip() == f"Token {token.pk} (east dome, site test-hill) revoked."
    assert post(client, site.slug, night(open_hours=1.0), secret).status_code == 401
    assert "revoked" in run("list", "--site", site.slug)[0]
    with pytest.raises(CommandError, match="was already revoked on"):
        run("revoke", str(token.pk))


def test_command_names_an_unknown_site_or_token(site):
    with pytest.raises(CommandError, match="no site with slug 'nowhere' \\(known: test-hill\\)"):
        run("create", "--site", "nowhere", "--name", "east dome")
    with pytest.raises(CommandError, match="no API token 999"):
        run("revoke", "999")
    assert not ApiToken.objects.exists()


@pytest.fixture
def admin_client(administrator_in_admin):
    """The administrator in the admin (conftest.py)."""
    return administrator_in_admin


def test_admin_creates_a_token_and_shows_its_secret_once(admin_client, client, site, users):
    add_url = reverse("admin:api_apitoken_add")
    assert admin_client.get(add_url).status_code == 200
    response = admin_client.post(add_url, {"site": site.pk, "name": "east dome", "purpose": "control"}, follow=True)
    assert response.status_code == 200 and len(response.redirect_chain) == 1
    token = ApiToken.objects.get()
    assert token.created_by == users["administrator"]
    page = response.content.decode()
    secret = page.split('<code id="api-token-secret">')[1].split("</code>")[0]
    assert api_services.secret_digest(secret) == token.secret_sha256
    assert "shown only this once" in page
    # Reloading the page that showed it neither shows it again nor creates a second token (it was reached by a
    # redirect, not by the form sent again).
    again = admin_client.get(response.redirect_chain[0][0]).content.decode()
    assert secret not in again and "is not kept" in again and ApiToken.objects.count() == 1
    for url in (reverse("admin:api_apitoken_changelist"), reverse("admin:api_apitoken_change", args=[token.pk])):
        shown = admin_client.get(url)
        assert shown.status_code == 200 and secret not in shown.content.decode()
    assert post(Client(), site.slug, night(), secret).status_code == 200


def test_admin_revoke_action_stops_the_token(admin_client, site):
    token, secret = api_services.api_token_create(site, "east dome")
    response = admin_client.post(
        reverse("admin:api_apitoken_changelist"), {"action": "revoke", "_selected_action": [token.pk]}, follow=True
    )
    assert b"1 token(s) revoked" in response.content
    token.refresh_from_db()
    assert token.revoked_at is not None
    assert post(Client(), site.slug, night(), secret).status_code == 401


def test_only_an_administrator_may_see_or_create_tokens_in_the_admin(client, site):
    engineer = User.objects.create_user("staff-engineer", is_staff=True)
    engineer.groups.add(Group.objects.get_or_create(name="engineer")[0])
    client.force_login(engineer)
    assert client.get(reverse("admin:api_apitoken_add")).status_code == 403
    assert client.post(reverse("admin:api_apitoken_add"), {"site": site.pk, "name": "x"}).status_code == 403
    assert client.get(reverse("admin:api_apitoken_changelist")).status_code == 403
    assert not ApiToken.objects.exists()


# --- keys left out, whole numbers written as decimals, bounds, every problem of a night ------------------


def test_a_key_left_out_keeps_the_stored_figure_and_only_a_real_change_counts_as_updated(
    client, site, secret, recomputes
):
    assert post(client, site.slug, night(dew=True), secret).json() == answer(1, 0, 0)
    before = snapshot()
    short = {"night": NIGHT.isoformat(), "open_hours": 7.5}  # the stored hours; nothing else given
    assert post(client, site.slug, short, secret).json() == answer(0, 0, 1)
    assert snapshot() == before
    response = post(client, site.slug, {**short, "open_hours": 8.25, "pm10_ugm3": None}, secret)
    assert response.json() == answer(0, 1, 0, [
        {"night": short["night"], "telescope": "", "field": "open_hours", "old": 7.5, "new": 8.25},
        {"night": short["night"], "telescope": "", "field": "pm10_ugm3", "old": 38.2, "new": None}])
    usage = NightUsage.objects.get(site=site)
    assert (usage.open_hours, usage.pm10_ugm3) == (8.25, None)  # given: changed (null clears)
    assert (usage.slews, usage.axis1_travel_deg, usage.axis2_travel_deg, usage.brake_cycles) == (41, 1030.5, 610, 43)
    assert (usage.humidity_pct, usage.dew, usage.rain) == (31.0, True, False)  # left out: kept
    assert recomputes == [site.pk, site.pk]


def test_a_new_night_with_keys_left_out_takes_the_blank_values(client, site, secret):
    assert post(client, site.slug, {"night": NIGHT.isoformat(), "open_hours": 3}, secret).status_code == 200
    usage = NightUsage.objects.get(site=site)
    assert (usage.slews, usage.axis1_travel_deg, usage.axis2_travel_deg, usage.brake_cycles) == (0, 0.0, 0.0, 0)
    assert (usage.pm10_ugm3, usage.humidity_pct, usage.dew, usage.rain) == (None, None, False, False)


def test_a_whole_number_sent_with_a_decimal_point_is_accepted_for_a_count(client, site, secret):
    body = b'{"night": "2024-03-14", "open_hours": 5, "slews": 4.0, "brake_cycles": 1e2}'
    response = post(client, site.slug, body, secret)
    assert response.status_code == 200, response.content
    usage = NightUsage.objects.get(site=site)
    assert (usage.slews, usage.brake_cycles) == (4, 100)


@pytest.mark.parametrize("value", [4.5, 0.1, 1e-9])
def test_a_fraction_is_still_refused_for_a_count(client, stored, secret, value):
    before = snapshot()
    response = post(client, stored.slug, night(slews=value), secret)
    assert response.status_code == 400
    assert error_body(response) == [
        {"index": 0, "field": "slews", "message": f"slews must be a whole number, not {value!r}"}
    ]
    assert snapshot() == before


def test_a_night_more_than_15_years_back_is_refused_and_the_earliest_accepted_is_stored(client, stored, secret):
    earliest = nights_csv.earliest_accepted(logbook_services.latest_night(stored))
    before = snapshot()
    response = post(client, stored.slug, [night(dt.date(1900, 1, 1)), night(earliest - dt.timedelta(days=1))], secret)
    assert response.status_code == 400
    assert error_body(response) == [
        {"index": 0, "field": "night",
         "message": f"night 1900-01-01 is more than 15 years ago; the earliest accepted is {earliest}"},
        {"index": 1, "field": "night",
         "message": f"night {earliest - dt.timedelta(days=1)} is more than 15 years ago; "
                    f"the earliest accepted is {earliest}"},
    ]
    assert snapshot() == before
    assert post(client, stored.slug, night(earliest), secret).status_code == 200


@pytest.mark.parametrize(
    ("field", "value", "message"),
    [
        ("slews", 10_001, "slews cannot be above 10,000 (got 10001)"),
        ("axis1_travel_deg", 1_000_001, "axis1_travel_deg cannot be above 1,000,000 (got 1000001)"),
        ("axis2_travel_deg", 1e300, "axis2_travel_deg cannot be above 1,000,000 (got 1e+300)"),
        ("brake_cycles", 10_001, "brake_cycles cannot be above 10,000 (got 10001)"),
        ("pm10_ugm3", 10_000.5, "pm10_ugm3 cannot be above 10,000 (got 10000.5)"),
        ("humidity_pct", -1, "humidity_pct cannot be below 0 (got -1)"),
    ],
)
def test_a_figure_beyond_its_plausibility_bound_is_refused(client, stored, secret, field, value, message):
    before = snapshot()
    response = post(client, stored.slug, night(**{field: value}), secret)
    assert response.status_code == 400
    assert error_body(response) == [{"index": 0, "field": field, "message": message}]
    assert snapshot() == before


@pytest.mark.parametrize("literal", [b"NaN", b"Infinity", b"-Infinity", b"1e999"])
@pytest.mark.parametrize("field", ["open_hours", "slews", "axis1_travel_deg", "pm10_ugm3", "humidity_pct"])
def test_a_figure_that_is_not_finite_is_refused(client, stored, secret, field, literal):
    body = b'{"night": "2024-03-14", "open_hours": 5, "%s": %s}' % (field.encode(), literal)
    if field == "open_hours":
        body = b'{"night": "2024-03-14", "open_hours": %s}' % literal
    before = snapshot()
    response = post(client, stored.slug, body, secret)
    assert response.status_code == 400
    [error] = error_body(response)
    assert (error["index"], error["field"]) == (0, field)
    assert error["message"].startswith(f"{field} must be a finite number")
    assert snapshot() == before


def test_every_problem_of_a_night_is_reported_each_with_its_field(client, stored, secret):
    before = snapshot()
    response = post(client, stored.slug, [night(), night(NIGHT + dt.timedelta(days=1), slews=-1, humidity_pct=140,
                                                         dome="east")], secret)
    assert response.status_code == 400
    assert [(e["index"], e["field"], e["message"]) for e in error_body(response)] == [
        (1, "dome", 'unknown field "dome" (known: ' + ", ".join(nights_csv.COLUMNS) + ")"),
        (1, "slews", "slews cannot be below 0 (got -1)"),
        (1, "humidity_pct", "humidity_pct cannot be above 100 (got 140)"),
    ]
    assert snapshot() == before


def test_nights_ingest_of_an_empty_list_is_a_problem_of_the_whole_body(site):
    report = logbook_services.nights_ingest(site, [])
    assert report.errors == [(None, "the list of nights is empty")]
    assert report.summary == "The list of nights is empty. Nothing was stored."
