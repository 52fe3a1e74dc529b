"""Specifications for what README.md tells a newcomer: the demo logins, the demo's port, how to get from the
quick start's serving command to the tests, and API examples whose documented answers are what the demo gives.

The README is read as written; each API example is sent to a freshly loaded demo exactly as its curl line sends it.
"""
from __future__ import annotations

import json
import re
from io import StringIO
from pathlib import Path

import pytest
from django.core.management import call_command

from fixtures_demo.generator import DEMO_USERS, SITE_SLUG
from observatory_ops.api import services as api_services
from observatory_ops.registry.models import Site

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


def test_the_readme_lists_every_demo_login_the_demo_prints():
    for username, role, _name, password in DEMO_USERS:
        assert f"| {role} | `{username}` | `{password}` |" in README, username


def test_the_quick_start_says_to_stop_the_server_before_the_tests_and_keeps_its_two_commands():
    quick_start = README.split("## Quick start")[1].split("## A short tour")[0]
    commands, after = quick_start.split("```")[1:3]
    assert commands.strip().splitlines() == [
        "pip install -r requirements.txt && python manage.py demo",
        "pip install -r requirements-dev.txt && pytest",
    ]
    assert "stop it with Ctrl+C (or open a second terminal) before running the second" in after


def test_the_readme_names_the_demos_port_option_and_the_command_takes_it():
    assert "python manage.py demo --port 8001" in README
    assert "`python manage.py demo [--no-serve] [--port PORT]`" in README
    from observatory_ops.registry.management.commands.demo import Command

    assert Command().create_parser("manage.py", "demo").parse_args(["--port", "8001"]).port == "8001"


@pytest.mark.django_db
def test_the_api_examples_posted_to_a_fresh_demo_get_the_answers_the_readme_shows(client):
    """In order: the site's night, two telescopes' nights, and a telescope the site does not have."""
    examples = README.split("curl -X POST http://127.0.0.1:8000/api/v1/sites/vestal-ridge/nights")[1:]
    bodies = [re.search(r"-d '(.*?)'\n", example, re.DOTALL).group(1) for example in examples]
    answers = [example.split("'\n", 1)[1].split("\n")[0] for example in examples]
    assert [json.loads(answer).get("created") for answer in answers] == [1, 2, None]
    call_command("demo", "--no-serve", stdout=StringIO())
    secret = api_services.api_token_create(Site.objects.get(slug=SITE_SLUG), "east dome control computer")[1]
    for body, answer in zip(bodies, answers, strict=True):
        response = client.post(f"/api/v1/sites/{SITE_SLUG}/nights", data=body, content_type="application/json",
                               HTTP_AUTHORIZATION=f"Bearer {secret}")
        assert response.json() == json.loads(answer)
