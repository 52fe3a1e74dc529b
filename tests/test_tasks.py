"""Specifications for the background tasks (observatory_ops/*/tasks.py) as they run without a broker: inline.

Real worker processes on Redis and PostgreSQL, and a worker killed mid-task, are in tests/test_workers.py.
"""
from __future__ import annotations

import datetime as dt
import io
import os
import subprocess
import sys

import pytest
from conftest import mains_isolator, site_in_use
from django.core import mail
from django.core.management import CommandError, call_command
from django.db import OperationalError
from django.utils.timezone import now as timezone_now

from observatory_ops import celery_app
from observatory_ops.logbook import services as logbook_services
from observatory_ops.logbook import tasks as logbook_tasks
from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning import digest
from observatory_ops.planning import services as planning
from observatory_ops.planning import tasks as planning_tasks
from observatory_ops.planning.models import NightSky, PlanStatus
from observatory_ops.workorders import batches
from observatory_ops.workorders import tasks as workorder_tasks


def plan_states(site) -> dict[int, tuple]:
    """What the due list shows of each plan at a site (everything but the time it was computed)."""
    return {
        s.plan_id: (s.status, s.metric, round(s.value, 6), s.limit, s.forecast_date, s.earliest, s.latest, s.reason)
        for s in PlanStatus.objects.filter(site=site)
    }


# --- configuration ----------------------------------------------------------------------------------


def test_without_a_broker_tasks_run_inline_and_their_errors_reach_the_caller(db):
    from observatory_ops.registry.models import Site

    assert os.environ.get("CELERY_BROKER_URL") is None  # the README's test command sets none
    assert celery_app.conf.task_always_eager and celery_app.conf.task_eager_propagates
    site = site_in_use("inline")
    assert planning_tasks.site_recompute.delay(site.pk).get() == 6  # plans: mirror 2, fans 2, limits 1, dome 1
    assert PlanStatus.objects.filter(site=site).count() == 6
    with pytest.raises(Site.DoesNotExist):
        planning_tasks.site_recompute.delay(site.pk + 1000)


def test_a_broker_url_sends_tasks_to_workers_instead():
    script = (
        "import django; django.setup(); from observatory_ops import celery_app as a; "
        "print(a.conf.task_always_eager, a.conf.broker_url, a.conf.task_acks_late, "
        "a.conf.task_reject_on_worker_lost, a.conf.worker_prefetch_multiplier)"
    )
    env = {**os.environ, "DJANGO_SETTINGS_MODULE": "observatory_ops.settings",
           "CELERY_BROKER_URL": "redis://127.0.0.1:6379/5"}
    out = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True, check=True).stdout
    assert out.split() == ["False", "redis://127.0.0.1:6379/5", "True", "True", "1"]


def test_every_scheduled_task_is_found_acknowledged_late_and_retried_with_back_off():
    from django.conf import settings

    celery_app.loader.import_default_modules()  # what a worker does at start: autodiscover tasks.py modules
    scheduled = {entry["task"] for entry in settings.CELERY_BEAT_SCHEDULE.values()}
    assert scheduled == {
        "planning.sites_recompute_all", "planning.sites_due_digest_all", "workorders.sites_work_order_batch_all"
    }
    ours = {name for name in celery_app.tasks if name.split(".")[0] in {"planning", "workorders", "logbook"}}
    assert scheduled <= ours
    assert {"logbook.nights_ingest", "planning.site_sky_refresh", "planning.site_recompute",
            "planning.due_digest_send", "workorders.work_order_batch_build"} <= ours
    for name in ours:
        task = celery_app.tasks[name]
        assert task.acks_late and task.reject_on_worker_lost, name
        assert OperationalError in task.autoretry_for and task.retry_backoff and task.max_retries, name


# --- recompute and the nights cache -----------------------------------------------------------------


def test_recomputing_twice_gives_the_same_rows_as_once(db):
    site = site_in_use("twice")
    planning_tasks.site_recompute.delay(site.pk)
    once = plan_states(site)
    planning_tasks.site_recompute.delay(site.pk)
    assert plan_states(site) == once and len(once) == 6


def _failing_insert(monkeypatch, failures: int) -> list:
    """Make the recompute's write fail ``failures`` times (after the old rows were deleted in the same
    transaction), then work; returns the list of calls."""
    insert = planning._insert_all
    calls = []

    def flaky(*args, **kwargs):
        calls.append(1)
        if len(calls) <= failures:
            raise OperationalError("server closed the connection unexpectedly")
        return insert(*args, **kwargs)

    monkeypatch.setattr(planning, "_insert_all", flaky)
    return calls


def test_inline_a_failing_task_raises_its_own_error_at_once_and_the_rows_stay_as_they_were(db, monkeypatch):
    site = site_in_use("inline-fail")
    planning_tasks.site_recompute.delay(site.pk)
    before = plan_states(site)
    NightUsage.objects.filter(site=site).update(open_hours=9)  # so a recompute that got through would differ
    calls = _failing_insert(monkeypatch, failures=1)
    with pytest.raises(OperationalError):
        planning_tasks.site_recompute.delay(site.pk)
    assert len(calls) == 1
    assert plan_states(site) == before


@pytest.fixture
def as_on_a_worker():
    """Errors stay with the task instead of reaching a caller, so Celery's own retries run (inline, without
    the back-off wait). Set and restored by hand: Celery's settings object is a mapping that newer pytest
    versions of monkeypatch cannot restore."""
    previous = celery_app.conf.task_eager_propagates
    celery_app.conf.task_eager_propagates = False
    yield
    celery_app.conf.task_eager_propagates = previous


def test_a_task_that_keeps_failing_is_retried_to_its_limit_then_leaves_the_rows_as_they_were(
    db, monkeypatch, as_on_a_worker
):
    site = site_in_use("flaky")
    planning_tasks.site_recompute.delay(site.pk)
    before = plan_states(site)
    NightUsage.objects.filter(site=site).update(open_hours=9)
    calls = _failing_insert(monkeypatch, failures=100)
    result = planning_tasks.site_recompute.delay(site.pk)
    assert len(calls) == planning_tasks.site_recompute.max_retries + 1
    with pytest.raises(OperationalError):
        result.get()
    assert plan_states(site) == before


def test_a_task_that_fails_once_succeeds_on_its_retry(db, monkeypatch, as_on_a_worker):
    site = site_in_use("blip")
    calls = _failing_insert(monkeypatch, failures=1)
    assert planning_tasks.site_recompute.delay(site.pk).get() == 6
    assert len(calls) == 2 and PlanStatus.objects.filter(site=site).count() == 6


def test_sky_refresh_computes_only_the_missing_nights_of_the_forecast_span(db):
    site = site_in_use("sky")
    today = planning.site_today(site)
    last = today + dt.timedelta(days=planning.HORIZON_DAYS)
    NightSky.objects.filter(site=site, night__gt=last - dt.timedelta(days=3)).delete()
    assert planning_tasks.site_sky_refresh.delay(site.pk).get() == 3
    assert NightSky.objects.filter(site=site, night__gte=today, night__lte=last).count() == planning.HORIZON_DAYS + 1
    assert planning_tasks.site_sky_refresh.delay(site.pk).get() == 0


def test_nightly_fan_out_recomputes_every_site(db):
    sites = [site_in_use("north"), site_in_use("south", kinds=("enclosure",))]
    assert planning_tasks.sites_recompute_all.delay().get() == 2
    assert [PlanStatus.objects.filter(site=s).count() for s in sites] == [6, 1]


def test_the_hourly_new_day_entry_recomputes_the_sites_whose_day_has_turned(db, monkeypatch):
    """Run every hour, it takes each site whose states were computed before its today: within the hour after
    the site's midnight, and after any pause of the workers (a late run still finds them)."""
    from django.conf import settings

    fresh, stale = site_in_use("fresh"), site_in_use("stale-day")
    planning.site_recompute(fresh)
    planning.site_recompute(stale)
    PlanStatus.objects.filter(site=stale).update(computed_at=timezone_now() - dt.timedelta(days=1))
    recomputed = []
    monkeypatch.setattr(planning, "site_recompute", lambda site, today=None: recomputed.append(site.slug))
    assert planning_tasks.sites_recompute_all.delay(stale_only=True).get() == 1
    assert recomputed == ["stale-day"]
    entries = {entry["task"]: entry for entry in settings.CELERY_BEAT_SCHEDULE.values()}
    assert entries["planning.sites_recompute_all"]["kwargs"] == {"stale_only": True}


def test_the_digest_goes_out_from_the_local_hour_on_once_a_day_at_each_site(mailed_people, monkeypatch):
    """IANA time zone database: America/Denver is UTC-7 in December. 06:00 UTC is 06:00 at Greenwich and
    23:00 the day before in Denver; a run at 08:00 UTC (late: the workers were down) still sends Greenwich's,
    and nothing twice."""
    from django.conf import settings
    from django.utils import timezone

    greenwich, denver = site_in_use("greenwich"), site_in_use("denver")
    denver.time_zone = "America/Denver"
    denver.save()
    for site in (greenwich, denver):
        planning.site_recompute(site)
    monkeypatch.setattr(timezone, "now", lambda: dt.datetime(2026, 12, 2, 8, 0, tzinfo=dt.UTC))
    hour = settings.SITE_DIGEST_HOUR
    assert planning_tasks.sites_due_digest_all.delay(local_hour=hour).get() == 1  # Greenwich only
    mailed = [message.subject.split(":")[0] for message in mail.outbox]  # one message each to two people
    assert mailed == [greenwich.name] * 2
    assert planning_tasks.sites_due_digest_all.delay(local_hour=hour).get() == 0  # sent today: not asked again
    monkeypatch.setattr(timezone, "now", lambda: dt.datetime(2026, 12, 2, 13, 30, tzinfo=dt.UTC))  # 06:30 Denver
    assert planning_tasks.sites_due_digest_all.delay(local_hour=hour).get() == 1
    assert [message.subject.split(":")[0] for message in mail.outbox[2:]] == [denver.name] * 2


def test_a_digest_run_by_hand_waits_for_the_digest_hour_as_beat_does(mailed_people, monkeypatch):
    """``celery -A observatory_ops call planning.sites_due_digest_all`` passes no ``local_hour``: it takes
    SITE_DIGEST_HOUR, so at 03:00 at the site it sends nothing and leaves the day unsent (a default of 0 sent the
    day's digest then and marked it sent). UTC site: 03:00 UTC is 03:00 there."""
    from django.conf import settings
    from django.utils import timezone

    site = site_in_use("by-hand")
    planning.site_recompute(site)
    assert settings.SITE_DIGEST_HOUR == 6
    monkeypatch.setattr(timezone, "now", lambda: dt.datetime(2026, 12, 2, 3, 0, tzinfo=dt.UTC))
    assert planning_tasks.sites_due_digest_all.delay().get() == 0
    assert mail.outbox == []
    site.refresh_from_db()
    assert site.digest_sent_on is None
    monkeypatch.setattr(timezone, "now", lambda: dt.datetime(2026, 12, 2, 6, 0, tzinfo=dt.UTC))
    assert planning_tasks.sites_due_digest_all.delay().get() == 1
    assert len(mail.outbox) == 2  # one message to each of the two engineers with an address


def test_the_digest_command_sends_now_whatever_the_hour(mailed_people, monkeypatch):
    """README, Schedule: the way to send the day's digest before SITE_DIGEST_HOUR."""
    from django.core.management import call_command
    from django.utils import timezone

    site = site_in_use("now")
    planning.site_recompute(site)
    monkeypatch.setattr(timezone, "now", lambda: dt.datetime(2026, 12, 2, 3, 0, tzinfo=dt.UTC))
    call_command("digest", "--site", site.slug, stdout=io.StringIO())
    assert [message.subject.split(":")[0] for message in mail.outbox] == [site.name] * 2
    site.refresh_from_db()
    assert site.digest_sent_on == dt.date(2026, 12, 2)


def test_a_site_name_with_a_line_break_is_refused_and_one_stored_before_still_mails(mailed_people):
    """A line break in a subject makes Django's mail refuse the message (BadHeaderError): the digest of a site so
    named failed every hour. The name is refused now; one stored before is put on one line in the subject."""
    from django.core.exceptions import ValidationError

    from observatory_ops.registry.models import Site

    site = site_in_use("newline")
    site.name = "North dome\nBcc: someone@example.invalid"
    with pytest.raises(ValidationError, match="one line"):
        site.full_clean()
    Site.objects.filter(pk=site.pk).update(name=site.name)  # as stored before the check
    site.refresh_from_db()
    planning.site_recompute(site)
    assert digest.due_digest_send(site) == 2
    assert all(m.subject.startswith("North dome Bcc: someone@example.invalid: ") for m in mail.outbox)
    assert all("Bcc" not in m.message().keys() and m.bcc == [] for m in mail.outbox)


def test_a_digest_lists_the_sites_today_even_when_its_states_are_from_yesterday(mailed_people):
    site = site_in_use("stale")
    planning.site_recompute(site, planning.site_today(site) - dt.timedelta(days=1))
    PlanStatus.objects.filter(site=site).update(computed_at=timezone_now() - dt.timedelta(days=1))
    digest.due_digest_send(site)
    assert PlanStatus.objects.filter(site=site).first().computed_at.date() == timezone_now().date()


# --- ingest -----------------------------------------------------------------------------------------


def _older_nights(site, count: int, open_hours: float = 5.0) -> list[dict]:
    """Nights before the site's log begins (site_in_use logs the last 60), as control software sends them."""
    today = planning.site_today(site)
    return [{"night": (today - dt.timedelta(days=70 + i)).isoformat(), "open_hours": open_hours, "slews": 12}
            for i in range(count)]


def test_ingest_stores_the_nights_once_and_recomputes_the_site(db):
    site = site_in_use("ingest")
    planning_tasks.site_recompute.delay(site.pk)
    before = plan_states(site)
    records = _older_nights(site, 4)
    first = logbook_tasks.nights_ingest.delay(site.pk, records).get()
    assert (first["created"], first["updated"], first["unchanged"], first["errors"]) == (4, 0, 0, [])
    assert NightUsage.objects.filter(site=site, source="api").count() == 4
    assert plan_states(site) != before  # 20 more open hours reach the usage triggers
    again = logbook_tasks.nights_ingest.delay(site.pk, records).get()
    assert (again["created"], again["updated"], again["unchanged"]) == (0, 0, 4)
    assert NightUsage.objects.filter(site=site).count() == 64


def test_ingest_of_a_bad_night_names_it_and_stores_nothing(db):
    site = site_in_use("bad")
    records = _older_nights(site, 2)
    records[1]["open_hours"] = 25
    result = logbook_tasks.nights_ingest.delay(site.pk, records).get()
    assert result["created"] == 0 and len(result["errors"]) == 1
    assert result["errors"][0]["index"] == 1 and result["errors"][0]["field"] == "open_hours"
    assert result["errors"][0]["message"].startswith("open_hours cannot be above 24")  # the API's key and words
    assert NightUsage.objects.filter(site=site).count() == 60


def test_an_ingest_that_fails_after_writing_leaves_the_log_as_it_was(db, monkeypatch):
    site = site_in_use("broken")

    def lost_connection(*args, **kwargs):
        raise OperationalError("server closed the connection unexpectedly")

    monkeypatch.setattr(logbook_services, "site_recompute", lost_connection)
    with pytest.raises(OperationalError):
        logbook_tasks.nights_ingest.delay(site.pk, _older_nights(site, 3))
    assert NightUsage.objects.filter(site=site).count() == 60


# --- weekly work-order batch ------------------------------------------------------------------------


def test_a_batch_week_starts_on_the_coming_monday():
    # ISO 8601 numbers weeks from Monday; 2026-06-15 is a Monday (any calendar).
    monday = dt.date(2026, 6, 15)
    assert batches.coming_monday(monday) == monday
    assert batches.coming_monday(dt.date(2026, 6, 14)) == monday  # Sunday: tomorrow
    assert batches.coming_monday(dt.date(2026, 6, 16)) == dt.date(2026, 6, 22)


def _issued_order(site, subsystem, users, planned: dt.date, title: str):
    from observatory_ops.workorders import services

    order = services.work_order_ad_hoc(site, [subsystem], title, users["engineer"], steps="Look and record.")
    order.planned_date = planned
    order.save(update_fields=["planned_date"])
    return services.work_order_move(order, "issue", users["engineer"])


def test_weekly_batch_prints_that_weeks_issued_orders_and_a_rerun_replaces_it(db, users, settings, tmp_path):
    from pypdf import PdfReader

    from observatory_ops.workorders import services

    settings.DATA_DIR = tmp_path
    site = site_in_use("batch", kinds=("enclosure",))
    dome = site.telescopes.get().subsystems.get()
    mains_isolator(dome.telescope)
    mains_isolator(dome.telescope, dome)
    monday = dt.date(2026, 6, 15)
    wanted = [_issued_order(site, dome, users, monday + dt.timedelta(days=d), f"Order {d}") for d in (0, 6)]
    _issued_order(site, dome, users, monday + dt.timedelta(days=7), "Next week")
    services.work_order_ad_hoc(site, [dome], "Still a draft", users["engineer"], steps="x")

    result = workorder_tasks.work_order_batch_build.delay(site.pk, monday.isoformat()).get()
    assert result["work_orders"] == 2
    path = tmp_path / "batches" / "batch" / "2026-W25.pdf"  # ISO week 25 of 2026 begins on 15 June
    assert result["path"] == str(path)
    text = " ".join(page.extract_text() for page in PdfReader(io.BytesIO(path.read_bytes())).pages)
    assert all(o.number in text for o in wanted) and "Next week" not in text and "Still a draft" not in text

    workorder_tasks.work_order_batch_build.delay(site.pk, monday.isoformat())
    assert [p.name for p in path.parent.iterdir()] == ["2026-W25.pdf"]  # replaced, no copy, no leftovers

    for order in wanted:
        services.work_order_move(order, "withdraw", users["engineer"], reason="postponed")
    assert workorder_tasks.work_order_batch_build.delay(site.pk, monday.isoformat()).get()["work_orders"] == 0
    assert not path.exists()  # a batch for orders since withdrawn is not left behind


def test_a_batch_week_that_does_not_start_on_monday_is_refused(db):
    site = site_in_use("tuesday", kinds=())
    with pytest.raises(ValueError, match="starts on a Monday"):
        workorder_tasks.work_order_batch_build.delay(site.pk, "2026-06-16")


# --- due digest -------------------------------------------------------------------------------------


@pytest.fixture
def mailed_people(users):
    from django.contrib.auth.models import Group, User

    for role, user in users.items():
        user.email = f"{role}@vestal-ridge.invalid"
        user.save()
    quiet = User.objects.create_user("engineer-no-mail", password="pw-quiet-123456")
    quiet.groups.add(Group.objects.get(name="engineer"))
    gone = User.objects.create_user("engineer-left", email="left@vestal-ridge.invalid", is_active=False)
    gone.groups.add(Group.objects.get(name="engineer"))
    return users


def test_digest_goes_to_the_engineers_with_every_overdue_and_due_item_and_its_reason(mailed_people):
    site = site_in_use("digest")
    planning.site_recompute(site)
    states = PlanStatus.objects.filter(site=site).select_related("plan")
    listed = [s for s in states if s.status in ("overdue", "due")]
    later = [s for s in states if s.status == "later"]
    assert listed and later  # the site has items of each kind (limits and dome 100 of 90 days: overdue)

    assert planning_tasks.due_digest_send.delay(site.pk).get() == 2
    # The engineer role and above: the administrator too (the README's install makes a superuser first).
    assert sorted(address for m in mail.outbox for address in m.recipients()) == [
        "administrator@vestal-ridge.invalid", "engineer@vestal-ridge.invalid"]
    message = mail.outbox[0]
    overdue = sum(s.status == "overdue" for s in listed)
    assert message.subject.startswith(f"Site digest: {overdue} overdue, {len(listed) - overdue} due")
    for state in listed:
        assert state.plan.name in message.body and state.reason in message.body
    assert all(s.plan.name not in message.body for s in later)
    assert message.body.count("On no work order yet.") == len(listed)  # none is on an order
    assert f"/due/?site={site.pk}" in message.body


def test_the_digest_says_the_work_order_an_item_is_already_on(mailed_people):
    """An operator review: the dashboard said "On WO-00012" beside an overdue item, the digest nothing."""
    from observatory_ops.workorders import services as workorder_services

    site = site_in_use("covered")
    planning.site_recompute(site)
    [first, *_] = [s for s in PlanStatus.objects.filter(site=site).select_related("plan") if s.status == "overdue"]
    order = workorder_services.work_order_from_due([first.plan], mailed_people["engineer"])
    digest.due_digest_send(site)
    body = mail.outbox[0].body
    said = body.split(first.reason, 1)[1].split("\n")[1].strip()
    assert said == f"On {order.number} (draft): http://127.0.0.1:8000{order.get_absolute_url()}"


def test_digest_is_sent_once_a_day_however_often_the_task_runs(mailed_people):
    site = site_in_use("once")
    planning.site_recompute(site)
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 2  # the engineer and the administrator
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 0
    assert len(mail.outbox) == 2


def test_each_engineer_gets_a_message_of_their_own_and_sees_no_other_address(mailed_people):
    """Engineers of different sites need not know each other's addresses: one message per person, with no
    copies (RFC 5322, section 3.6.3: every address in To and Cc is shown to all who receive the message)."""
    site = site_in_use("private")
    planning.site_recompute(site)
    assert digest.due_digest_send(site) == 2
    assert [m.to for m in mail.outbox] == [["administrator@vestal-ridge.invalid"], ["engineer@vestal-ridge.invalid"]]
    assert all(not m.cc and not m.bcc for m in mail.outbox)
    assert mail.outbox[0].subject == mail.outbox[1].subject and mail.outbox[0].body == mail.outbox[1].body


def test_a_digest_that_could_not_be_sent_is_sent_by_the_next_run(mailed_people, monkeypatch):
    import smtplib

    from django.core.mail.backends.locmem import EmailBackend

    site = site_in_use("smtp")
    planning.site_recompute(site)
    send_messages = EmailBackend.send_messages

    def refused(self, messages):
        raise smtplib.SMTPServerDisconnected("connection unexpectedly closed")

    monkeypatch.setattr(EmailBackend, "send_messages", refused)
    with pytest.raises(smtplib.SMTPServerDisconnected):
        planning_tasks.due_digest_send.delay(site.pk)
    site.refresh_from_db()
    assert site.digest_sent_on is None
    monkeypatch.setattr(EmailBackend, "send_messages", send_messages)
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 2


def test_a_digest_that_fails_part_way_is_taken_up_by_mailing_only_the_others(mailed_people, monkeypatch):
    """The mail server accepts the first message and drops the connection at the second (SMTPServerDisconnected, an
    OSError: the task retries it). The person mailed is recorded as such, the one refused is not, and the day stays
    unsent; the retry mails only the two not yet mailed and records the day. Nobody gets the digest twice."""
    import smtplib

    from django.contrib.auth.models import Group, User
    from django.core.mail.backends.locmem import EmailBackend

    from observatory_ops.planning.models import DigestSent

    User.objects.create_user("engineer2", email="engineer2@vestal-ridge.invalid").groups.add(
        Group.objects.get(name="engineer"))
    site = site_in_use("part-way")
    planning.site_recompute(site)
    today = planning.site_today(site)
    tried: list[str] = []
    send_messages = EmailBackend.send_messages

    def second_refused(self, messages):
        for message in messages:
            tried.extend(message.to)
            if len(tried) == 2:
                raise smtplib.SMTPServerDisconnected("connection unexpectedly closed")
        return send_messages(self, messages)

    monkeypatch.setattr(EmailBackend, "send_messages", second_refused)
    with pytest.raises(smtplib.SMTPServerDisconnected):
        planning_tasks.due_digest_send.delay(site.pk)
    site.refresh_from_db()
    assert site.digest_sent_on is None
    assert [m.to for m in mail.outbox] == [["administrator@vestal-ridge.invalid"]]
    assert list(DigestSent.objects.filter(site=site, day=today).values_list("address", flat=True)) == [
        "administrator@vestal-ridge.invalid"]  # engineer2's message was refused: not recorded as sent

    assert planning_tasks.due_digest_send.delay(site.pk).get() == 2  # the retry: the two not yet mailed
    assert [m.to for m in mail.outbox] == [
        ["administrator@vestal-ridge.invalid"], ["engineer2@vestal-ridge.invalid"], ["engineer@vestal-ridge.invalid"]]
    site.refresh_from_db()
    assert site.digest_sent_on == today and not DigestSent.objects.filter(site=site).exists()
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 0 and len(mail.outbox) == 3


def test_an_address_refused_for_good_does_not_stop_the_others(mailed_people, monkeypatch, caplog):
    """An operator review: one engineer's old address, refused "550 User unknown", stopped the site's digest every
    hour, nobody mailed. A permanent refusal (a 5xx reply: RFC 5321, section 4.2.1) is logged with the site and the
    address and the others are mailed; a temporary one (4xx) still stops the run for the retry."""
    import smtplib

    from django.core.mail.backends.locmem import EmailBackend

    site = site_in_use("refused")
    planning.site_recompute(site)
    send_messages = EmailBackend.send_messages
    code = 550

    def unknown_administrator(self, messages):
        for message in messages:
            if message.to == ["administrator@vestal-ridge.invalid"]:
                raise smtplib.SMTPRecipientsRefused({message.to[0]: (code, b"5.1.1 User unknown")})
        return send_messages(self, messages)

    monkeypatch.setattr(EmailBackend, "send_messages", unknown_administrator)
    code = 450  # for now: try again later
    with pytest.raises(smtplib.SMTPRecipientsRefused):
        digest.due_digest_send(site)
    assert mail.outbox == []
    code = 550
    with caplog.at_level("WARNING", logger="observatory_ops.planning.digest"):
        assert digest.due_digest_send(site) == 1
    assert [m.to for m in mail.outbox] == [["engineer@vestal-ridge.invalid"]]
    assert "due digest of refused not delivered to administrator@vestal-ridge.invalid" in caplog.text
    site.refresh_from_db()
    assert site.digest_sent_on == planning.site_today(site)  # not tried again every hour
    assert site.digest_refused == (f"{planning.site_today(site):%d %b %Y}: refused for good: "
                                   "administrator@vestal-ridge.invalid (550)")
    assert digest.due_digest_send(site) == 0
    # Said by the command and on the site's admin page too, not only in the worker's log (a diff review).
    out = io.StringIO()
    call_command("digest", "--site", site.slug, stdout=out)
    assert "already sent today" in out.getvalue() and "the mail server refused" in out.getvalue()


def test_the_digest_command_says_a_mail_server_failure_and_goes_on_to_the_next_site(mailed_people, monkeypatch):
    import smtplib

    from django.core.mail.backends.locmem import EmailBackend

    first, second = site_in_use("a-first"), site_in_use("b-second")
    for site in (first, second):
        planning.site_recompute(site)
    send_messages = EmailBackend.send_messages

    def first_site_fails(self, messages):
        if any(first.name in m.subject for m in messages):
            raise smtplib.SMTPServerDisconnected("connection unexpectedly closed")
        return send_messages(self, messages)

    monkeypatch.setattr(EmailBackend, "send_messages", first_site_fails)
    out, err = io.StringIO(), io.StringIO()
    with pytest.raises(CommandError, match="was not sent"):
        call_command("digest", stdout=out, stderr=err)
    assert "not sent, the mail server failed: connection unexpectedly closed" in err.getvalue()
    assert f"{second.name}: " in out.getvalue() and len(mail.outbox) == 2  # the second site's two people


@pytest.fixture
def mail_server_that_never_greets(settings):
    """A listener on loopback that accepts connections (the kernel completes them) and never says a word:
    an SMTP client waits for the server's greeting first (RFC 5321, section 3.1)."""
    import socket

    with socket.socket() as silent:
        silent.bind(("127.0.0.1", 0))
        silent.listen(8)
        settings.EMAIL_BACKEND = "django.core.mail.backends.smtp.EmailBackend"
        settings.EMAIL_HOST, settings.EMAIL_PORT = silent.getsockname()
        settings.EMAIL_TIMEOUT = 1
        yield silent


def test_a_mail_server_that_never_answers_gives_up_and_leaves_the_day_to_the_next_run(
        mailed_people, mail_server_that_never_greets, settings):
    """Without EMAIL_TIMEOUT the digest would wait for ever; with it the send fails (retried by the task, and
    inline here the error reaches the caller), the day stays unsent, and the next run sends it."""
    site = site_in_use("silent-smtp")
    planning.site_recompute(site)
    with pytest.raises(OSError, match="timed out"):
        planning_tasks.due_digest_send.delay(site.pk)
    site.refresh_from_db()
    assert site.digest_sent_on is None and not mail.outbox
    settings.EMAIL_BACKEND = "django.core.mail.backends.locmem.EmailBackend"  # the server answers again
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 2
    site.refresh_from_db()
    assert site.digest_sent_on == planning.site_today(site)


def test_no_digest_when_nothing_is_due(mailed_people):
    site = site_in_use("calm", kinds=("mirror_cell",))  # 100 of 365 days: later
    planning.site_recompute(site)
    assert digest.due_digest_send(site) == 0 and not mail.outbox


def test_a_digest_with_nobody_to_send_to_is_logged_not_silent(users, caplog):
    site = site_in_use("nobody")
    planning.site_recompute(site)
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 0
    assert "no engineer or administrator has an e-mail address" in caplog.text
    assert not mail.outbox


def test_the_digest_command_sends_each_site_once_a_day_for_cron(mailed_people):
    from io import StringIO

    from django.core.management import call_command

    site = site_in_use("cron")
    planning.site_recompute(site)
    out = StringIO()
    call_command("digest", "--site", "cron", stdout=out)
    assert f"{site.name}: sent to 2 address(es)" in out.getvalue()
    call_command("digest", "--site", "cron", stdout=out)
    today = planning.site_today(site)
    assert f"{site.name}: nothing sent: already sent today ({today:%d %b %Y})" in out.getvalue()
    assert len(mail.outbox) == 2


def test_the_digest_command_says_why_nothing_was_sent(users):
    """A deployment review could not tell "already sent", "nobody to send to" and "nothing due" apart."""
    from io import StringIO

    from django.core.management import call_command

    site = site_in_use("why-not")
    planning.site_recompute(site)
    out = StringIO()
    call_command("digest", "--site", "why-not", stdout=out)
    assert out.getvalue() == (f"{site.name}: nothing sent: nobody to send it to has an e-mail address (the site's "
                              "'Due digest to', or every engineer)\n")


def test_the_digest_command_says_when_mail_is_only_printed(mailed_people, settings, capsys):
    """The console backend (the default) prints each message instead of sending it: the command says so."""
    from io import StringIO

    from django.core.management import call_command

    settings.EMAIL_BACKEND = "django.core.mail.backends.console.EmailBackend"
    site = site_in_use("console")
    planning.site_recompute(site)
    out = StringIO()
    call_command("digest", "--site", "console", stdout=out)
    assert out.getvalue() == (
        f"{site.name}: printed to the log, not sent, for 2 address(es): EMAIL_BACKEND is the console backend (set "
        "EMAIL_BACKEND=django.core.mail.backends.smtp.EmailBackend and EMAIL_HOST to send)\n"
    )
    assert capsys.readouterr().out.count(f"Subject: {site.name}:") == 2 and not mail.outbox


def test_a_site_that_lists_its_engineers_mails_them_only(mailed_people):
    """A network's engineers each look after their own sites: a site's ``digest_to`` names them, and its digest goes
    to them alone; a site that lists none mails every engineer (our own rule)."""
    from django.contrib.auth.models import Group, User

    site, other = site_in_use("listed"), site_in_use("unlisted")
    own = User.objects.create_user("ridge-engineer", email="ridge@vestal-ridge.invalid", password="pw-ridge-123456")
    own.groups.add(Group.objects.get(name="engineer"))
    site.digest_to.add(own, mailed_people["technician"])  # a technician listed by mistake gets nothing
    assert digest.recipients(site) == ["ridge@vestal-ridge.invalid"]
    assert digest.recipients(other) == [
        "administrator@vestal-ridge.invalid", "engineer@vestal-ridge.invalid", "ridge@vestal-ridge.invalid"]
    planning.site_recompute(site)
    assert planning_tasks.due_digest_send.delay(site.pk).get() == 1
    assert [address for m in mail.outbox for address in m.recipients()] == ["ridge@vestal-ridge.invalid"]


def test_the_site_admin_offers_engineers_only_for_the_digest(mailed_people, rf):
    from django.contrib import admin

    from observatory_ops.registry.models import Site

    request = rf.get("/admin/registry/site/add/")
    request.user = mailed_people["administrator"]
    form = admin.site._registry[Site].get_form(request)()
    offered = set(form.fields["digest_to"].queryset.values_list("username", flat=True))
    assert {"engineer", "administrator", "engineer-no-mail"} <= offered
    assert not offered & {"technician", "viewer", "engineer-left"}


def test_the_site_admin_says_when_the_digest_last_went_out_and_to_how_many(mailed_people, client):
    """An operator review: a digest that stopped (its only listed recipient made inactive) showed nowhere but in
    the worker's log."""
    site = site_in_use("admin-says")
    planning.site_recompute(site)
    administrator = mailed_people["administrator"]
    administrator.is_staff = administrator.is_superuser = True
    administrator.save()
    client.force_login(administrator)
    page = client.get(f"/admin/registry/site/{site.pk}/change/").content.decode()
    assert "not sent yet; goes to 2 addresses" in page
    digest.due_digest_send(site)
    engineer = mailed_people["engineer"]
    site.digest_to.set([engineer])
    engineer.is_active = False
    engineer.save()
    page = client.get(f"/admin/registry/site/{site.pk}/change/").content.decode()
    assert (f"last sent for {planning.site_today(site):%d %b %Y}; goes to 1 address (the administrators: none of "
            "those listed under Due digest to can receive it)") in page


def test_a_site_whose_listed_people_are_all_gone_mails_the_administrators_saying_why(mailed_people):
    """An operator review: the one engineer a site listed was made inactive, and its digest stopped, said only in the
    worker's log."""
    site = site_in_use("listed-gone")
    planning.site_recompute(site)
    engineer = mailed_people["engineer"]
    site.digest_to.set([engineer])
    assert digest.recipients(site) == ["engineer@vestal-ridge.invalid"] and not digest.listed_gone(site)
    engineer.is_active = False
    engineer.save()
    assert digest.recipients(site) == ["administrator@vestal-ridge.invalid"]
    assert digest.due_digest_send(site) == 1
    assert "You receive this as an administrator: none of the people listed" in mail.outbox[0].body


def test_a_failed_task_names_the_site_it_was_for_and_the_every_site_tasks_none(db, caplog):
    """An operator review read "Site matching query does not exist" in the worker's log, no site named. What the
    worker calls on a failure (Celery's ``Task.on_failure``; inline, the error goes to the caller instead)."""
    from observatory_ops.registry.models import Site

    site = site_in_use("named-in-log")
    task = planning_tasks.site_recompute
    with caplog.at_level("ERROR", logger="observatory_ops.celery"):
        task.on_failure(Site.DoesNotExist("Site matching query does not exist."), "t-1", (site.pk + 1000,), {}, None)
        task.on_failure(OSError("refused"), "t-2", (), {"site_id": site.pk}, None)
    assert f"task planning.site_recompute[t-1] for site {site.pk + 1000} (none such) failed" in caplog.text
    assert f"task planning.site_recompute[t-2] for site {site.pk} (named-in-log) failed" in caplog.text
    # The every-site tasks' first argument is an hour or a flag, not a site.
    assert planning_tasks.sites_due_digest_all._site_said((site.pk,), {}) == "no site"
    assert planning_tasks.sites_recompute_all._site_said((True,), {}) == "no site"
