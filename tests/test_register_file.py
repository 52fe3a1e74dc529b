"""A telescope's register written to a file and read into another telescope (registry.register_file; the command
`register`). An export review: a second site wanted this site's subsystems and plans, and the only way out was the
whole installation's backup."""
from __future__ import annotations

import datetime as dt
import json
import re

import pytest
from django.core.management import CommandError, call_command

from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.services import site_today
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.registry.register_file import (
    FORMAT,
    RegisterFileError,
    read_register_file,
    register_import,
    register_of,
)
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


@pytest.fixture
def source(telescope):
    """T1 with a mirror cell fan (catalogue plans), a part of it, a retired brake, and a serial number."""
    start = site_today(telescope.site) - dt.timedelta(days=300)
    fans = subsystem_create(telescope, "cooling_fans", "Cell fans, east — Ø120 mm", counting_from=start)
    fans.serial_number, fans.in_service_since, fans.notes = "SN-1", start, "=noisy"
    fans.save()
    Subsystem.objects.create(telescope=telescope, parent=fans, kind="cooling_fans", name="Fan filter",
                             hazards=list(KINDS["cooling_fans"].hazards))
    brake = subsystem_create(telescope, "brake", "Old brake", counting_from=start)
    brake.retired_on = site_today(telescope.site)
    brake.save()
    return telescope


@pytest.fixture
def target(db):
    site = Site.objects.create(name="Quill Mesa", slug="quill-mesa", latitude_deg=31.5, longitude_deg=-110.2,
                               time_zone="America/Phoenix")
    return Telescope.objects.create(site=site, name="Q50", aperture_m=0.5, mount="fork")


def _file(telescope) -> bytes:
    return json.dumps(register_of(telescope, site_today(telescope.site))).encode()


def test_a_register_read_into_another_telescope_copies_the_equipment_not_the_units(source, target, users):
    content = read_register_file(_file(source))
    assert [s["name"] for s in content["subsystems"]] == ["Cell fans, east — Ø120 mm", "Fan filter"]  # not retired
    read = register_import(target, content, users["engineer"], site_today(target.site))
    plans = ServicePlan.objects.filter(subsystem__telescope=source).exclude(subsystem__name="Old brake").count()
    assert read.summary == f"2 subsystems and {plans} plans added"
    fans = target.subsystems.get(name="Cell fans, east — Ø120 mm")
    assert (fans.serial_number, fans.in_service_since, fans.notes) == ("", None, "")  # the unit's own stay behind
    assert target.subsystems.get(name="Fan filter").parent == fans
    source_fans = source.subsystems.get(name="Cell fans, east — Ø120 mm")
    for plan in source_fans.plans.all():
        copied = fans.plans.get(name=plan.name)
        assert (copied.steps, copied.hazards, copied.estimated_hours) == (plan.steps, plan.hazards,
                                                                         plan.estimated_hours)
        assert sorted(copied.triggers.values_list("metric", "limit")) == sorted(
            plan.triggers.values_list("metric", "limit"))
        # Counted with its last service unknown: due now, as a plan added in the admin.
        assert not copied.counting_from_given and PlanStatus.objects.get(plan=copied).last_service_unknown
    # Written again from the copy, the equipment is the same (the site, telescope and day aside).
    again = register_of(target, site_today(source.site))
    assert again["subsystems"] == content["subsystems"]
    # Who read it in is in the change history.
    assert fans.history.first().history_user == users["engineer"]


def test_reading_the_same_file_twice_adds_nothing(source, target, users):
    content = read_register_file(_file(source))
    first = register_import(target, content, users["engineer"], site_today(target.site))
    counts = (Subsystem.objects.count(), ServicePlan.objects.count(), Trigger.objects.count())
    second = register_import(target, content, users["engineer"], site_today(target.site))
    assert (Subsystem.objects.count(), ServicePlan.objects.count(), Trigger.objects.count()) == counts
    assert second.subsystems_added == [] and second.plans_added == []
    assert len(second.subsystems_there) == 2 and len(second.plans_there) == len(first.plans_added)


def test_a_subsystem_keeps_its_kinds_hazards_whatever_the_file_says(source, target, users):
    """A register review emptied the AC distribution's hazards in the file: its order needed no isolation and had no
    caution, and could be issued. The kind's hazards stay, as the admin's add page and subsystem_create give them."""
    content = read_register_file(_file(source))
    content["subsystems"][0]["hazards"] = []
    register_import(target, content, users["engineer"], site_today(target.site))
    fans = target.subsystems.get(name="Cell fans, east — Ø120 mm")
    assert set(KINDS["cooling_fans"].hazards) <= set(fans.hazards) and fans.hazards


def test_what_the_file_cannot_bring_is_said_and_a_plan_changed_since_is_named(source, target, users):
    content = read_register_file(_file(source))
    read = register_import(target, content, users["engineer"], site_today(target.site))
    assert any(s.startswith("Q50 has no isolation points: register them (AC mains first)") for s in read.to_enter)
    assert any("no in-service date" in s for s in read.to_enter)
    assert "no service plan for Fan filter" in read.to_enter
    plan = content["subsystems"][0]["plans"][0]
    plan["triggers"][0]["limit"] = plan["triggers"][0]["limit"] + 10
    again = register_import(target, content, users["engineer"], site_today(target.site))
    assert again.plans_differing == [f"Cell fans, east — Ø120 mm: {plan['name']}"]
    assert (f"; of those, 1 plan differs from the file (Cell fans, east — Ø120 mm: {plan['name']}): change it in "
            "the admin if the file is right") in again.summary


def test_a_shared_enclosure_already_at_the_site_is_not_registered_again(target, users):
    """A register review copied a telescope at a site under one roll-off roof: the roof was registered twice."""
    site = target.site
    site.shared_enclosure = True
    site.save()
    roof = subsystem_create(target, "enclosure", "Roll-off roof", counting_from=site_today(site))
    other = Telescope.objects.create(site=site, name="Q30", aperture_m=0.3, mount="fork")
    content = read_register_file(json.dumps(register_of(target, site_today(site))).encode())
    read = register_import(other, content, users["engineer"], site_today(site))
    assert not other.subsystems.exists() and read.subsystems_added == []
    assert read.subsystems_there == ["Roll-off roof (the enclosure Quill Mesa's telescopes share)"]
    assert Subsystem.objects.filter(kind="enclosure").get() == roof


@pytest.mark.parametrize("change, problem", [
    (lambda c: c["subsystems"][0].update(kind="warp_drive"), "subsystem 1 (Cell fans, east — Ø120 mm): kind: "),
    (lambda c: c["subsystems"][0]["plans"][0]["triggers"][0].update(limit=-5),
     "subsystem 1 (Cell fans, east — Ø120 mm), plan 1 ("),
    (lambda c: c["subsystems"][0]["plans"][0]["triggers"][0].update(limit="soon"), ", trigger 1: limit: "),
    (lambda c: c["subsystems"][1].update(colour="red"), "subsystem 2 (Fan filter): unknown field colour"),
    (lambda c: c["subsystems"][0]["plans"][0].update(triggers=[]), "a plan needs at least one trigger"),
    (lambda c: c["subsystems"][1].update(part_of="Nothing here"), "part of 'Nothing here', which comes after it"),
    # A register review's hand edits, each stored garbled or unchecked before.
    (lambda c: c["subsystems"][0]["plans"][0].update(hazards=["cryogne"]), ": hazards: hazards must be a list"),
    (lambda c: c["subsystems"][0]["plans"][0].update(hazards="height"), ": hazards: must be a list"),
    (lambda c: c["subsystems"][0]["plans"][0].update(steps=["one", "two"]), ": steps: must be text"),
    (lambda c: c["subsystems"][0]["plans"][0]["triggers"][0].update(limit=True),
     ", trigger 1: limit: must be a number"),
    (lambda c: c["subsystems"][0]["plans"][0]["triggers"][0].update(limit=10 ** 400), "is no usable number"),
    (lambda c: c["subsystems"][0]["plans"].append(dict(c["subsystems"][0]["plans"][0])),
     "a second plan of this name on the subsystem in the file"),
    (lambda c: c["subsystems"][0].update(kind="warp_drive") or None, "subsystem 2 (Fan filter): part of "
     "'Cell fans, east — Ø120 mm', which was refused above"),
])
def test_a_bad_record_is_named_by_its_place_and_nothing_is_stored(source, target, users, change, problem):
    content = read_register_file(_file(source))
    change(content)
    before = (Subsystem.objects.count(), ServicePlan.objects.count(), Trigger.objects.count())
    with pytest.raises(RegisterFileError) as refused:
        register_import(target, content, users["engineer"], site_today(target.site))
    assert any(p.startswith(problem) or problem in p for p in refused.value.problems), refused.value.problems
    assert (Subsystem.objects.count(), ServicePlan.objects.count(), Trigger.objects.count()) == before


@pytest.mark.parametrize("data, problem", [
    (b"\xff\xfe not text", "the file is not UTF-8 text"),
    (b"  \n", "the file is empty"),
    (b"[" * 100000 + b"]" * 100000, "the file nests its records too deeply"),
    (json.dumps({"format": FORMAT, "version": 1, "subsystems": [], "mirrors": []}).encode(),
     "the register has unknown field mirrors"),
    (b"{not json", "the file is not JSON (line 1, column 2"),
    (b'{"format": "something else", "version": 1, "subsystems": []}', "the file is not a telescope register"),
    (json.dumps({"format": FORMAT, "version": 2, "subsystems": []}).encode(), "the register's version is 2"),
])
def test_a_file_that_is_not_a_register_is_refused_saying_what_it_is(data, problem):
    with pytest.raises(RegisterFileError, match=re.escape(problem)):
        read_register_file(data)


def test_the_command_writes_and_reads_a_register_and_refuses_a_technician(source, target, users, tmp_path, capsys):
    path = tmp_path / "t1.json"
    call_command("register", "export", "--site", source.site.slug, "--telescope", "T1", "--output", str(path))
    assert json.loads(path.read_text(encoding="utf-8"))["format"] == FORMAT
    with pytest.raises(CommandError, match="'technician' is not an active user with the site engineer's role"):
        call_command("register", "import", str(path), "--site", "quill-mesa", "--telescope", "Q50", "--by",
                     "technician")
    assert not target.subsystems.exists()
    call_command("register", "import", str(path), "--site", "quill-mesa", "--telescope", "Q50", "--by", "engineer")
    out = capsys.readouterr().out
    assert "Quill Mesa Q50: 2 subsystems and" in out and "last service unknown (due now)" in out
    call_command("register", "import", str(path), "--site", "quill-mesa", "--telescope", "Q50", "--by", "engineer")
    again = capsys.readouterr().out
    assert "0 subsystems and 0 plans added" in again and "last service unknown" not in again  # nothing added
    with pytest.raises(CommandError, match="no telescope named 'Q70' at Quill Mesa \\(known: Q50\\)"):
        call_command("register", "import", str(path), "--site", "quill-mesa", "--telescope", "Q70", "--by",
                     "engineer")
    bad = tmp_path / "bad.json"
    bad.write_text("{oops", encoding="utf-8")
    with pytest.raises(CommandError, match="refused; nothing was stored"):
        call_command("register", "import", str(bad), "--site", "quill-mesa", "--telescope", "Q50", "--by",
                     "engineer")


def test_the_site_page_offers_each_telescopes_register_as_a_file(source, users, client):
    client.force_login(users["viewer"])
    page = client.get(source.site.get_absolute_url()).content.decode()
    link = f"/sites/{source.site.slug}/telescopes/{source.pk}/register.json"
    assert f"<a href=\"{link}\">T1's subsystems and plans as a file</a>" in page
    response = client.get(link)
    assert response["Content-Disposition"] == (
        f'attachment; filename="register-test-hill-t1-{site_today(source.site).isoformat()}.json"')
    assert read_register_file(response.content)["telescope"] == "T1"
    assert client.get(f"/sites/quill-mesa/telescopes/{source.pk}/register.json").status_code == 404  # not its site
