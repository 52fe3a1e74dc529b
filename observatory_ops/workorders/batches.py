"""The weekly work-order batch: one PDF per site and week with every issued work order planned for it.

Written by the ``workorders.work_order_batch_build`` task (weekly, see ``CELERY_BEAT_SCHEDULE``) to
``DATA_DIR/batches/<site slug>/<ISO year>-W<ISO week>.pdf``. Building the same week again replaces the
file whole, so a repeated or retried run leaves exactly one, current, batch.
"""
from __future__ import annotations

import datetime as dt
import os
import tempfile
from pathlib import Path

from django.conf import settings

from observatory_ops.registry.models import Site

from . import pdf, selectors


def coming_monday(day: dt.date) -> dt.date:
    """The Monday on or after ``day``: the first day of the week a batch is printed for."""
    return day + dt.timedelta(days=(7 - day.weekday()) % 7)


def batch_path(site: Site, week_start: dt.date) -> Path:
    year, week, _ = week_start.isocalendar()
    return Path(settings.DATA_DIR) / "batches" / site.slug / f"{year}-W{week:02d}.pdf"


def work_order_batch_write(site: Site, week_start: dt.date, paper: str = "A4") -> tuple[Path, int]:
    """Write the batch of work orders issued and still to do planned for the week from ``week_start`` (a Monday).

    Returns the file and the number of work orders in it. With none, no file is left for that week (a
    batch written earlier for it, whose orders have since been withdrawn, is removed).
    """
    if week_start.weekday() != 0:
        raise ValueError(f"a batch week starts on a Monday; {week_start.isoformat()} is a {week_start:%A}")
    path = batch_path(site, week_start)
    orders = list(
        selectors.issued_between(site, week_start, week_start + dt.timedelta(days=6)).select_related(
            "site", "telescope", "assignee"
        )
    )
    if not orders:
        path.unlink(missing_ok=True)
        return path, 0
    data = pdf.render_batch([selectors.sheet(o, settings.SITE_URL + o.get_absolute_url()) for o in orders], paper,
                            (week_start, week_start + dt.timedelta(days=6)))
    path.parent.mkdir(parents=True, exist_ok=True)
    # Write beside the target, then rename over it: a reader never sees half a file.
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=".", suffix=".pdf")
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(data)
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return path, len(orders)
