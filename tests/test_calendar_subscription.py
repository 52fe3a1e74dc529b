"""A calendar application subscribes to a site's planned work with a calendar token.

The people who plan observing runs around a recoat keep the downtime in their own calendars. A downloaded
file goes stale; a subscription fetches the same calendar again by itself. Calendar applications subscribe
to a link and send no header, so the token travels in the link's ``token`` parameter. Such a token has one
purpose: it reads the site's planned-work calendar, the same file the signed-in download gives, and
nothing else; a control-software token is never taken from a link. Events keep their UIDs from one fetch to
the next (RFC 5545 3.8.4.7), so a moved order moves in the subscriber's calendar and a withdrawn one is
marked CANCELLED (RFC 5545 3.8.1.11); that part is specified in tests/test_mirrors.py.
"""
from __future__ import annotations

import datetime as dt
import re
from io import StringIO

import pytest
from django.conf import settings
from django.core.management import call_command
from icalendar import Calendar
from test_api import get_due, night, post, snapshot
from test_mirrors import mirror  # noqa: F401  (a fixture, used by name)

from observatory_ops.api import services
from observatory_ops.api.decorators import WRONG_PURPOSE
from observatory_ops.api.models import ApiToken
from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.registry.models import Site

pytestmark = pytest.mark.django_db

CALENDAR = ApiToken.Purpose.CALENDAR


@pytest.fixture
def planned(mirror, users):  # noqa: F811
    """A recoat planned from 1 Aug 2026: four work orders and the window."""
    mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 3.5, users["engineer"])
    return mirror.subsystem.telescope.site


def feed(client, slug: str, secret: str | None, method: str = "get"):
    query = "" if secret is None else f"?token={secret}"
    return getattr(client, method)(f"/api/v1/sites/{slug}/planned-work.ics{query}")


def summaries(body: bytes) -> list[tuple[str, str, str]]:
    return sorted((str(e["uid"]), str(e["summary"]), str(e["status"])) for e in Calendar.from_ical(body).walk("VEVENT"))


def test_a_calendar_token_fetches_the_same_calendar_as_the_signed_in_download(client, planned, users):
    secret = services.api_token_create(planned, "workshop calendar", purpose=CALENDAR)[1]
    response = feed(client, planned.slug, secret)
    assert response.status_code == 200 and response["Content-Type"] == "text/calendar; charset=utf-8"
    assert not response.cookies  # no session: the application fetches it unattended
    subscribed = summaries(response.content)
    assert len(subscribed) == 5  # four work orders and the recoat window

    client.force_login(users["viewer"])
    assert summaries(client.get(f"/sites/{planned.slug}/downtime.ics").content) == subscribed
    assert ApiToken.objects.get(purpose=CALENDAR).last_used_at is not None  # the admin's list shows it in use


def test_the_link_is_refused_without_a_valid_token_of_its_site(client, planned, other_site):
    secret = services.api_token_create(planned, "workshop calendar", purpose=CALENDAR)[1]
    missing = feed(client, planned.slug, None)
    assert missing.status_code == 401 and "?token=" in missing.json()["errors"][0]["message"]
    assert feed(client, planned.slug, "not-a-token").status_code == 401
    assert feed(client, other_site.slug, secret).status_code == 403  # another site's calendar
    assert feed(client, "no-such-site", secret).status_code == 404
    assert feed(client, planned.slug, secret, method="post").status_code == 405
    assert feed(client, planned.slug, secret, method="head").status_code == 200  # some applications look first
    services.api_token_revoke(ApiToken.objects.get(purpose=CALENDAR))
    revoked = feed(client, planned.slug, secret)
    assert revoked.status_code == 401 and "revoked" in revoked.json()["errors"][0]["message"]


def test_a_calendar_token_neither_sends_nights_nor_reads_the_due_list(client, site):
    secret = services.api_token_create(site, "workshop calendar", purpose=CALENDAR)[1]
    before = snapshot()
    sent = post(client, site.slug, night(), secret)
    assert sent.status_code == 403 and sent.json()["errors"][0]["message"] == WRONG_PURPOSE[CALENDAR]
    assert snapshot() == before  # nothing stored
    assert get_due(client, site.slug, secret).status_code == 403


def test_a_control_token_is_not_taken_from_a_link(client, site):
    """A control-software token can write nights: put in a link, it is refused, and the answer says to revoke it."""
    secret = services.api_token_create(site, "east dome control computer")[1]
    refused = feed(client, site.slug, secret)
    assert refused.status_code == 403
    assert "revokes this one if the link was shared" in refused.json()["errors"][0]["message"]


def test_the_command_prints_the_link_to_subscribe_to(client, planned):
    out, err = StringIO(), StringIO()
    call_command("api_token", "create", "--site", planned.slug, "--name", "workshop calendar", "--calendar",
                 stdout=out, stderr=err)
    token = ApiToken.objects.get()
    assert token.purpose == CALENDAR
    assert f"Calendar token {token.pk} (workshop calendar) for site {planned.slug}." in err.getvalue()
    link = out.getvalue().strip()
    assert link.startswith(f"{settings.SITE_URL}/api/v1/sites/{planned.slug}/planned-work.ics?token={token.prefix}")
    assert client.get(link.removeprefix(settings.SITE_URL)).status_code == 200

    listing = StringIO()
    call_command("api_token", "list", stdout=listing)
    assert re.search(rf"^\s*{token.pk}\s+{planned.slug}\s+calendar\s+{token.prefix}…", listing.getvalue(), re.M)


def test_the_administrator_creates_a_calendar_token_and_is_shown_its_link(admin_client, client, planned):
    page = admin_client.post("/admin/api/apitoken/add/", {"site": planned.pk, "name": "workshop calendar",
                                                    "purpose": CALENDAR}, follow=True).content.decode()
    token = ApiToken.objects.get()
    link = re.search(r'<pre id="calendar-link">([^<]+)</pre>', page).group(1).replace("&amp;", "&")
    assert link.startswith(f"http://testserver/api/v1/sites/{planned.slug}/planned-work.ics?token={token.prefix}")
    assert "cannot change anything" in page and "Authorization: Bearer" not in page
    assert client.get(link.removeprefix("http://testserver")).status_code == 200


@pytest.fixture
def other_site(db) -> Site:
    return Site.objects.create(
        name="Other Mesa", slug="other-mesa", latitude_deg=-30.0, longitude_deg=20.0, time_zone="Africa/Johannesburg"
    )


def test_the_admins_token_list_gives_times_at_the_site(admin_client, planned):
    """A reviewer read "03 Dec 2026 04:39" in the token list while it was 02 Dec 21:39 at the site: the list gives
    each token's times in its site's zone, named."""
    services.api_token_create(planned, "workshop calendar", purpose=CALENDAR)
    page = admin_client.get("/admin/api/apitoken/").content.decode()
    assert f"({planned.time_zone})" in page and "never" in page
