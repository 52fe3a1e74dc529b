"""Fixes from a review: the reinstall's balance check, the coating phase's hazards, hazards ticked in the
admin, a dome's isolation point on orders where it can move, the note on merged steps, and dates as people
read them ("23 Mar 2027").

Sources named beside each check. Lockout and release from lockout: OSHA 29 CFR 1910.147 (c)(4)(ii), (d)(3)
and (e). That a telescope's brakes are applied by springs and released by air (so they hold when vented),
that a dome has a supply of its own, and how an axis's balance is checked are common practice, no published
source.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import io
import re
from types import SimpleNamespace

import pytest
from django.contrib.messages import get_messages
from pypdf import PdfReader

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.planning.services import _calendar_state
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import pdf, selectors, services
from observatory_ops.workorders.cautions import HAZARDS
from observatory_ops.workorders.models import ChecklistTick, IsolationPoint, State

START = dt.date(2026, 1, 1)
URL = "https://ops.vestal-ridge.example/workorders/1/"


def _pdf_text(document: bytes) -> str:
    return " ".join(" ".join(page.extract_text().split()) for page in PdfReader(io.BytesIO(document)).pages)


def _first(steps: list[str], *words: str) -> int:
    """Index of the first step holding all the words (case-insensitive)."""
    return next(i for i, s in enumerate(steps) if all(w.lower() in s.lower() for w in words))


# --- 1 and 2: the recoat orders ----------------------------------------------------------------------------


@pytest.fixture
def recoat(telescope, users):
    """The four recoat orders of a 500 mm primary, registered as the catalogue registers one (its hazards), on a
    telescope whose axes have air-operated brakes (the balance check is worded for the brakes registered: see
    tests/test_recoat_phases.py for the others)."""
    for axis in (1, 2):
        subsystem_create(telescope, "brake", f"Axis {axis} brake", counting_from=START)
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    plan = mirror_services.recoat_plan_create(
        mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 3.5, users["engineer"]
    )
    removal, coating, reinstall, realignment = plan.work_orders.order_by("planned_date")
    return {"removal": removal, "coating": coating, "reinstall": reinstall, "realignment": realignment}


def test_the_balance_check_releases_one_brake_at_a_time_under_the_procedure_not_a_braked_axis(recoat):
    """Spring-applied, air-released brakes hold an axis with the air vented whatever its balance, so an axis
    that stays put while pinned or braked shows nothing (common practice, no published source; the project's
    pneumatic caution: "When air returns the brakes release"). The check releases one axis's brake at a time
    as the site's balancing procedure and the mount maker's instructions say, drives disabled, everyone clear
    of the swept volume, the axis restrained and its pin in until ready."""
    steps = selectors.sheet(recoat["reinstall"], URL).steps
    restored = _first(steps, "restore the axis balance", "drives still locked out")
    check = _first(steps, "check the balance one axis at a time")
    text = steps[check]
    for words in (
        "site's balancing procedure and the mount maker's instructions",
        "applied by springs and released by air",
        "never take a pinned or braked axis as balanced",
        "drives locked out and disabled",
        "everyone outside the swept volume",
        "held or restrained",
        "with its pin in",
        "release that axis's brake only as the procedure says",
        "draw the pin only when ready",
        "pin it and apply its brake again",
    ):
        assert words in text, words
    # The check the reviewer found would pass whatever the balance: a braked axis "does not turn" is gone.
    assert not any("draw its pin, and check that it does not turn" in s for s in steps)
    # Three groups kept: powered check, lockout, the locked-out work (balance restored, then checked), release.
    lockout = steps.index(services.LOCKOUT_STEP)
    released = _first(steps, "only when both axes are balanced", "remove the pins, the locks")
    assert 0 < lockout < _first(steps, "into the cell") < restored < check < released
    assert "as the removal left it" in steps[0]


def test_the_coating_phase_carries_its_own_hazards_and_the_others_the_mirrors_too(recoat):
    """Stripping and coating are done at a coating plant with the mirror out of the telescope: that order
    takes the phase's own hazards; the phases at the telescope add the mirror's (common practice, no
    published source)."""
    primary = recoat["coating"].items.get().subsystem
    assert primary.hazards == ["optical_surface", "moving_machinery"]  # the catalogue's, see below
    coating = recoat["coating"]
    own = mirror_services._PHASE_WORK["coating"].hazards
    assert coating.hazards == [h for h in HAZARDS if h in own]
    assert "moving_machinery" not in coating.hazards
    assert services.LOCKOUT_STEP not in coating.step_list  # nothing of the telescope to isolate at the plant
    for phase in ("removal", "reinstall", "realignment"):
        assert set(primary.hazards) <= set(recoat[phase].hazards), phase
    assert "optical_surface" in recoat["realignment"].hazards  # the mirror's, not the realignment phase's own
    assert "optical_surface" not in mirror_services._PHASE_WORK["realignment"].hazards


def test_the_realignment_cautions_every_energy_its_lockout_isolates_as_the_removal_does(recoat):
    """A reviewer found the realignment order isolating the mains and the brakes' air (its drives are locked out
    while the cell is adjusted) without the electrical and stored-pneumatic cautions the removal and reinstall carry
    (OSHA 29 CFR 1910.147(d)(5): stored energy; the telescope here has air-operated brakes)."""
    from observatory_ops.workorders.cautions import needs_isolation

    realignment = recoat["realignment"]
    assert needs_isolation(realignment.hazards) and services.LOCKOUT_STEP in realignment.step_list
    for energy in ("electrical", "pneumatic"):
        assert energy in realignment.hazards and energy in recoat["removal"].hazards, energy


def test_mirrors_in_a_telescope_carry_the_moving_telescope_hazard_of_their_kind(site, telescope, users):
    """A mirror is worked on in a telescope that can move (OSHA 29 CFR 1910.147: lock out the drives), so an
    ad hoc order on the primary or the secondary gets the caution and a lockout step."""
    assert "moving_machinery" in KINDS["primary_mirror"].hazards
    assert "moving_machinery" in KINDS["secondary_mirror"].hazards
    secondary = subsystem_create(telescope, "secondary_mirror", "Secondary", counting_from=START)
    order = services.work_order_ad_hoc(site, [secondary], "Look at a mark on the secondary", users["engineer"],
                                       steps="Inspect the mark; photograph it.")
    assert "moving_machinery" in order.hazards and services.LOCKOUT_STEP in order.step_list


# --- 3: hazards ticked in the admin ------------------------------------------------------------------------


@pytest.fixture
def engineer(users, client, telescope):
    from observatory_ops.planning.models import NightSky
    from observatory_ops.planning.services import HORIZON_DAYS, site_today

    today = site_today(telescope.site)  # a constant cached sky, so recomputes never wait for astropy
    NightSky.objects.bulk_create(
        NightSky(site=telescope.site, night=today + dt.timedelta(days=i), dark_hours=10.0, moon_illumination=0.5,
                 moonless_dark_hours=5.0)
        for i in range(-10, HORIZON_DAYS + 2)
    )
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    return users["engineer"]


def _messages(response) -> list[tuple[str, str]]:
    return [(m.level_tag, m.message) for m in get_messages(response.wsgi_request)]


def test_hazards_ticked_when_adding_a_subsystem_are_added_to_its_kinds(engineer, client, telescope):
    """The reviewer's case: a dome added with only "height" ticked kept none of the catalogue's electrical and
    moving-machinery hazards (catalogue: enclosure)."""
    response = client.post("/admin/registry/subsystem/add/", {
        "telescope": telescope.pk, "kind": "enclosure", "name": "Dome", "hazards": ["height"],
        "serial_number": "", "notes": "",
    })
    assert response.status_code == 302
    dome = Subsystem.objects.get(name="Dome")
    assert dome.hazards == ["electrical", "moving_machinery", "height"]  # in the order of the caution library
    added = next(text for level, text in _messages(response) if level == "info")
    assert ("hazards Hazardous electrical energy, Moving telescope and dome, Work at height (its kind's and any "
            "ticked)") in added
    assert "moving_machinery" not in added


def _change(client, subsystem, hazards):
    return client.post(f"/admin/registry/subsystem/{subsystem.pk}/change/", {
        "telescope": subsystem.telescope_id, "kind": subsystem.kind, "name": subsystem.name, "hazards": hazards,
        "serial_number": "", "notes": "",
    })


def test_unticking_a_hazard_of_its_kind_is_saved_with_a_warning_naming_it(engineer, client, telescope):
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    response = _change(client, dome, ["electrical", "height", "laser"])
    assert response.status_code == 302
    dome.refresh_from_db()
    assert dome.hazards == ["electrical", "height", "laser"]  # saved as ticked
    warnings = [text for level, text in _messages(response) if level == "warning"]
    assert len(warnings) == 1
    assert "Moving telescope and dome" in warnings[0] and "lack those cautions" in warnings[0]
    assert "Hazardous electrical energy" not in warnings[0] and "Work at height" not in warnings[0]


def test_a_change_keeping_every_hazard_of_its_kind_gives_no_warning(engineer, client, telescope):
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    response = _change(client, dome, ["electrical", "moving_machinery", "height", "laser"])
    assert response.status_code == 302
    assert not [text for level, text in _messages(response) if level == "warning"]


# --- 4: a dome's isolation point where the dome can move -----------------------------------------------------


@pytest.fixture
def dome(telescope):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    return subsystem_create(telescope, "enclosure", "Dome", counting_from=START)


def _mirror_order(site, telescope, users):
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    return services.work_order_ad_hoc(site, [primary], "Take out the primary", users["engineer"],
                                      steps="Lower the cell onto the lifting table.")


def test_a_mirror_order_locks_out_the_dome_that_could_turn_over_the_platform(dome, site, telescope, users):
    """Every energy source of the equipment that can move during the work is isolated (OSHA 29 CFR 1910.147
    (c)(4)(ii), (d)(3)): the dome has a supply of its own (common practice, no published source)."""
    point = IsolationPoint.objects.create(telescope=telescope, subsystem=dome, energy="ac",
                                          label="Dome rotation and shutter isolator")
    order = _mirror_order(site, telescope, users)
    assert "moving_machinery" in order.hazards
    assert {p.label for p in selectors.isolation_points(order)} == {"Mount isolator", point.label}
    assert selectors.isolation_gaps(order) == []
    assert point.description in selectors.sheet(order, URL).isolation_points
    assert [line.key for line in selectors.checklist(order).points if line.text == point.description] == [point.pk]


def test_without_a_point_for_the_dome_a_mirror_order_warns_that_it_can_move(dome, site, telescope, users):
    gaps = selectors.isolation_gaps(_mirror_order(site, telescope, users))
    assert len(gaps) == 1
    assert "T1: Dome, which has a supply of its own" in gaps[0] and "can move during this work" in gaps[0]


def test_the_dome_point_stays_off_work_where_nothing_moves_and_a_retired_domes_off_all(dome, site, telescope, users):
    point = IsolationPoint.objects.create(telescope=telescope, subsystem=dome, energy="ac", label="Dome isolator")
    mains = subsystem_create(telescope, "ac_power", "Mains", counting_from=START)  # electrical only
    order = services.work_order_ad_hoc(site, [mains], "Tighten a terminal", users["engineer"], steps="Tighten it.")
    assert point not in selectors.isolation_points(order)
    # Its only gap is the distribution's own incoming supply (tests/test_safety_content.py), none for the dome.
    assert [gap for gap in selectors.isolation_gaps(order) if "Dome" in gap or "Mains" not in gap] == []
    dome.retired_on = START
    dome.save()
    mirror_order = _mirror_order(site, telescope, users)
    assert point not in selectors.isolation_points(mirror_order) and selectors.isolation_gaps(mirror_order) == []


# --- 5: the note on merged steps ---------------------------------------------------------------------------


@pytest.fixture
def merged(telescope, users):
    """One order over the plans of a drive and of the cooling fans, on one telescope."""
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=START)
    plans = [*drive.plans.all(), *fans.plans.all()]
    return services.work_order_from_due(plans, users["engineer"], START), len(plans)


def test_an_order_over_several_plans_says_its_steps_were_merged_until_the_work_starts(merged, users, client):
    order, count = merged
    client.force_login(users["viewer"])
    page = client.get(order.get_absolute_url()).content.decode()
    assert f"The steps of {count} plans were merged" in page and "before issuing it" in page
    assert "parking positions, covers and the order of restoring" in page
    # On paper too, above the steps, as the page shows it (tests/test_workorder_pdf_record.py).
    assert f"The steps of {count} plans were merged" in _pdf_text(pdf.render_sheet(selectors.sheet(order, URL)))
    services.work_order_move(order, "issue", users["engineer"])
    assert "before the work starts" in client.get(order.get_absolute_url()).content.decode()
    services.work_order_move(order, "start", users["technician"])
    assert "plans were merged" not in client.get(order.get_absolute_url()).content.decode()


def test_an_order_over_one_plan_has_no_note(telescope, users, client):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    order = services.work_order_from_due(list(drive.plans.all())[:1], users["engineer"])
    assert selectors.merged_steps_note(order) == ""
    client.force_login(users["viewer"])
    assert "plans were merged" not in client.get(order.get_absolute_url()).content.decode()


# --- 6: dates as people read them -----------------------------------------------------------------------------
# "23 Mar 2027": day, short month name, year (Python's strftime "%d %b %Y" in the C locale, the way the pages
# print dates through observatory_ops/formats).


def test_the_printed_order_gives_its_dates_as_day_month_year(merged):
    order, _ = merged
    sheet = dataclasses.replace(
        selectors.sheet(order, URL), planned_date=dt.date(2027, 3, 23), generated_at=dt.datetime(2027, 3, 20, 8, 5),
        performed_on=dt.date(2027, 3, 24), performed_by="technician", checked_on=dt.date(2027, 3, 25),
        checked_by="engineer",
    )
    text = _pdf_text(pdf.render_sheet(sheet))
    for expected in ("23 Mar 2027", "20 Mar 2027 08:05", "24 Mar 2027", "25 Mar 2027"):
        assert expected in text, expected
    assert not re.search(r"\b\d{4}-\d{2}-\d{2}\b", text)


def test_the_finished_papers_ticks_give_the_time_as_day_month_year(merged, users):
    """Recorded at 09:30 UTC on 23 March 2027: 10:30 in Madrid, which keeps UTC+1 until the last Sunday of
    March (IANA time zone database, Europe/Madrid). Printed beside the step it ticks."""
    order, _ = merged
    order.state = State.FINISHED
    tick = ChecklistTick.objects.create(work_order=order, kind=ChecklistTick.Kind.STEP, step_index=0,
                                        text=order.step_list[0], ticked=True, recorded_by=users["technician"])
    ChecklistTick.objects.filter(pk=tick.pk).update(recorded_at=dt.datetime(2027, 3, 23, 9, 30, tzinfo=dt.UTC))
    assert selectors.sheet(order, URL).step_ticks[0].note == "ticked by technician, 23 Mar 2027 10:30"


def test_the_calendar_trigger_basis_names_its_start_day_month_year():
    state = _calendar_state(SimpleNamespace(limit=180.0), dt.date(2026, 5, 22), dt.date(2026, 6, 1))
    assert state.basis == "calendar: 180 days after 22 May 2026"
    assert state.forecast == dt.date(2026, 11, 18)  # 22 May + 180 days: 9 + 30 + 31 + 31 + 30 + 31 + 18 days


def test_the_digest_keeps_its_iso_subject_and_shows_people_no_iso_date(db):
    """The subject's ISO date sorts in a mailbox; the body names days as people read them."""
    from conftest import site_in_use

    from observatory_ops.planning import digest
    from observatory_ops.planning.services import site_recompute, site_today

    site = site_in_use("review-digest")
    site_recompute(site)
    today = site_today(site)
    message = digest.due_digest(site, today, ["engineer@vestal-ridge.example"])
    assert message is not None and message.subject.endswith(f"({today.isoformat()})")
    assert not re.search(r"\b\d{4}-\d{2}-\d{2}\b", message.body)
