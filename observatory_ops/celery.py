"""The Celery application: background work that calls the same services the pages call.

Configuration comes from Django settings under the ``CELERY_`` prefix. Without ``CELERY_BROKER_URL`` every
task runs inline in the calling process, so the default installation needs no other server; with
``redis://...`` tasks go to workers (``celery -A observatory_ops worker``) and the schedule to
``celery -A observatory_ops beat``.

Every task derives from :class:`ServiceTask`: acknowledged only after it has finished (a worker that
dies mid-task leaves the message to be delivered again), retried with exponential back-off when the
database connection fails or a transaction loses a deadlock, and written so that running it twice gives
the same result as running it once.
"""
from __future__ import annotations

import inspect
import logging
import os

from celery import Celery, Task, chain
from celery.signals import beat_init, celeryd_init, worker_init
from django.db import IntegrityError, InterfaceError, OperationalError

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "observatory_ops.settings")

app = Celery("observatory_ops")
app.config_from_object("django.conf:settings", namespace="CELERY")
app.autodiscover_tasks()


#: Why a worker or beat does not start without a broker (an IT review's worker, its environment file not loaded, went
#: looking for a broker Celery assumes, amqp://localhost, and retried for ever without naming what was missing).
NO_BROKER = (
    "CELERY_BROKER_URL is not set, so tasks run inline in the web process and a worker or beat has nothing to do. "
    "Load the environment file first (set -a; . /etc/observatory_ops.env; set +a: README, Deployment), or set "
    "CELERY_BROKER_URL=redis://127.0.0.1:6379/0."
)


@celeryd_init.connect
@beat_init.connect
def _refuse_without_broker(**_kwargs) -> None:
    from django.conf import settings

    if not settings.CELERY_BROKER_URL:
        raise SystemExit(NO_BROKER)  # a SystemExit passes through Celery's signal dispatch, which logs the rest


@worker_init.connect
def _freeze_after_start(**_kwargs) -> None:
    from observatory_ops.startup import freeze_loaded_objects

    freeze_loaded_objects()


log = logging.getLogger(__name__)


class ServiceTask(Task):
    """Base of every observatory_ops task: late acknowledgement and retries on database trouble.

    ``OperationalError`` covers a lost connection, a server restart, a deadlock or a serialisation
    failure on PostgreSQL; ``InterfaceError`` a connection that was closed under the worker;
    ``IntegrityError`` a concurrent writer that stored the same night first (the retry then finds it and
    changes nothing). Each task runs in one transaction that is rolled back on any error, so a retry
    starts from the data as it was.
    """

    autoretry_for = (OperationalError, InterfaceError, IntegrityError)
    retry_backoff = True
    retry_backoff_max = 600
    retry_jitter = True
    max_retries = 6
    acks_late = True
    reject_on_worker_lost = True

    def on_failure(self, exc, task_id, args, kwargs, einfo):
        """Name the site a failed task was for (its first argument, a site id, in every site task), so an operator of
        many sites can act on the log line (an operator review read only "Site matching query does not exist")."""
        log.error("task %s[%s] for %s failed: %r", self.name, task_id, self._site_said(args, kwargs), exc)

    def on_retry(self, exc, task_id, args, kwargs, einfo):
        log.warning("task %s[%s] for %s will be retried: %r", self.name, task_id, self._site_said(args, kwargs), exc)

    def _site_said(self, args, kwargs) -> str:
        """The site a task's ``site_id`` argument names, as a log line says it: "site 3 (vestal-ridge)", "site 999
        (none such)", or "no site" for a task without one (the every-site tasks, whose first argument is an hour or
        a flag)."""
        if "site_id" in kwargs:
            site_id = kwargs["site_id"]
        elif args and next(iter(inspect.signature(self.run).parameters), None) == "site_id":
            site_id = args[0]
        else:
            return "no site"
        from observatory_ops.registry.models import Site

        try:
            slug = Site.objects.filter(pk=site_id).values_list("slug", flat=True).first() or "none such"
        except Exception:  # the database itself may be what failed  # noqa: BLE001
            slug = "name not read: database error"
        return f"site {site_id} ({slug})"

    def retry(self, *args, exc=None, **kwargs):
        # Inline (no broker), Celery would hand the caller a Retry exception instead of the error; the
        # caller (a page, a command) gets the error itself at once and does not wait out a back-off.
        if exc is not None and self.request.is_eager and self.app.conf.task_eager_propagates:
            raise exc
        return super().retry(*args, exc=exc, **kwargs)


def each_site(*task_names: str, sites=None) -> int:
    """Send the named tasks, in order, for every site (or each of ``sites``), one chain per site; return the
    number of sites."""
    from observatory_ops.registry.models import Site

    site_ids = (
        list(Site.objects.order_by("pk").values_list("pk", flat=True)) if sites is None else [s.pk for s in sites]
    )
    for site_id in site_ids:
        chain(*(app.signature(name, args=(site_id,), immutable=True) for name in task_names)).delay()
    return len(site_ids)
