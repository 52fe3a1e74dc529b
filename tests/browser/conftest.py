"""Fixtures for end-to-end tests in a real browser: Debian chromium driven by Playwright's sync API.

The pages are served by pytest-django's ``live_server`` (127.0.0.1 only, transactional test database).
Mark each browser test with ``@pytest.mark.browser``. Without /usr/bin/chromium the tests skip with the
reason; under CI=true a missing browser fails them (see ``require_tool`` in tests/conftest.py).
"""
from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass

import pytest
from conftest import require_tool
from django.db import connections
from django.urls import reverse

CHROMIUM = "/usr/bin/chromium"
# Playwright's own browser download does not work here; these flags keep Debian's chromium quiet and offline.
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-quic",
]
#: How long a browser action or assertion waits before failing (ms). Generous: CI machines have 2 cores.
TIMEOUT_MS = 15_000


@pytest.fixture
def browser_page(monkeypatch):
    """A fresh page in a fresh browser context; fails the test on any 5xx response, uncaught page error or anything
    the Content-Security-Policy refused."""
    executable = require_tool(CHROMIUM, "Chromium (Debian package chromium)")
    # Playwright's sync API keeps an event loop running in this thread, and Django then refuses ORM calls
    # made here (SynchronousOnlyOperation). The test thread never shares a connection with async code, so
    # the check is lifted while the browser runs, and only then.
    monkeypatch.setenv("DJANGO_ALLOW_ASYNC_UNSAFE", "true")
    from playwright.sync_api import sync_playwright

    problems: list[str] = []

    def note_server_error(response) -> None:
        if response.status >= 500:
            problems.append(f"HTTP {response.status} from {response.url}")

    def note_policy_refusal(message) -> None:  # observatory_ops/content_policy.py: nothing the pages need is refused
        if message.type == "error" and "Content Security Policy" in message.text:
            problems.append(f"refused by the page's policy: {message.text}")

    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=executable, args=CHROMIUM_ARGS)
        context = browser.new_context(viewport={"width": 1280, "height": 900})
        context.set_default_timeout(TIMEOUT_MS)
        page = context.new_page()
        page.on("pageerror", lambda error: problems.append(f"page error: {error}"))
        page.on("response", note_server_error)
        page.on("console", note_policy_refusal)
        try:
            yield page
        finally:
            context.close()
            browser.close()
            # Inside sync_playwright the test's queries open a connection of their own (another event-loop
            # context); close it, or PostgreSQL refuses to drop the test database at the end.
            connections.close_all()
    if problems:
        pytest.fail("the browser saw server or page errors:\n" + "\n".join(problems))


def _login(page, live_server, username: str, password: str) -> None:
    """Sign in through the login page and wait until it has let the user in."""
    from playwright.sync_api import expect

    login_url = live_server.url + reverse("login")
    page.goto(login_url)
    page.get_by_label("User name").fill(username)
    page.get_by_label("Password").fill(password)
    page.get_by_role("button", name="Sign in").click()
    expect(page, f"login as {username!r} was refused").not_to_have_url(re.compile("^" + re.escape(login_url)))


@pytest.fixture
def login():
    """``login(page, live_server, username, password)``: sign in through the login form."""
    return _login


@dataclass(frozen=True)
class Demo:
    site: object
    passwords: dict[str, str]  # username -> password
    usernames: dict[str, str]  # role -> username


@pytest.fixture
def demo(transactional_db) -> Demo:
    """The demo observatory of fixtures_demo (about three years of nights; a few seconds) and its logins."""
    from django.contrib.auth.models import Group

    from fixtures_demo import generator
    from observatory_ops.access.roles import ROLES

    # The role groups come from a data migration, and a transactional test before this one may have flushed
    # them away with everything else.
    for role in ROLES:
        Group.objects.get_or_create(name=role)
    logins = generator.demo_users()
    site, _ = generator.build()
    return Demo(
        site=site,
        passwords={username: password for username, _, password in logins},
        usernames={role: username for username, role, _ in logins},
    )


@pytest.fixture
def underway(transactional_db, users, telescope):
    """A fan-filter order underway at a telescope with one isolation point: the checklist the tablet tests tick."""
    from observatory_ops.registry.services import subsystem_create
    from observatory_ops.workorders import services
    from observatory_ops.workorders.models import IsolationPoint

    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due([fans.plans.get(name="Replace fan filters")], users["engineer"],
                                         planned_date=dt.date(2026, 6, 15))
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    order.refresh_from_db()
    return order
