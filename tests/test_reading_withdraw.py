"""A reading logged in error is withdrawn, not deleted.

A reviewer logged a settle time of 30 s (a slip) and then could never take it back: it decided the plan ("past the
limit since the reading of ...") and bent its trend. A technician withdraws it with a reason: it stays listed, struck
through with who withdrew it and why, no plan's trend counts it, and the site is recomputed at once. A reflectance
filed among a mirror's measurements is refused here: the mirror's fit reads it, and it is corrected on the mirror's
record.
"""
from __future__ import annotations

import datetime as dt

import pytest
from django.core.exceptions import ValidationError

from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage, Reading
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


@pytest.fixture
def drive(telescope):
    return subsystem_create(telescope, "axis1_drive", "Axis 1 drive",
                            counting_from=site_today(telescope.site) - dt.timedelta(days=60))


def _taken(drive, days_ago: int) -> dt.datetime:
    day = site_today(drive.telescope.site) - dt.timedelta(days=days_ago)
    return dt.datetime.combine(day, dt.time(22, 30), tzinfo=drive.telescope.site.zone)


def _settle_status(drive) -> PlanStatus:
    return PlanStatus.objects.get(plan__subsystem=drive, plan__triggers__quantity="settle_time_s")


def test_a_wrong_reading_withdrawn_stays_listed_and_no_longer_decides_the_plan(drive, users, client):
    for days_ago, value in ((20, 0.60), (10, 0.62)):
        services.reading_log(drive, "settle_time_s", value, _taken(drive, days_ago), users["technician"])
    slip = services.reading_log(drive, "settle_time_s", 30.0, _taken(drive, 2), users["technician"])
    assert _settle_status(drive).status == "overdue"

    client.force_login(users["technician"])
    page = client.get(drive.get_absolute_url()).content.decode()
    assert f'href="/readings/{slip.pk}/withdraw/"' in page
    response = client.post(f"/readings/{slip.pk}/withdraw/", {"reason": "typed in the wrong field"}, follow=True)
    assert "Reading withdrawn" in response.content.decode()
    slip.refresh_from_db()
    assert (slip.withdrawn_by, slip.withdrawn_reason) == (users["technician"], "typed in the wrong field")
    assert _settle_status(drive).status != "overdue"  # recomputed without it
    page = client.get(drive.get_absolute_url()).content.decode()
    assert "<s>30 s</s>" in page and "typed in the wrong field" in page
    assert Reading.objects.filter(subsystem=drive).count() == 3  # nothing deleted


def test_a_withdrawal_needs_a_reason_and_happens_once(drive, users, client):
    reading = services.reading_log(drive, "settle_time_s", 0.6, _taken(drive, 3), users["technician"])
    client.force_login(users["technician"])
    page = client.post(f"/readings/{reading.pk}/withdraw/", {"reason": "  "})
    assert page.status_code == 200 and Reading.objects.get(pk=reading.pk).withdrawn_at is None
    services.reading_withdraw(reading, users["technician"], "wrong subsystem")
    with pytest.raises(ValidationError, match="already withdrawn"):
        services.reading_withdraw(reading, users["engineer"], "again")
    # Its withdraw page says so, and offers no form to withdraw it again.
    page = client.get(f"/readings/{reading.pk}/withdraw/").content.decode()
    assert "Already withdrawn" in page and "wrong subsystem" in page and "Withdraw the reading</button>" not in page
    client.force_login(users["viewer"])
    assert client.post(f"/readings/{reading.pk}/withdraw/", {"reason": "x"}).status_code in (302, 403)


def test_a_reflectance_filed_on_a_mirror_is_withdrawn_with_its_measurement(telescope, users, client):
    """A reflectance reading is also one of the mirror's measurements: withdrawn on either page, both are marked, and
    the mirror's decline fit leaves it out (a 0.58 typed for 0.85 would otherwise bend the recoat forecast)."""
    from observatory_ops.mirrors.models import CoatingEvent, Mirror, ReflectanceMeasurement
    from observatory_ops.mirrors.services import measurement_log, measurement_withdraw, mirror_forecast

    primary = subsystem_create(telescope, "primary_mirror", "Primary",
                               counting_from=site_today(telescope.site) - dt.timedelta(days=60))
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    today = site_today(telescope.site)
    CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=60), metal="al")
    NightUsage.objects.bulk_create(NightUsage(site=telescope.site, night=today - dt.timedelta(days=d), open_hours=5,
                                              pm10_ugm3=30) for d in range(1, 61))
    for days_ago, value in ((50, 0.89), (40, 0.888), (30, 0.885)):
        measurement_log(mirror, users["technician"], today - dt.timedelta(days=days_ago), value)
    taken = dt.datetime.combine(today - dt.timedelta(days=1), dt.time(12), tzinfo=telescope.site.zone)
    slip = services.reading_log(primary, "reflectance", 0.58, taken, users["technician"])
    assert mirror_forecast(Mirror.objects.get(pk=mirror.pk)).fit.n_points == 4

    client.force_login(users["technician"])
    filed = ReflectanceMeasurement.objects.get(reading=slip)
    page = client.get(mirror.get_absolute_url()).content.decode()  # it showed a 500: the fit's R0 came out above 1
    assert f'href="/measurements/{filed.pk}/withdraw/"' in page
    assert "is no reflectance, so check the measurements" in page
    assert "already below the line" in page and "withdraw it below" in page  # not "crosses about today"
    assert "below the line now" in page and "crosses about" not in page  # the chart's marker at now, too
    response = client.post(f"/measurements/{filed.pk}/withdraw/", {"reason": "0.58 typed for 0.85"}, follow=True)
    assert "the logbook reading it came from is withdrawn with it" in response.content.decode()
    filed.refresh_from_db()
    slip.refresh_from_db()
    assert filed.withdrawn_reason == slip.withdrawn_reason == "0.58 typed for 0.85"
    assert mirror_forecast(Mirror.objects.get(pk=mirror.pk)).fit.n_points == 3  # left out of the fit
    assert "not fitted" in client.get(mirror.get_absolute_url()).content.decode()

    typed = measurement_log(mirror, users["technician"], today, 0.5)  # entered on the mirror page, no reading
    measurement_withdraw(typed, users["engineer"], "wrong mirror")
    with pytest.raises(ValidationError, match="already withdrawn"):
        measurement_withdraw(ReflectanceMeasurement.objects.get(pk=typed.pk), users["engineer"], "again")
