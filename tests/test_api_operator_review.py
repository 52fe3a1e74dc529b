"""What an operator wiring control software to the ingest API meets (a review of the README against the product):
a CSV body sent to the JSON endpoint is told where CSV goes; a figure too large for a float is said so; a revoked
token's time is the site's; the due list page orders ties as the API and the CSV do; a whole-number setting that is
not one names its variable. Our own rules of the product (no published source).
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from django.urls import reverse

from observatory_ops.api import services as api_services
from observatory_ops.logbook.models import NightUsage

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    return recomputes_recorded


@pytest.fixture
def secret(site) -> str:
    return api_services.api_token_create(site, "east dome control computer")[1]


def _post(client, site, data, secret, content_type):
    return client.post(reverse("api-nights", args=[site.slug]), data=data, content_type=content_type,
                       HTTP_AUTHORIZATION=f"Bearer {secret}")


def test_a_csv_body_is_told_that_the_endpoint_takes_json_and_where_csv_goes(client, site, secret):
    response = _post(client, site, b"night,open_hours\n2022-03-20,5\n", secret, "text/csv")
    assert response.status_code == 400
    message = response.json()["errors"][0]["message"]
    assert message.startswith("the body is not valid JSON: ")
    assert "sent as text/csv: this endpoint takes JSON only" in message and "import_nights" in message
    assert not NightUsage.objects.exists()


def test_json_sent_as_application_json_gets_no_hint(client, site, secret):
    response = _post(client, site, b"{not json", secret, "application/json")
    assert "sent as" not in response.json()["errors"][0]["message"]


def test_a_figure_too_large_for_a_float_is_said_so(client, site, secret):
    response = _post(client, site, b'{"night": "2022-03-16", "open_hours": 1e400}', secret, "application/json")
    assert response.status_code == 400
    assert response.json()["errors"][0]["message"] == (
        "open_hours must be a finite number, not Infinity (or a number too large to hold)"
    )
    assert not NightUsage.objects.exists()


def test_revoking_a_revoked_token_gives_the_sites_time(site):
    token, _ = api_services.api_token_create(site, "east dome control computer")
    api_services.api_token_revoke(token)
    at_the_site = r"already revoked on \d{4}-\d\d-\d\d \d\d:\d\d \(at the site, Europe/Madrid\)"
    with pytest.raises(ValueError, match=at_the_site):
        api_services.api_token_revoke(token)


def test_the_due_list_status_column_breaks_ties_as_the_api_does():
    from observatory_ops.planning.tables import DueTable

    assert DueTable.base_columns["status"].order_by == (
        "urgency", "forecast_date", "plan__subsystem__telescope__name", "plan_id"
    )


@pytest.mark.parametrize("variable", ["EMAIL_PORT", "CELERY_VISIBILITY_TIMEOUT", "SECURE_HSTS_SECONDS"])
def test_a_whole_number_setting_that_is_not_one_names_its_variable(variable, tmp_path):
    env = {**os.environ, variable: "1y", "DEBUG": "0", "SECRET_KEY": "k" * 50, "OBSOPS_DATA_DIR": str(tmp_path),
           "DJANGO_SETTINGS_MODULE": "observatory_ops.settings"}
    run = subprocess.run([sys.executable, "-c", "import django; django.setup()"], cwd=ROOT, env=env,
                         capture_output=True, text=True, timeout=120, check=False)
    assert run.returncode != 0
    assert f"{variable} must be a whole number" in run.stderr and "'1y'" in run.stderr
