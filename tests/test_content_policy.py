"""The Content-Security-Policy (observatory_ops/content_policy.py; W3C Content Security Policy Level 3, whose
``script-src 'self'`` runs no inline script or event-handler attribute): every HTML answer carries it, and no page
the tool serves, its own or the admin's, depends on an inline script it would refuse. The browser tests
(tests/browser/conftest.py) fail on any refusal the browser reports."""
from __future__ import annotations

import datetime as dt
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest

from observatory_ops.content_policy import POLICY

TEMPLATES = Path(__file__).resolve().parent.parent / "observatory_ops"


class _Scripts(HTMLParser):
    """The scripts a page would run inline: a <script> with no ``src`` (data blocks excepted), an ``on...``
    attribute, a ``javascript:`` address."""

    def __init__(self):
        super().__init__()
        self.inline: list[str] = []

    def handle_starttag(self, tag, attrs):
        named = dict(attrs)
        if tag == "script" and "src" not in named and named.get("type") != "application/json":
            self.inline.append(f"<script {named}>")
        self.inline += [f"<{tag} {k}=...>" for k, v in attrs if k.startswith("on")]
        self.inline += [f"<{tag} {k}={v}>" for k, v in attrs if (v or "").strip().lower().startswith("javascript:")]


def _inline(html: str) -> list[str]:
    found = _Scripts()
    found.feed(html)
    return found.inline


def test_no_template_of_the_tool_holds_an_inline_script():
    bad = {str(p.relative_to(TEMPLATES)): found for p in TEMPLATES.rglob("*.html")
           if (found := _inline(re.sub(r"{[%{#].*?[%}#]}", "", p.read_text(), flags=re.S)))}
    assert bad == {}


@pytest.mark.parametrize("role", ["engineer", "technician", "viewer"])
def test_every_page_carries_the_policy_and_runs_no_inline_script(role, users, client, site, telescope):
    from observatory_ops.registry.services import subsystem_create

    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    client.force_login(users[role])
    for url in ("/", site.get_absolute_url(), "/due/", f"/subsystems/{fans.pk}/", f"/sites/{site.slug}/reliability/",
                f"/sites/{site.slug}/nights/"):
        answer = client.get(url, follow=True)
        assert answer.status_code == 200, url
        assert answer["Content-Security-Policy"] == POLICY, url
        assert _inline(answer.content.decode()) == [], url
    assert "script-src 'self'" in POLICY and "unsafe" not in POLICY.split("script-src")[1].split(";")[0]


def test_the_admin_pages_run_no_inline_script(engineer_in_admin, site):
    for url in ("/admin/", "/admin/registry/site/", f"/admin/registry/site/{site.pk}/change/",
                "/admin/registry/telescope/add/"):
        answer = engineer_in_admin.get(url)
        assert answer.status_code == 200, url
        assert answer["Content-Security-Policy"] == POLICY, url
        assert _inline(answer.content.decode()) == [], url


def test_a_pdf_or_csv_answer_carries_no_page_policy(users, client, site):
    client.force_login(users["engineer"])
    answer = client.get(f"/sites/{site.slug}/service-records.csv")
    assert answer.status_code == 200 and not answer["Content-Type"].startswith("text/html")
    assert "Content-Security-Policy" not in answer
