"""Specifications for the ingest API as control software meets it: a body's length, HEAD beside GET, and refusals
that repeat a value as JSON writes it (never Python's None, True or 'text'), cut when it is long.

A refused request stores nothing (tests/test_api.py checks every refusal so); here the answers themselves.
"""
from __future__ import annotations

import http.client
import json
import socket
from io import BytesIO
from urllib.parse import urlsplit

import pytest
from django.test import RequestFactory
from django.urls import reverse

from observatory_ops.api import services as api_services
from observatory_ops.api import views
from observatory_ops.logbook import nights_csv
from observatory_ops.logbook import services as logbook_services
from observatory_ops.logbook.models import NightUsage

NIGHT = {"night": "2024-03-14", "open_hours": 7.5}
LENGTH_REQUIRED = "send the body with a Content-Length header; chunked transfer encoding is not accepted"


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    return recomputes_recorded


@pytest.fixture
def secret(site) -> str:
    return api_services.api_token_create(site, "east dome control computer")[1]


def post(client, site, body, secret: str, **extra):
    data = body if isinstance(body, bytes) else json.dumps(body)
    return client.post(reverse("api-nights", args=[site.slug]), data=data, content_type="application/json",
                       HTTP_AUTHORIZATION=f"Bearer {secret}", **extra)


def refusals(response) -> list[tuple]:
    assert response.status_code == 400 and response["Content-Type"] == "application/json"
    return [(e["index"], e["field"], e["message"]) for e in response.json()["errors"]]


# --- the body's length: Content-Length is required --------------------------------------------------------


def test_a_chunked_body_is_answered_411_length_required_and_nothing_is_stored(client, site, secret, recomputes):
    """Django reads a WSGI body only as far as its Content-Length, so a chunked body (which has none) read as empty
    and was answered "the body is not valid JSON: Expecting value". RFC 9110, section 15.5.12: 411 Length Required.
    The test client sends an empty body without a Content-Length, as a WSGI server hands Django a chunked one."""
    response = post(client, site, b"", secret, HTTP_TRANSFER_ENCODING="chunked")
    assert response.status_code == 411 and response["Content-Type"] == "application/json"
    assert response.json() == {"errors": [{"index": None, "field": None, "message": LENGTH_REQUIRED}]}
    assert not NightUsage.objects.exists() and recomputes == []


def test_a_content_length_that_is_no_number_is_said_so(site, secret):
    """A bad-input review sent "Content-Length: abc" and was told "the body is empty"."""
    request = RequestFactory().post("/", content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}",
                                    data=json.dumps(NIGHT))
    request.META["CONTENT_LENGTH"] = "abc"
    response = views.nights_post(request, slug=site.slug)
    assert response.status_code == 400
    assert json.loads(response.content)["errors"][0]["message"] == (
        "the Content-Length header, 'abc', is not a number of bytes")
    assert not NightUsage.objects.exists()


def test_a_chunked_body_over_the_limit_is_411_too_not_413_or_400(site, secret):
    request = RequestFactory().post("/", content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}",
                                    HTTP_TRANSFER_ENCODING="chunked")
    del request.META["CONTENT_LENGTH"]
    request._stream = BytesIO(json.dumps([NIGHT]).encode() + b" " * (views.BODY_MAX_BYTES + 10))
    response = views.nights_post(request, slug=site.slug)
    assert response.status_code == 411
    assert json.loads(response.content)["errors"][0]["message"] == LENGTH_REQUIRED
    assert not NightUsage.objects.exists()


def test_over_a_real_connection_a_chunked_post_is_411_and_the_same_body_with_its_length_is_stored(
    live_server, site, secret
):
    """What curl -H "Transfer-Encoding: chunked" sends, through the same server the demo runs (Django's)."""
    address = urlsplit(live_server.url)
    path = reverse("api-nights", args=[site.slug])
    headers = {"Authorization": f"Bearer {secret}", "Content-Type": "application/json"}
    body = json.dumps(NIGHT).encode()

    def chunked(part: bytes) -> bytes:  # RFC 9112, section 7.1: size in hex, CRLF, data, CRLF
        return f"{len(part):X}\r\n".encode() + part + b"\r\n"

    # Written in one piece, so the server's early answer (it reads no chunked body) cannot meet a request still being
    # sent: http.client would send each chunk apart and could find the connection closed half-way (a broken pipe).
    request = (f"POST {path} HTTP/1.1\r\nHost: {address.netloc}\r\nTransfer-Encoding: chunked\r\n"
               + "".join(f"{name}: {value}\r\n" for name, value in headers.items()) + "\r\n").encode()
    with socket.create_connection((address.hostname, address.port), timeout=30) as raw:
        raw.sendall(request + chunked(body[:10]) + chunked(body[10:]) + b"0\r\n\r\n")
        response = http.client.HTTPResponse(raw)
        response.begin()
        status, answer = response.status, json.loads(response.read())
    assert (status, answer["errors"][0]["message"]) == (411, LENGTH_REQUIRED)
    assert not NightUsage.objects.exists()

    connection = http.client.HTTPConnection(address.hostname, address.port, timeout=30)
    try:
        connection.request("POST", path, body=body, headers=headers)  # a known body: http.client gives its length
        response = connection.getresponse()
        status, answer = response.status, json.loads(response.read())
    finally:
        connection.close()
    assert (status, answer["created"]) == (200, 1)


def test_an_empty_body_says_it_is_empty(client, site, secret):
    assert refusals(post(client, site, b"", secret)) == [
        (None, None, "the body is empty: send one night (a JSON object) or a list of nights")
    ]


# --- HEAD wherever GET ---------------------------------------------------------------------------------


def test_head_of_the_due_list_is_answered_as_get_without_the_body(client, site, secret):
    """RFC 9110, section 9.3.2: HEAD is GET without the content; monitors and some clients look with HEAD first."""
    auth = {"HTTP_AUTHORIZATION": f"Bearer {secret}"}
    url = reverse("api-due", args=[site.slug])
    got, head = client.get(url, **auth), client.head(url, **auth)
    assert (got.status_code, head.status_code) == (200, 200)
    assert head["Content-Type"] == got["Content-Type"] == "application/json"
    assert head.content == b""


def test_head_needs_a_token_as_get_does(client, site):
    response = client.head(reverse("api-due", args=[site.slug]))
    assert response.status_code == 401 and response["WWW-Authenticate"] == "Bearer"


# --- values in messages: as JSON writes them -----------------------------------------------------------


@pytest.mark.parametrize(
    ("figures", "field", "message"),
    [
        ({"night": None}, "night", "night cannot be null"),
        ({"night": True}, "night", "night must be a date as YYYY-MM-DD, not true"),
        ({"night": "14.3.2024"}, "night", 'night must be a date as YYYY-MM-DD, not "14.3.2024"'),
        ({"open_hours": False}, "open_hours", "open_hours must be a number, not false"),
        ({"open_hours": [7.5]}, "open_hours", "open_hours must be a number, not [7.5]"),
        ({"open_hours": {"value": 7}}, "open_hours", 'open_hours must be a number, not {"value": 7}'),
        ({"telescope": False}, "telescope", "telescope must be a telescope's name, not false"),
        ({"telescope": "T7"}, "telescope",
         'unknown telescope "T7" (this site has no telescope registered); leave it empty for the whole site\'s night'),
        ({"dew": "maybe"}, "dew", 'dew must be true or false (or "yes" or "no", 1 or 0), not "maybe"'),
        ({"dew": None, "rain": 2}, "rain", 'rain must be true or false (or "yes" or "no", 1 or 0), not 2'),
        ({"dome": "east"}, "dome", 'unknown field "dome" (known: ' + ", ".join(nights_csv.COLUMNS) + ")"),
    ],
)
def test_a_refused_value_is_shown_as_json_writes_it(client, site, secret, figures, field, message):
    assert refusals(post(client, site, [NIGHT | figures], secret)) == [(0, field, message)]


def test_a_long_value_is_cut_to_40_characters_not_repeated_whole(client, site, secret):
    digits, text = "9" * 400, "x" * 500
    body = b'[{"night": "%s", "open_hours": 5, "slews": %s}]' % (text.encode(), digits.encode())
    assert refusals(post(client, site, body, secret)) == [
        (0, "night", f'night must be a date as YYYY-MM-DD, not "{"x" * 40}..."'),
        (0, "slews", f"slews cannot be above 10,000 (got {'9' * 40}...)"),
    ]


def test_no_refusal_shows_a_python_value(client, site, secret):
    """Every column sent null, true, false and a word: no message says None, True, False or quotes in Python's
    single quotes."""
    for value in (None, True, False, "perhaps"):
        body = [NIGHT | {name: value for name in nights_csv.COLUMNS if name != "night"}, {"night": value}]
        for _, _, message in refusals(post(client, site, body, secret)):
            assert not {"None", "True", "False", "'perhaps'"} & set(message.replace(",", " ").split()), message


def test_a_repeated_key_is_refused_at_its_object_with_the_key_as_the_field(client, site, secret):
    """A repeated key was a problem of the whole body (index and field null) although the message named the key."""
    body = b'[{"night": "2024-03-14", "open_hours": 5}, {"night": "2024-03-15", "open_hours": 5, "slews": 3, ' \
           b'"slews": 4}]'
    assert refusals(post(client, site, body, secret)) == [
        (1, "slews", '"slews" is given more than once in this night; send each key once')
    ]
    single = b'{"night": "2024-03-14", "open_hours": 5, "open_hours": 6}'
    assert [(i, f) for i, f, _ in refusals(post(client, site, single, secret))] == [(0, "open_hours")]
    assert not NightUsage.objects.exists()


def test_a_body_that_is_not_utf8_is_named_so_without_python_codec_words(client, site, secret):
    [(index, field, message)] = refusals(post(client, site, b'{"night": "2024-03-14", "open_hours": 5\xe9}', secret))
    assert (index, field) == (None, None)
    assert message == "the body is not UTF-8 text (byte 0xe9 at offset 39): send JSON as UTF-8"


# --- the CSV import keeps wording of its own ------------------------------------------------------------


def test_the_csv_import_words_a_flag_and_a_blank_night_for_a_csv_file(site):
    """The same checks serve both formats; a CSV user reads yes or no first, and an empty cell as empty."""
    report = logbook_services.nights_import(site, b"night,open_hours,dew\n2024-03-14,5,maybe\n,5,no\n")
    assert report.errors == [
        (2, 'dew must be yes or no (also 1 or 0, true or false), not "maybe"'),
        (3, "night is empty"),
    ]
    assert not NightUsage.objects.exists()
