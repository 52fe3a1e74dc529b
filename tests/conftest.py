"""Shared fixtures: users in each role, and a small registered site."""
from __future__ import annotations

import datetime as dt
import os
import shutil

import django
import pytest
from django.conf import settings

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "observatory_ops.settings")
django.setup()  # test modules import models at module level; the project keeps no pytest.ini at the top
settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]  # fast test users only

ROLES = ("viewer", "technician", "engineer", "administrator")


def pytest_configure(config):
    config.addinivalue_line("markers", "browser: end-to-end test in a real browser (Debian chromium)")
    # Planning years ahead runs past astropy's bundled Earth-orientation table on purpose
    # (see observatory_ops/calc/astropy_offline.py); pytest resets warning filters, so repeat them here.
    config.addinivalue_line("filterwarnings", "ignore:.*polar motions for times after IERS data is valid.*")
    config.addinivalue_line("filterwarnings", "ignore:.*dubious year.*")


def require_tool(path_or_name: str, what: str) -> str:
    """Skip (or under CI=true, fail) when an outside program the test needs is missing."""
    found = shutil.which(path_or_name)
    if found:
        return found
    message = f"{what} is not installed ({path_or_name}); .ci/run installs it"
    if os.environ.get("CI") == "true":
        pytest.fail(message)
    pytest.skip(message)


def require_server(url: str | None, variable: str, what: str) -> str:
    """Skip (or under CI=true, fail) when a server the test needs is not configured or not answering.

    ``url`` is the value of the environment variable ``variable`` (e.g. ``redis://127.0.0.1:6379/0``);
    the server counts as answering when its TCP port accepts a connection.
    """
    import socket
    from urllib.parse import urlsplit

    if not url:
        message = f"{what} is not configured ({variable} is not set); .ci/run starts one on loopback"
    else:
        parts = urlsplit(url)
        try:
            socket.create_connection((parts.hostname, parts.port), timeout=3).close()
            return url
        except OSError as exc:
            message = f"{what} at {parts.hostname}:{parts.port} ({variable}) does not answer: {exc}"
    if os.environ.get("CI") == "true":
        pytest.fail(message)
    pytest.skip(message)


@pytest.fixture
def users(db):
    from django.contrib.auth.models import Group, User

    made = {}
    for role in ROLES:
        user = User.objects.create_user(role, password=f"pw-{role}-123456")
        # get_or_create: a transactional test (live server, demo) may have flushed the migration's groups
        user.groups.add(Group.objects.get_or_create(name=role)[0])
        made[role] = user
    return made


@pytest.fixture
def recomputes_recorded(monkeypatch) -> list[int]:
    """Record the recomputes that storing nights asks for (the site's id each time) instead of running them."""
    from observatory_ops.logbook import services

    calls: list[int] = []
    monkeypatch.setattr(services, "site_recompute", lambda site, **_options: calls.append(site.pk))
    return calls


@pytest.fixture
def site(db):
    from observatory_ops.registry.models import Site

    return Site.objects.create(
        name="Test Hill", slug="test-hill", latitude_deg=40.0, longitude_deg=-3.0, elevation_m=800,
        time_zone="Europe/Madrid",
    )


@pytest.fixture
def telescope(site):
    from observatory_ops.registry.models import Telescope

    return Telescope.objects.create(site=site, name="T1", aperture_m=0.5, mount="fork")


@pytest.fixture
def today():
    return dt.date(2026, 6, 15)


def site_in_use(slug: str, kinds=("primary_mirror", "cooling_fans", "limits", "enclosure"), nights: int = 60):
    """An invented site (UTC zone) in use for a while: catalogue plans counted from 100 days ago, ``nights``
    logged nights up to yesterday, and a constant sky (10 dark hours a night) cached from a year back to
    past the forecast horizon, so recomputing it never waits for astropy; its telescope's mains isolation point
    registered (``mains_isolator``). Dates follow the real clock, because tasks use each site's own "today"."""
    from observatory_ops.logbook.models import NightUsage
    from observatory_ops.planning.services import HORIZON_DAYS, site_today
    from observatory_ops.registry.models import Site, Telescope
    from observatory_ops.registry.services import subsystem_create

    site = Site.objects.create(name=f"Site {slug}", slug=slug, latitude_deg=31.5, longitude_deg=-110.2,
                               elevation_m=1500, time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="T1", aperture_m=0.6, mount="fork")
    mains_isolator(telescope)
    today = site_today(site)
    for kind in kinds:
        subsystem_create(telescope, kind, kind.replace("_", " ").capitalize(), counting_from=today - dt.timedelta(100))
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=6, slews=40, axis1_travel_deg=900,
                   brake_cycles=40, pm10_ugm3=35)
        for i in range(1, nights + 1)
    )
    constant_sky(site, today - dt.timedelta(days=366), today + dt.timedelta(days=HORIZON_DAYS + 1))
    return site


def constant_sky(site, first: dt.date, last: dt.date) -> None:
    """Cache a constant sky for ``site`` from ``first`` to ``last`` inclusive (10 dark hours a night, 5 of them
    moonless), so a recompute never waits for astropy."""
    from observatory_ops.planning.models import NightSky

    NightSky.objects.bulk_create(
        NightSky(site=site, night=first + dt.timedelta(days=i), dark_hours=10.0, moon_illumination=0.5,
                 moonless_dark_hours=5.0)
        for i in range((last - first).days + 1)
    )


def _in_admin(users, client, role: str):
    users[role].is_staff = True  # the admin needs staff status; the role group gives the permissions
    users[role].save()
    client.force_login(users[role])
    return client


@pytest.fixture
def engineer_in_admin(users, client):
    """The test client signed in as the engineer with staff status, as an engineer who edits the register in the admin
    is (README, Users)."""
    return _in_admin(users, client, "engineer")


@pytest.fixture
def administrator_in_admin(users, client):
    """The test client signed in as the administrator with staff status: deleting records, people and API tokens is
    theirs, not the engineer's."""
    return _in_admin(users, client, "administrator")


def parts_as_planned(order) -> dict[int, float]:
    """``parts_used`` for ``services.work_order_finish`` saying every planned part was used as planned: the service
    takes no default (the finish form asks each count), so a test finishing an order with parts says so."""
    return {use.pk: use.quantity_planned for use in order.part_uses.all()}


def mains_isolator(telescope, subsystem=None):
    """The telescope's AC isolation point, or ``subsystem``'s own (a dome on a supply of its own): work whose hazards
    call for isolating electricity is neither issued nor started while none is registered
    (workorders.selectors.moves_held)."""
    from observatory_ops.workorders.models import IsolationPoint

    label = f"{subsystem.name} breaker" if subsystem else "Mount isolator"
    return IsolationPoint.objects.get_or_create(telescope=telescope, subsystem=subsystem, energy="ac", label=label)[0]


def new_coating_logged(order, by) -> None:
    """Log its mirror's new coating, on the site's today, for a recoat's strip-and-coat order (it is finished only once
    one is logged: workorders.selectors.coating_unlogged); nothing for any other order."""
    if order.recoat_phase != "coating":
        return
    from observatory_ops.mirrors.services import coating_log
    from observatory_ops.planning.services import site_today
    from observatory_ops.workorders.selectors import lift_mirror

    coating_log(lift_mirror(order), by, site_today(order.site), "al", [{"material": "SiO2", "thickness_nm": 100}])


def ticked_in_sequence(order, by, through: int | None = None) -> None:
    """Tick an order underway as its crew works it: the steps under power before its lockout, then its isolation
    points as the locks go on, then the lockout and the steps after it up to step index ``through`` (the last step by
    default). Lines already ticked stay; an order without a lockout ticks its points first, then its steps. A step
    under power ticked once a lock is on is refused (workorders.services._lockout_sequence_refusal)."""
    from observatory_ops.workorders import selectors, services

    lines = selectors.checklist(order)
    found = services.isolated_steps(order.step_list)
    lockout = found[0] if found is not None else 0
    last = len(order.step_list) - 1 if through is None else through
    steps = [step for step in lines.steps if step.key <= last and not step.ticked]
    for step in (s for s in steps if s.key < lockout):
        services.checklist_tick_set(order, "step", step.key, True, by)
    for point in (p for p in lines.points if not p.ticked):
        services.checklist_tick_set(order, "point", point.key, True, by)
    for step in (s for s in steps if s.key >= lockout):
        services.checklist_tick_set(order, "step", step.key, True, by)
