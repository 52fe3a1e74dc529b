"""Two records of the register named alike but for capitals or surrounding spaces are refused where the pages, the
choices and the lockout would list both as one name, and two triggers of one plan watching the same thing the same
way (a site review added "vestal ridge observatory" beside "Vestal Ridge Observatory", "azimuth drive " beside
"Azimuth drive", three plans "Grease roof rails" on one roof, one isolator twice and two dust-weighted limits on one
plan). The rule is our own, as the telescope's and the part's names already had it."""
from __future__ import annotations

import datetime as dt

import pytest
from django.core.exceptions import ValidationError

from observatory_ops.planning.models import ServicePlan
from observatory_ops.registry.models import Site, Subsystem, name_alike
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import IsolationPoint

START = dt.date(2026, 1, 1)


def test_name_alike_is_capitals_and_surrounding_spaces_aside():
    assert name_alike(" azimuth DRIVE ", ["Altitude drive", "Azimuth drive"]) == "Azimuth drive"
    assert name_alike("Azimuth drive 2", ["Azimuth drive"]) is None


def test_a_site_named_as_another_but_for_capitals_is_refused(site):
    twin = Site(name="  test hill", slug="test-hill-2", latitude_deg=40.0, longitude_deg=-3.0, elevation_m=800,
                time_zone="Europe/Madrid")
    with pytest.raises(ValidationError) as refused:
        twin.full_clean()
    assert refused.value.message_dict["name"] == [
        "Name 'test hill' is another site's, 'Test Hill' (capitals and spaces aside): the lists and choices would "
        "show the two alike. Give this site a name of its own."
    ]
    site.full_clean()  # its own name is no twin of itself


def test_a_subsystem_named_as_another_in_service_is_refused_and_a_retired_ones_name_may_be_taken(telescope):
    drive = subsystem_create(telescope, "axis1_drive", "Azimuth drive", counting_from=START)
    twin = Subsystem(telescope=telescope, kind="axis1_drive", name="azimuth drive ", hazards=drive.hazards)
    with pytest.raises(ValidationError) as refused:
        twin.full_clean()
    assert refused.value.message_dict["name"][0].startswith(
        "Name 'azimuth drive' is another subsystem's in service on this telescope, 'Azimuth drive' (capitals and "
        "spaces aside)")
    drive.retired_on = START + dt.timedelta(days=30)
    drive.save()
    twin.full_clean()  # its replacement


def test_a_part_named_as_a_part_of_another_parent_is_refused_as_the_pages_name_both_alike(telescope):
    """A diff review asked whether "Encoder" of each axis drive should pass; the pages name both "T1: Encoder", and a
    top-level "focuser" beside a mount's "Focuser" was stored so in the README's demo. Refused, suggesting the
    parent's name in the part's."""
    first = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    second = subsystem_create(telescope, "axis2_drive", "Axis 2 drive", counting_from=START)
    subsystem_create(telescope, "other", "Encoder", counting_from=START, parent=first, no_hazards_found=True)
    for parent in (second, None):
        twin = Subsystem(telescope=telescope, kind="other", name="encoder", parent=parent, no_hazards_found=True)
        with pytest.raises(ValidationError) as refused:
            twin.full_clean()
        assert "the pages and the work-order choices name both as 'T1: Encoder'. Give it a name of its own (a part " \
            "with its parent's: 'Axis 2 encoder')" in refused.value.message_dict["name"][0]


def test_an_active_plan_named_as_another_of_its_subsystem_is_refused(telescope):
    drive = subsystem_create(telescope, "axis1_drive", "Azimuth drive", counting_from=START)
    plan = drive.plans.first()
    twin = ServicePlan(subsystem=drive, name=plan.name.upper(), counting_from=START)
    with pytest.raises(ValidationError) as refused:
        twin.full_clean()
    assert refused.value.message_dict["name"] == [
        f"{plan.name!r} is already an active plan of this subsystem (capitals and spaces aside): change that plan, "
        "or give this one a name of its own."
    ]
    twin.active = False  # a plan kept, not counted, does not crowd the due list
    twin.full_clean()


def test_an_isolation_point_registered_twice_is_refused(telescope):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    with pytest.raises(ValidationError) as refused:
        IsolationPoint(telescope=telescope, energy="ac", label="mount isolator").full_clean()
    assert refused.value.message_dict["label"] == [
        "'Mount isolator' (AC mains) is already registered for this telescope: the lockout would list two points by "
        "one name. If it is the same point, edit that one; if not, name this one apart (where it is, what it feeds)."
    ]
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    with pytest.raises(ValidationError):  # the dome's order locks the telescope's too: the same name twice
        IsolationPoint(telescope=telescope, subsystem=dome, energy="ac", label="Mount isolator").full_clean()
    IsolationPoint(telescope=telescope, energy="dc", label="Mount isolator").full_clean()  # another energy


def test_a_record_stored_beside_a_twin_before_the_check_is_still_saved_by_an_edit_of_its_other_fields(telescope):
    """Refused only when the name (or what scopes it) is new or changed: records stored beside a twin before the
    check existed are edited as before, and say nothing until renamed."""
    first = subsystem_create(telescope, "axis1_drive", "Azimuth drive", counting_from=START)
    Subsystem.objects.filter(pk=first.pk).update(name="Spare")
    twin = subsystem_create(telescope, "axis1_drive", "Azimuth drive", counting_from=START)
    Subsystem.objects.filter(pk=first.pk).update(name="Azimuth drive")  # as stored before the check
    first.refresh_from_db()
    first.serial_number = "AZ-0042"
    first.full_clean()
    subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    first.name = "axis 1 BRAKE"  # renamed: the check runs
    with pytest.raises(ValidationError):
        first.full_clean()
    assert twin.pk != first.pk


def test_two_triggers_watching_the_same_thing_the_same_way_are_refused(telescope, users, client):
    """Whichever comes first makes the lower limit govern: a second dust-weighted limit on one plan is never read.
    Two readings of one quantity toward opposite sides (a band) stay allowed."""
    from observatory_ops.registry.services import subsystem_create as create

    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    fans = create(telescope, "other", "Roof rails", counting_from=START, no_hazards_found=True)
    rows = [("dust_hours", "300", "", "above"), ("dust_hours", "200", "", "above")]
    data = {
        "subsystem": fans.pk, "name": "Grease roof rails", "task": "", "steps_powered": "", "steps": "",
        "steps_restore": "", "tools": "", "parts": "", "readings": "[]", "estimated_hours": "1",
        "dust_sensitivity": "1", "basis": "", "active": "on", "counting_from": START.isoformat(),
        "triggers-TOTAL_FORMS": str(len(rows)), "triggers-INITIAL_FORMS": "0", "triggers-MIN_NUM_FORMS": "0",
        "triggers-MAX_NUM_FORMS": "1000",
    }
    for i, (metric, limit, quantity, direction) in enumerate(rows):
        data.update({f"triggers-{i}-metric": metric, f"triggers-{i}-limit": limit,
                     f"triggers-{i}-quantity": quantity, f"triggers-{i}-direction": direction})
    response = client.post("/admin/planning/serviceplan/add/", data)
    assert response.status_code == 200
    errors = " ".join(response.context["inline_admin_formsets"][0].formset.non_form_errors())
    assert errors.startswith("Two triggers watch dust-weighted") and "limits 300 and 200" in errors
    assert not ServicePlan.objects.filter(name="Grease roof rails").exists()
    data["triggers-1-metric"] = "calendar_days"
    assert client.post("/admin/planning/serviceplan/add/", data).status_code == 302
