"""Real worker processes and real concurrency: Celery workers on Redis writing to PostgreSQL, a worker
killed mid-task, and two connections writing the same rows at once.

These run when ``DATABASE_URL`` names a PostgreSQL database and ``OBSOPS_TEST_REDIS_URL`` a Redis database
the tests may empty: .ci/run starts both on loopback and runs the suite a second time with them. On the
SQLite run they skip with the reason. With PostgreSQL chosen, a server that does not answer, or (for the
worker tests) no Redis, skips the test with the reason, and under ``CI=true`` fails it instead.

The workers are separate processes, so they cannot see a test's uncommitted rows: every test here is
transactional (rows are committed, and the tables emptied afterwards) and each worker is pointed at
pytest-django's test database (``test_<name>``) through its own ``DATABASE_URL``.
"""
from __future__ import annotations

import datetime as dt
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path
from urllib.parse import quote

import pytest
from conftest import mains_isolator, require_server, site_in_use
from django.db import connection, transaction

from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning import services as planning
from observatory_ops.planning.models import PlanStatus
from observatory_ops.registry.models import Site

pytestmark = pytest.mark.django_db(transaction=True)

PROJECT = Path(__file__).resolve().parent.parent
#: Longest wait for a worker to finish what it was sent. Generous: CI machines have 2 cores.
WAIT_SECONDS = 90


@pytest.fixture
def postgresql() -> str:
    url = os.environ.get("DATABASE_URL", "")
    if not url.startswith(("postgres://", "postgresql://")):
        # Not a missing server but this run's choice of database: .ci/run runs the suite again on PostgreSQL.
        pytest.skip("needs PostgreSQL; this run uses SQLite (set DATABASE_URL=postgres://..., as .ci/run's second run)")
    return require_server(url, "DATABASE_URL", "PostgreSQL")


@pytest.fixture
def redis_url(postgresql) -> str:
    import redis

    url = require_server(os.environ.get("OBSOPS_TEST_REDIS_URL"), "OBSOPS_TEST_REDIS_URL", "Redis")
    client = redis.Redis.from_url(url)
    client.flushdb()  # no message left over from an earlier, interrupted run
    client.close()
    return url


def worker_database_url() -> str:
    """The URL of pytest-django's test database, for processes outside this one."""
    s = connection.settings_dict
    return f"postgres://{quote(s['USER'])}:{quote(s['PASSWORD'])}@{s['HOST']}:{s['PORT']}/{quote(s['NAME'])}"


class Workers:
    """Celery worker processes started for one test, each in its own process group; all stopped at the end."""

    def __init__(self, broker_url: str, data_dir: Path):
        self.env = {
            **os.environ,
            "DJANGO_SETTINGS_MODULE": "observatory_ops.settings",
            "DATABASE_URL": worker_database_url(),
            "CELERY_BROKER_URL": broker_url,
            "OBSOPS_DATA_DIR": str(data_dir),
        }
        self.env.pop("CELERY_RESULT_BACKEND", None)
        self.data_dir = data_dir
        self.processes: list[subprocess.Popen] = []
        self.killed: list[subprocess.Popen] = []

    def start(self, concurrency: int = 2, **env: str) -> subprocess.Popen:
        log = open(self.data_dir / f"worker-{len(self.processes)}.log", "wb")  # closed in stop()
        process = subprocess.Popen(
            [sys.executable, "-m", "celery", "-A", "observatory_ops", "worker", "--loglevel=warning",
             "-c", str(concurrency),
             "--without-gossip", "--without-mingle", "--without-heartbeat", "-n", f"test{len(self.processes)}@%h"],
            cwd=PROJECT, env={**self.env, **env}, stdout=log, stderr=subprocess.STDOUT, start_new_session=True,
        )
        process.log = log
        self.processes.append(process)
        return process

    def kill(self, process: subprocess.Popen) -> None:
        """SIGKILL the worker and its pool processes at once, as a machine that loses power would."""
        self.killed.append(process)
        os.killpg(process.pid, signal.SIGKILL)
        process.wait(timeout=30)

    def died(self) -> list[subprocess.Popen]:
        """Workers that exited though nobody killed them (an import error, a crash)."""
        return [p for p in self.processes if p not in self.killed and p.poll() is not None]

    def logs(self) -> str:
        return "\n".join(p.log.name + ":\n" + Path(p.log.name).read_text(errors="replace") for p in self.processes)

    def stop(self) -> None:
        for process in self.processes:
            if process.poll() is None:
                process.terminate()  # warm shutdown: finish the current task, stop the pool, leave
        for process in self.processes:
            try:
                process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()
            try:
                os.killpg(process.pid, signal.SIGKILL)  # any pool process left behind
            except ProcessLookupError:
                pass
            process.log.close()


@pytest.fixture
def workers(redis_url, tmp_path):
    started = Workers(redis_url, tmp_path)
    yield started
    started.stop()  # before the test's tables are emptied: a worker's connection would hold them


@pytest.fixture
def producer(redis_url):
    """A Celery client of its own that sends tasks by name to Redis (the project's app runs them inline)."""
    from celery import Celery

    app = Celery("obsops-test-client", broker=redis_url)
    yield app
    app.close()


def wait_for(condition, what: str, workers: Workers) -> None:
    deadline = time.monotonic() + WAIT_SECONDS
    while not condition():
        if workers.died():
            pytest.fail(f"a worker exited while waiting for {what}\n{workers.logs()}")
        if time.monotonic() > deadline:
            pytest.fail(f"waited {WAIT_SECONDS} s for {what}\n{workers.logs()}")
        time.sleep(0.2)


def plan_states(site) -> dict[int, tuple]:
    return {
        s.plan_id: (s.status, s.metric, round(s.value, 6), s.limit, s.forecast_date, s.earliest, s.latest, s.reason)
        for s in PlanStatus.objects.filter(site=site)
    }


def test_a_worker_on_redis_recomputes_several_sites_into_postgresql(workers, producer):
    sites = {
        site_in_use("alpha"): 6,  # catalogue plans: mirror 2, fans 2, limits 1, dome 1
        site_in_use("bravo", kinds=("enclosure", "brake")): 2,
        site_in_use("charlie", kinds=("drive_rollers",)): 1,
    }
    workers.start()
    for site in sites:
        producer.send_task("planning.site_recompute", args=[site.pk])
    wait_for(lambda: all(PlanStatus.objects.filter(site=s).count() == n for s, n in sites.items()),
             "the recompute of every site", workers)
    for site in sites:
        from_worker = plan_states(site)
        planning.site_recompute(site)  # a clean recompute here, in the test process
        assert plan_states(site) == from_worker


def _older_nights(site, count: int) -> list[dict]:
    today = planning.site_today(site)
    return [{"night": (today - dt.timedelta(days=70 + i)).isoformat(), "open_hours": 5.0} for i in range(count)]


def _children(pid: int) -> list[int]:
    """The process ids whose parent is ``pid`` (Linux /proc)."""
    found = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:  # the process ended while we looked
            continue
        if int(fields[1]) == pid:
            found.append(int(stat.parent.name))
    return found


def _waiting_on_a_lock() -> int:
    """How many other sessions of this database are waiting for a lock."""
    with connection.cursor() as cursor:
        cursor.execute("SELECT pg_stat_clear_snapshot()")  # inside a transaction the view is read once, then kept
        cursor.execute(
            "SELECT count(*) FROM pg_stat_activity WHERE datname = current_database() AND wait_event_type = 'Lock'"
        )
        return cursor.fetchone()[0]


@pytest.mark.parametrize("victim", ["the pool process running the task", "the whole worker"])
def test_a_worker_killed_mid_task_loses_nothing_and_counts_nothing_twice(workers, producer, victim):
    """acks_late: the message stays with Redis until the task has finished, so a killed task runs again.
    reject_on_worker_lost: when only the pool process dies, the worker hands the message back at once.
    The killed attempt's transaction was never committed, so the rerun starts from the data as it was.

    The test holds the site's row locked, so the ingest task stops inside its transaction with its
    nights written, where its recompute waits for that lock; the worker is killed there."""
    site = site_in_use("kill")
    planning.site_recompute(site)
    before = plan_states(site)
    with transaction.atomic():
        Site.objects.select_for_update().filter(pk=site.pk).exists()  # held until this block ends
        first = workers.start(concurrency=1)  # one pool process: the one running the task
        producer.send_task("logbook.nights_ingest", args=[site.pk, _older_nights(site, 5)])
        wait_for(_waiting_on_a_lock, "the ingest task to stop at the site's lock inside its transaction", workers)
        assert NightUsage.objects.filter(site=site).count() == 60 and plan_states(site) == before
        if victim == "the whole worker":
            workers.kill(first)
            killed_at = time.monotonic()
        else:
            (pool,) = _children(first.pid)
            os.kill(pool, signal.SIGKILL)
    # The lock is released: the killed attempt's session takes it, finds its client gone and rolls back.
    if victim == "the whole worker":
        # A new worker takes over messages whose worker vanished once they are older than the visibility
        # timeout; it looks when it starts, so start it after that much time has passed.
        visibility = 2
        time.sleep(max(0.0, killed_at + visibility + 1 - time.monotonic()))
        workers.start(CELERY_VISIBILITY_TIMEOUT=str(visibility))

    wait_for(lambda: NightUsage.objects.filter(site=site).count() == 65, "the ingest to complete", workers)
    time.sleep(1)  # room for a duplicate run to show itself, if there were one
    assert NightUsage.objects.filter(site=site).count() == 65
    assert NightUsage.objects.filter(site=site, source="api").count() == 5
    assert sorted(NightUsage.objects.filter(site=site).values_list("open_hours", flat=True)) == [5.0] * 5 + [6.0] * 60
    from_worker = plan_states(site)
    assert from_worker != before
    planning.site_recompute(site)
    assert plan_states(site) == from_worker


# --- two connections at once ------------------------------------------------------------------------


def _in_threads(*calls) -> list:
    """Run each call in its own thread (so on its own database connection); return results or exceptions."""
    results: list = [None] * len(calls)

    def run(i, call):
        try:
            results[i] = call()
        except Exception as exc:  # reported to the test
            results[i] = exc
        finally:
            connection.close()

    threads = [threading.Thread(target=run, args=(i, c)) for i, c in enumerate(calls)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=WAIT_SECONDS)
    return results


def _hold_inside(module, name: str, held: threading.Event, release: threading.Event, monkeypatch) -> None:
    """Make the first call of ``module.name`` stop (inside its caller's transaction) until ``release``."""
    original = getattr(module, name)
    first = threading.Lock()

    def holding(*args, **kwargs):
        if first.acquire(blocking=False):
            held.set()
            release.wait(WAIT_SECONDS)
        return original(*args, **kwargs)

    monkeypatch.setattr(module, name, holding)


def _release_once_the_second_waits(held: threading.Event, release: threading.Event, seen: list) -> None:
    """Runs in a thread: once the first writer is held and the second is waiting for its lock, let go."""
    try:
        held.wait(WAIT_SECONDS)
        deadline = time.monotonic() + WAIT_SECONDS
        while time.monotonic() < deadline:
            if _waiting_on_a_lock():
                seen.append("second writer waited")
                break
            time.sleep(0.05)
    finally:
        release.set()
        connection.close()


def _race(first, second, monkeypatch, module, name: str) -> tuple[list, list]:
    """Run ``first`` and ``second`` on two connections: ``first`` is held inside its transaction at
    ``module.name`` until ``second`` waits for a lock ``first`` holds; returns both results."""
    held, release, seen = threading.Event(), threading.Event(), []
    _hold_inside(module, name, held, release, monkeypatch)

    def after_first_is_held():
        held.wait(WAIT_SECONDS)
        return second()

    watcher = threading.Thread(target=_release_once_the_second_waits, args=(held, release, seen))
    watcher.start()
    results = _in_threads(first, after_first_is_held)
    watcher.join()
    return results, seen


def test_finishing_one_work_order_from_two_connections_at_once_yields_one_completion(postgresql, users, monkeypatch):
    """The first finish claims the order and is held inside its transaction; the second, on another
    connection, waits on the row, then finds the order no longer underway. PostgreSQL's row locks under
    READ COMMITTED re-check the WHERE clause after the wait (PostgreSQL manual, 13.2.1)."""
    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.workorders import selectors, services
    from observatory_ops.workorders.models import State, WorkOrder

    fans = site_in_use("finish", kinds=("cooling_fans",)).telescopes.get().subsystems.get()
    mains_isolator(fans.telescope)
    order = services.work_order_from_due(list(fans.plans.all()), users["engineer"], dt.date(2026, 6, 16))
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    copies = [WorkOrder.objects.get(pk=order.pk) for _ in range(2)]  # each person's page, loaded before

    confirmed = [line.text for line in selectors.unticked_lines(order)]  # nothing ticked, all confirmed

    def finish(copy, who, note):
        return lambda: services.work_order_finish(copy, users[who], 1.0, note, {}, confirmed_unticked=confirmed,
                                                  isolation_answer="isolated")

    results, seen = _race(finish(copies[0], "technician", "first"), finish(copies[1], "engineer", "second"),
                          monkeypatch, services, "site_recompute")
    assert seen == ["second writer waited"]
    assert isinstance(results[0], WorkOrder) and results[0].state == State.FINISHED
    assert isinstance(results[1], services.Refused) and "already been finished" in str(results[1])
    records = ServiceRecord.objects.filter(work_order=order)
    assert records.count() == fans.plans.count() == 2
    assert set(records.values_list("findings", flat=True)) == {"first"}


def test_two_recomputes_of_one_site_at_once_both_succeed_with_one_row_per_plan(postgresql, monkeypatch):
    """The first recompute has deleted the site's rows and is held before writing the new ones; the
    second must wait for it rather than insert beside it."""
    site = site_in_use("twice")
    planning.site_recompute(site)
    before = plan_states(site)
    results, seen = _race(lambda: planning.site_recompute(site), lambda: planning.site_recompute(site),
                          monkeypatch, planning, "_insert_all")
    assert seen == ["second writer waited"]
    assert results == [6, 6]
    assert plan_states(site) == before
