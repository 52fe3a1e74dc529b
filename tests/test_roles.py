"""Specifications for the role matrix: every page declares the role it needs, and every role gets what it should.

Walks every URL pattern of the project (admin, login, logout and static files excepted), so a new view
without ``@requires(ROLE)`` fails here, and a new URL argument without a test record fails with a message
saying where to add one. The expected outcome comes from the role order of
``observatory_ops.access.roles`` (viewer < technician < engineer < administrator):

- anonymous: 302 to the login page, for GET and POST;
- signed in below the required role (or in no role group): 403, and a POST creates nothing;
- at or above: 200, or 302 for pages that redirect (not to the login page), or 405 for POST-only actions.

API views declare ``required_role = "api-token"`` instead (observatory_ops.api.decorators): they read no
session, so every caller without a bearer token, signed in or not, gets 401 and a POST creates nothing.
"""
from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterator

import pytest
from django.apps import apps
from django.conf import settings
from django.contrib.auth.models import User
from django.shortcuts import resolve_url
from django.urls import URLResolver, get_resolver, include, path
from django.utils import timezone

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import ADMINISTRATOR, ROLES, VIEWER, has_role, role_of
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.mirrors.models import Mirror, ReflectanceMeasurement
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import Part
from observatory_ops.workorders.services import work_order_ad_hoc

# "alive/" answers anyone with an empty 204 and reads nothing (forms.js asks it before sending a form; its own test
# is in tests/test_error_pages.py).
SKIPPED = ("admin/", "login/", "logout/", "static/", "alive/")
TOKEN_ACCESS = "api-token"
PARAMETER = re.compile(r"<(?:\w+:)?(?P<name>\w+)>")


def routes(patterns, prefix: str = "") -> Iterator[tuple[str, object]]:
    """(route, view) for every URL pattern below ``patterns``, following includes."""
    for entry in patterns:
        route = prefix + str(entry.pattern)
        if route.startswith(SKIPPED):
            continue
        if isinstance(entry, URLResolver):
            yield from routes(entry.url_patterns, route)
        else:
            yield route, entry.callback


def project_routes() -> list[tuple[str, object]]:
    return list(routes(get_resolver().url_patterns))


def undeclared(found: list[tuple[str, object]]) -> list[str]:
    return [route for route, view in found if getattr(view, "required_role", None) not in (*ROLES, TOKEN_ACCESS)]


def test_every_view_declares_the_role_it_requires():
    found = project_routes()
    assert len(found) >= 8  # the walk reached the included URLconfs
    assert undeclared(found) == [], "add @requires(ROLE) from observatory_ops.access.decorators to these views"


def _bare_view(request):
    return None


class _UrlsWithAnUndeclaredView:
    urlpatterns = [
        path("declared/", requires(VIEWER)(_bare_view)),
        path("nested/", include([path("bare/<int:pk>/", _bare_view)])),
        path("admin/skipped/", _bare_view),
    ]


def test_the_walk_finds_an_undeclared_view_even_inside_an_include():
    found = list(routes(get_resolver(_UrlsWithAnUndeclaredView).url_patterns))
    assert [route for route, _ in found] == ["declared/", "nested/bare/<int:pk>/"]
    assert undeclared(found) == ["nested/bare/<int:pk>/"]


def test_requires_refuses_an_unknown_role():
    with pytest.raises(ValueError, match="unknown role 'janitor'"):
        requires("janitor")


def test_a_superuser_counts_as_administrator_and_a_user_in_no_group_has_no_role(db):
    root = User.objects.create_superuser("root-test", email="", password=None)
    nobody = User.objects.create_user("nobody-test")
    assert role_of(root) == ADMINISTRATOR and has_role(root, ADMINISTRATOR)
    assert role_of(nobody) is None and not has_role(nobody, VIEWER)


# --- the matrix --------------------------------------------------------------------------------------


@pytest.fixture
def records(site, telescope, users):
    """One registered record of each kind a URL can point at, keyed by (segment before, argument name)."""
    subsystem = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=dt.date(2025, 1, 1))
    plan = subsystem.plans.first()
    record = ServiceRecord.objects.create(
        subsystem=subsystem, plan=plan, performed_on=dt.date(2025, 6, 1), performed_by=users["technician"],
        summary="Checked the brake pads", created_by=users["technician"],
    )
    order = work_order_ad_hoc(site, [subsystem], "Brake squeals on slews", users["engineer"])
    primary = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2025, 1, 1))
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=60, material="borosilicate")
    part = Part.objects.create(site=site, name="Brake pad set", quantity_on_hand=2)
    measurement = ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=dt.date(2025, 6, 1), value=0.86,
                                                     taken_by=users["technician"])
    reading = Reading.objects.create(subsystem=subsystem, quantity="brake_release_s", unit="s", value=0.4,
                                     taken_at=timezone.now(), taken_by=users["technician"])
    return {
        ("sites", "slug"): site.slug,
        ("telescopes", "pk"): telescope.pk,
        ("subsystems", "pk"): subsystem.pk,
        ("plans", "pk"): subsystem.plans.first().pk,
        ("service", "pk"): record.pk,
        ("workorders", "pk"): order.pk,
        ("mirrors", "pk"): mirror.pk,
        ("parts", "pk"): part.pk,
        ("readings", "pk"): reading.pk,
        ("measurements", "pk"): measurement.pk,
        ("history", "label"): "registry.subsystem",
        ("record", "pk"): subsystem.pk,
        # A move the draft order cannot take, so an allowed empty POST changes nothing either.
        ("move", "action"): "countersign",
    }


def url_for(route: str, records: dict) -> str:
    def value(match: re.Match) -> str:
        segment = route[: match.start()].rstrip("/").rsplit("/", 1)[-1]
        key = (segment, match.group("name"))
        if key not in records:
            pytest.fail(f"{route}: no test record for {key}; add one to the records fixture in tests/test_roles.py")
        return str(records[key])

    return "/" + PARAMETER.sub(value, route)


def pages_of(records: dict) -> list[tuple[str, str]]:
    """(URL, declared role) for every route of the project."""
    return [(url_for(route, records), view.required_role) for route, view in project_routes()]


def sign_in(client, user) -> None:
    client.logout()
    if user is not None:
        client.force_login(user)


@pytest.fixture
def people(users):
    """Everyone the matrix signs in as: None = anonymous; 'none' = signed in but in no role group."""
    return {None: None, "none": User.objects.create_user("no-role"), **users}


def allowed(who: str | None, needed: str) -> bool:
    return needed in ROLES and who in ROLES and ROLES.index(who) >= ROLES.index(needed)


def refusal_ok(response, who: str | None, needed: str, login_url: str) -> bool:
    """Anonymous callers of a page go to the login page; API views answer 401; signed-in callers 403."""
    if needed == TOKEN_ACCESS:
        return response.status_code == 401
    if who is None:
        return response.status_code == 302 and response.get("Location", "").startswith(f"{login_url}?next=")
    return response.status_code == 403


def count_rows() -> dict[str, int]:
    return {model._meta.label: model.objects.count() for model in apps.get_models()}


def test_every_page_answers_each_role_as_its_declaration_says(client, records, people):
    login_url = resolve_url(settings.LOGIN_URL)
    pages = pages_of(records)
    wrong = []
    for who, user in people.items():
        sign_in(client, user)
        for url, needed in pages:
            response = client.get(url)
            status, target = response.status_code, response.get("Location", "")
            if allowed(who, needed):
                ok = status in (200, 405) or (status == 302 and not target.startswith(login_url))
            else:
                ok = refusal_ok(response, who, needed, login_url)
            if not ok:
                wrong.append(f"GET {url} as {who or 'anonymous'} (needs {needed}): {status} {target}")
    assert wrong == []


def test_a_post_below_the_required_role_is_refused_and_creates_nothing(client, records, people):
    login_url = resolve_url(settings.LOGIN_URL)
    pages = pages_of(records)
    wrong = []
    for who, user in people.items():
        sign_in(client, user)
        refused = [(url, needed) for url, needed in pages if not allowed(who, needed)]
        before = count_rows()
        for url, needed in refused:
            response = client.post(url, {})
            if not refusal_ok(response, who, needed, login_url):
                status, target = response.status_code, response.get("Location", "")
                wrong.append(f"POST {url} as {who or 'anonymous'} (needs {needed}): {status} {target}")
        after = count_rows()
        changed = {label: (n, after[label]) for label, n in before.items() if after[label] != n}
        if changed:
            wrong.append(f"refused POSTs as {who or 'anonymous'} changed row counts: {changed}")
    assert wrong == []


def test_an_allowed_empty_post_is_never_a_server_error(client, records, people):
    pages = pages_of(records)
    failed = []
    for who in ROLES:
        client.force_login(people[who])
        failed += [f"POST {url} as {who}: {code}" for url, needed in pages if allowed(who, needed)
                   for code in [client.post(url, {}).status_code] if code >= 500]
    assert failed == []


def test_the_refusal_page_names_the_role_that_is_needed(client, records, people):
    client.force_login(people[VIEWER])
    response = client.get(url_for("sites/<slug:slug>/nights/import/", records))
    assert response.status_code == 403
    assert b"<strong>technician</strong> role or above" in response.content
