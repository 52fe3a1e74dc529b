"""Any quantity can be logged on any subsystem, but a reading that no service plan of the subsystem watches moves
no forecast: the reading form keeps it and says so after saving, so a wrong pick is noticed."""
from __future__ import annotations

import pytest
from conftest import site_in_use
from django.contrib.messages import constants, get_messages
from django.utils import timezone

from observatory_ops.logbook.models import Reading
from observatory_ops.mirrors.models import Mirror
from observatory_ops.planning import selectors
from observatory_ops.planning.models import ServicePlan
from observatory_ops.registry.models import Subsystem


@pytest.fixture
def site(db):
    """An invented site with a catalogue RA drive (its plan watches the settle time and asks for the following
    error and the motor current on its work orders) and a primary mirror with its optical facts."""
    site = site_in_use("readings-watch", kinds=("axis1_drive", "primary_mirror"))
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    return site


def _subsystem(site, kind: str) -> Subsystem:
    return Subsystem.objects.get(telescope__site=site, kind=kind)


def _log(client, subsystem, quantity: str, value: str):
    response = client.post(f"/subsystems/{subsystem.pk}/readings/new/", {
        "quantity": quantity, "value": value, "taken_at": timezone.localtime().strftime("%Y-%m-%dT%H:%M"),
    })
    assert response.status_code == 302, response.content.decode()[:2000]
    return [(m.level, str(m)) for m in get_messages(response.wsgi_request)]


def test_a_reading_no_plan_watches_is_stored_and_said_to_move_no_forecast(site, users, client):
    drive = _subsystem(site, "axis1_drive")
    client.force_login(users["technician"])
    assert _log(client, drive, "temperature_c", "12.5") == [
        (constants.SUCCESS, "Reading logged."),
        (constants.WARNING, "No condition trigger of Axis1 drive's service plans watches temperature: this reading "
                            "is stored with its history, but it moves no forecast."),
    ]
    assert Reading.objects.get(subsystem=drive).quantity == "temperature_c"


def test_a_quantity_only_asked_for_on_work_orders_moves_no_forecast_either(site, users, client):
    drive = _subsystem(site, "axis1_drive")
    client.force_login(users["technician"])
    # The catalogue plan asks for the following error on its work orders but has no condition trigger on it.
    assert _log(client, drive, "following_error_arcsec", "0.4")[-1] == (
        constants.WARNING, "No condition trigger of Axis1 drive's service plans watches RMS following error: this "
                           "reading is stored with its history, but it moves no forecast."
    )


@pytest.mark.parametrize(("kind", "quantity", "value", "saved"), [
    ("axis1_drive", "settle_time_s", "0.6", "Reading logged."),  # the catalogue plan's condition trigger
    ("primary_mirror", "reflectance", "0.88",  # the mirror's decline fit, behind its recoat line
     "Reading logged; it is also among the mirror page's measurements, in its decline fit."),
])
def test_a_watched_reading_gets_no_note(site, users, client, kind, quantity, value, saved):
    client.force_login(users["technician"])
    assert _log(client, _subsystem(site, kind), quantity, value) == [(constants.SUCCESS, saved)]


def test_a_trigger_of_an_inactive_plan_watches_nothing(site, users, client):
    drive = _subsystem(site, "axis1_drive")
    ServicePlan.objects.filter(subsystem=drive).update(active=False)
    assert "settle_time_s" not in selectors.forecast_quantities(drive)
    client.force_login(users["technician"])
    assert _log(client, drive, "settle_time_s", "0.6")[-1] == (
        constants.WARNING, "No condition trigger of Axis1 drive's service plans watches settle time after a slew: "
                           "this reading is stored with its history, but it moves no forecast."
    )


def test_the_form_still_offers_the_watched_and_asked_quantities_first(site, users, client):
    drive = _subsystem(site, "axis1_drive")
    assert selectors.forecast_quantities(drive) == {"settle_time_s"}
    assert selectors.watched_quantities(drive) == {"settle_time_s", "following_error_arcsec", "motor_current_a"}
    client.force_login(users["technician"])
    page = client.get(f"/subsystems/{drive.pk}/readings/new/").content.decode()
    ours, others = page.split('<optgroup label="For this subsystem">')[1].split('<optgroup label="Other quantities">')
    assert all(code in ours for code in ("settle_time_s", "following_error_arcsec", "motor_current_a"))
    assert "temperature_c" in others and "temperature_c" not in ours
