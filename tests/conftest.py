"""Shared fixtures: users in each role, and a small registered site."""
from __future__ import annotations

import datetime as dt
import os
import shutil

import django
import pytest

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "observatory_ops.settings")
django.setup()  # test modules import models at module level; the project keeps no pytest.ini at the top

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
