"""The audit trail: every change attributed, before and after kept, exportable; nothing deleted."""
from __future__ import annotations

import csv
import datetime as dt
import io

import pytest
from conftest import mains_isolator

from observatory_ops.archive.history import changes
from observatory_ops.logbook.models import NightUsage
from observatory_ops.registry.services import subsystem_create


def test_a_page_edit_is_recorded_with_who_and_before_and_after(users, client, site):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    response = client.post(
        f"/admin/registry/site/{site.pk}/change/",
        {"name": "Test Hill Station", "slug": site.slug, "latitude_deg": "40", "longitude_deg": "-3",
         "elevation_m": "800", "time_zone": "Europe/Madrid", "dust_climate": "", "look_ahead_days": "30",
         "crew_weekdays": ["1", "2", "3", "4", "5"],
         "crew_days_off-TOTAL_FORMS": "0", "crew_days_off-INITIAL_FORMS": "0"},  # the days-off inline, empty
    )
    assert response.status_code == 302, response.content[:500]
    latest = changes(site)[0]
    assert latest.who == "engineer" and latest.kind == "changed"
    assert ("name", "Test Hill", "Test Hill Station") in latest.fields


def test_imported_nights_are_attributed_and_an_update_keeps_before_and_after(site, users):
    from observatory_ops.logbook.services import nights_import

    nights_import(site, b"night,open_hours\n2026-01-01,5\n", by=users["technician"])
    row = NightUsage.objects.get(site=site)
    assert [c.kind for c in changes(row)] == ["created"]
    nights_import(site, b"night,open_hours\n2026-01-01,5\n", by=users["technician"])  # unchanged: no entry
    assert len(changes(row)) == 1
    nights_import(site, b"night,open_hours\n2026-01-01,6.5\n", by=users["engineer"])
    latest = changes(row)[0]
    assert latest.kind == "changed" and latest.who == "engineer"
    assert ("open hours", "5.0", "6.5") in latest.fields


def test_work_order_moves_are_in_its_history_with_the_person_and_the_move(telescope, users):
    from observatory_ops.workorders import services

    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due(list(fans.plans.all()), users["engineer"], dt.date(2026, 6, 16))
    mains_isolator(telescope)
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    history = changes(order)
    assert [(c.who, c.reason) for c in history[:2]] == [("technician", "start"), ("engineer", "issue")]
    assert ("state", "issued", "underway") in history[0].fields


def test_a_retired_subsystem_is_kept_with_its_history(telescope, users, client):
    from observatory_ops.registry.models import Subsystem

    brake = subsystem_create(telescope, "brake", "Brake", counting_from=dt.date(2026, 1, 1))
    client.force_login(users["engineer"])
    response = client.post(f"/subsystems/{brake.pk}/retire/", {"reason": "replaced by a new caliper"})
    assert response.status_code == 302
    brake = Subsystem.objects.get(pk=brake.pk)
    assert brake.retired_on is not None
    assert changes(brake)[0].reason == "retired: replaced by a new caliper"
    response = client.post(f"/subsystems/{brake.pk}/retire/", {"reason": "again"}, follow=True)
    assert b"already retired" in response.content


def test_history_export_neutralises_spreadsheet_formulas(site, users, client):
    site.name = "=HYPERLINK(\"http://example.invalid\")"
    site.save()
    client.force_login(users["viewer"])
    response = client.get(f"/history/registry.site/record/{site.pk}/?export=csv")
    rows = list(csv.reader(io.StringIO(response.content.decode())))
    after = [r[6] for r in rows[1:] if r[4] == "name"]
    assert after == ["'=HYPERLINK(\"http://example.invalid\")"]


def test_history_page_escapes_user_text(site, users, client):
    site.dust_climate = "<script>alert(1)</script>"
    site.save()
    client.force_login(users["viewer"])
    response = client.get(f"/history/registry.site/record/{site.pk}/")
    assert response.status_code == 200
    assert b"<script>alert(1)" not in response.content and b"&lt;script&gt;" in response.content


def test_history_of_an_unaudited_kind_is_not_found(users, client):
    client.force_login(users["viewer"])
    assert client.get("/history/auth.permission/record/1/").status_code == 404
    assert client.get("/history/nonsense/record/1/").status_code == 404


@pytest.mark.parametrize("role, status", [("viewer", 404), ("technician", 404), ("engineer", 404),
                                          ("administrator", 200)])
def test_an_api_tokens_history_is_read_by_administrators_only(site, users, client, role, status):
    """Tokens are the administrator's alone in the admin; their history page (name, site, the secret's first
    characters, when created and revoked) is no different, page and CSV alike."""
    from observatory_ops.api.services import api_token_create, api_token_revoke

    token, _ = api_token_create(site, "control computer", by=users["administrator"])
    api_token_revoke(token)
    client.force_login(users[role])
    assert client.get(f"/history/api.apitoken/record/{token.pk}/").status_code == status
    assert client.get(f"/history/api.apitoken/record/{token.pk}/?export=csv").status_code == status


@pytest.mark.parametrize("path", ["/admin/logbook/servicerecord/", "/admin/logbook/reading/"])
def test_records_and_readings_cannot_be_changed_or_deleted_even_by_an_administrator(admin_client, path):
    from django.contrib import admin

    from observatory_ops.logbook.models import NightUsage, Reading, ServiceRecord

    for model in (ServiceRecord, Reading, NightUsage):  # nor added there, past the checks of the pages and API
        model_admin = admin.site._registry[model]
        assert not model_admin.has_change_permission(None) and not model_admin.has_delete_permission(None)
        assert not model_admin.has_add_permission(None)
