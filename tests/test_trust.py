"""Trust: sign-in limits, backup and restore, and faults that must leave the data as it was."""
from __future__ import annotations

import datetime as dt
import gzip
import threading
from pathlib import Path

import pytest
from conftest import mains_isolator
from django.core.cache import cache
from django.core.management import call_command
from django.core.management.base import CommandError

from observatory_ops.access.login import MAX_FAILURES
from tests.conftest import parts_as_planned


@pytest.fixture(autouse=True)
def _clear_cache():
    cache.clear()
    yield
    cache.clear()


def test_repeated_failed_sign_ins_are_refused_even_with_the_right_password(users, client):
    for _ in range(MAX_FAILURES):
        response = client.post("/login/", {"username": "viewer", "password": "wrong"})
        assert response.status_code == 200
    response = client.post("/login/", {"username": "viewer", "password": "pw-viewer-123456"})
    assert response.status_code == 429
    assert b"Too many failed sign-ins" in response.content
    assert "_auth_user_id" not in client.session
    # Another user from the same address is not affected.
    response = client.post("/login/", {"username": "engineer", "password": "pw-engineer-123456"})
    assert response.status_code == 302


def test_a_good_sign_in_resets_the_count(users, client):
    for _ in range(MAX_FAILURES - 1):
        client.post("/login/", {"username": "viewer", "password": "wrong"})
    assert client.post("/login/", {"username": "viewer", "password": "pw-viewer-123456"}).status_code == 302
    client.logout()
    for _ in range(MAX_FAILURES - 1):
        client.post("/login/", {"username": "viewer", "password": "wrong"})
    assert client.post("/login/", {"username": "viewer", "password": "pw-viewer-123456"}).status_code == 302


def test_admin_sign_in_goes_through_the_limited_page(client):
    response = client.get("/admin/login/")
    assert response.status_code == 302 and response["Location"].startswith("/login/")


def _snapshot():
    from observatory_ops.logbook.models import NightUsage, Reading, ServiceRecord
    from observatory_ops.planning.models import PlanStatus
    from observatory_ops.workorders.models import Part, WorkOrder

    return (
        list(NightUsage.objects.order_by("pk").values()),
        list(ServiceRecord.objects.order_by("pk").values()),
        list(Reading.objects.order_by("pk").values()),
        list(PlanStatus.objects.order_by("pk").values_list("plan_id", "status", "value", "forecast_date")),
        list(WorkOrder.objects.order_by("pk").values()),
        list(Part.objects.order_by("pk").values()),
    )


@pytest.mark.django_db(transaction=True)
def test_backup_and_restore_round_trip(tmp_path):
    """Demo, backup, restore into a fresh (flushed, migrated) database: the same rows, the same
    histories and the same due list with the same forecast dates."""
    from django.apps import apps

    from fixtures_demo import generator
    from observatory_ops.archive.backup import APPS
    from observatory_ops.planning import selectors
    from observatory_ops.planning.services import site_recompute, site_today
    from observatory_ops.registry.models import Site

    generator.demo_users()
    site, _ = generator.build()
    today = site_today(site)  # one date for both due lists, so a run across the site's midnight compares alike

    def due_list():
        for each in Site.objects.all():
            site_recompute(each, today)
        # Less the moment each was computed, which a recompute renews.
        return [{k: v for k, v in selectors.due_record(s).items() if k != "computed_at"} for s in selectors.due_rows()]

    def counts():
        return {
            m._meta.label_lower: m._default_manager.count()
            for label in APPS if label in {c.label for c in apps.get_app_configs()}
            for m in apps.get_app_config(label).get_models()
        }

    due_before = due_list()
    counts_before = counts()
    path = tmp_path / "demo-backup.json.gz"
    call_command("backup", str(path))
    with gzip.open(path, "rt") as backup:
        assert '"planning.planstatus"' not in backup.read()  # derived rows: computed again on restore
    call_command("flush", "--no-input")
    assert counts()["registry.site"] == 0
    call_command("restore", str(path))
    assert counts() == counts_before
    assert due_list() == due_before


def test_restore_refuses_a_database_that_is_not_empty(users, tmp_path):
    path = tmp_path / "b.json"
    call_command("backup", str(path))
    with pytest.raises(CommandError, match="restore needs an empty database"):
        call_command("restore", str(path))


def test_restore_refuses_a_file_that_is_not_a_backup(db, tmp_path):
    path = tmp_path / "notes.json"
    path.write_text('{"hello": 1}\n[]')
    with pytest.raises(CommandError, match="not an observatory_ops backup"):
        call_command("restore", str(path))


def test_backup_never_overwrites(users, tmp_path):
    path = tmp_path / "b.json"
    path.write_text("keep me")
    with pytest.raises(CommandError, match="already exists"):
        call_command("backup", str(path))
    assert path.read_text() == "keep me"


def test_an_import_interrupted_part_way_leaves_the_data_as_it_was(site, monkeypatch):
    from observatory_ops.logbook import services
    from observatory_ops.logbook.models import NightUsage

    services.nights_import(site, b"night,open_hours\n2026-01-01,5\n")
    before = _snapshot()

    def broken_recompute(*args, **kwargs):
        raise RuntimeError("injected fault after the rows were written")

    monkeypatch.setattr(services, "site_recompute", broken_recompute)
    with pytest.raises(RuntimeError):
        services.nights_import(site, b"night,open_hours\n2026-01-01,6\n2026-01-02,7\n")
    assert _snapshot() == before
    assert NightUsage.objects.get(night=dt.date(2026, 1, 1)).open_hours == 5


def test_a_completion_interrupted_part_way_leaves_the_data_as_it_was(site, telescope, users, monkeypatch):
    from observatory_ops.registry.services import subsystem_create
    from observatory_ops.workorders import selectors, services
    from observatory_ops.workorders.models import Part, State

    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    mains_isolator(telescope)
    order = services.work_order_from_due(list(fans.plans.all()), users["engineer"], dt.date(2026, 6, 16))
    part = Part.objects.create(site=site, name="Filter", quantity_on_hand=5, reorder_point=1)
    services.part_add(order, part, 2)
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    before = _snapshot()

    def broken_recompute(*args, **kwargs):
        raise RuntimeError("injected database fault at the end of the completion")

    monkeypatch.setattr(services, "site_recompute", broken_recompute)
    with pytest.raises(RuntimeError):
        services.work_order_finish(order, users["technician"], 1.5, "done", {}, parts_as_planned(order),
                                   confirmed_unticked=[line.text for line in selectors.unticked_lines(order)],
                                   isolation_answer="isolated")
    assert _snapshot() == before
    order.refresh_from_db()
    assert order.state == State.UNDERWAY
    part.refresh_from_db()
    assert part.quantity_on_hand == 5


def test_two_people_finishing_at_once_yield_one_completion(site, telescope, users):
    """On SQLite the conditional UPDATE claims the order once; the PostgreSQL run repeats this with
    real concurrent connections (tests/test_workers.py)."""
    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.registry.services import subsystem_create
    from observatory_ops.workorders import selectors, services

    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    mains_isolator(telescope)
    order = services.work_order_from_due(list(fans.plans.all()), users["engineer"], dt.date(2026, 6, 16))
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    stale = type(order).objects.get(pk=order.pk)  # the second person's copy, loaded before the first finishes
    confirmed = [line.text for line in selectors.unticked_lines(order)]  # nothing ticked, all confirmed
    services.work_order_finish(order, users["technician"], 1.0, "first", {}, confirmed_unticked=confirmed,
                               isolation_answer="isolated")
    with pytest.raises(services.Refused, match="already been finished by someone else"):
        services.work_order_finish(stale, users["engineer"], 1.0, "second", {}, confirmed_unticked=confirmed,
                                   isolation_answer="isolated")
    assert ServiceRecord.objects.filter(work_order=order).count() == fans.plans.count()


@pytest.mark.django_db(transaction=True)
def test_sqlite_writers_wait_for_each_other_instead_of_failing(tmp_path):
    """Two threads write at once through Django to a SQLite file with the project's own database options
    (settings.py: write lock taken up front, 20 s busy timeout): the second waits, both writes land."""
    from django.conf import settings
    from django.db import connections, transaction
    from django.db.utils import load_backend

    default = settings.DATABASES["default"]
    if default["ENGINE"] != "django.db.backends.sqlite3":
        pytest.skip("SQLite-specific: PostgreSQL has row locks")
    path = Path(tmp_path) / "locked.sqlite3"
    backend = load_backend(default["ENGINE"])
    config = {**connections["default"].settings_dict, "NAME": str(path)}  # every option as the site runs
    assert config["OPTIONS"]["transaction_mode"] == "IMMEDIATE" and config["OPTIONS"]["timeout"] >= 5

    def connect(alias):
        connections[alias] = backend.DatabaseWrapper(config, alias)  # this thread's own connection
        return connections[alias]

    setup = connect("setup")
    with setup.cursor() as cursor:
        cursor.execute("create table t (n integer)")
    setup.close()
    errors, holding = [], threading.Event()

    def writer(n):
        conn = connect(f"writer{n}")
        try:
            with transaction.atomic(using=conn.alias), conn.cursor() as cursor:
                cursor.execute("insert into t values (%s)", [n])
                holding.set()
                threading.Event().wait(0.5)  # hold the write lock so the other writer must wait
        except Exception as exc:  # reported by the assertion below
            errors.append(exc)
        finally:
            conn.close()

    first = threading.Thread(target=writer, args=(1,))
    first.start()
    holding.wait(5)  # the first holds the lock before the second starts
    second = threading.Thread(target=writer, args=(2,))
    second.start()
    first.join()
    second.join()
    assert not errors
    check = connect("check")
    with check.cursor() as cursor:
        cursor.execute("select n from t order by n")
        assert [row[0] for row in cursor.fetchall()] == [1, 2]
    check.close()


def test_a_database_still_locked_after_the_wait_gets_a_clear_503_and_nothing_saved(rf, users):
    from django.db import OperationalError

    from observatory_ops.database_busy import DatabaseBusyMiddleware

    request = rf.post("/sites/x/nights/import/")
    request.user = users["technician"]
    response = DatabaseBusyMiddleware(lambda r: None).process_exception(
        request, OperationalError("database is locked")
    )
    assert response.status_code == 503 and response["Retry-After"] == "5"
    assert b"Nothing from your" in response.content
    other = DatabaseBusyMiddleware(lambda r: None).process_exception(request, OperationalError("no such table"))
    assert other is None  # any other database error stays an error
