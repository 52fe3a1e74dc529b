"""Once per worker process, after start-up: keep long-lived objects out of the cyclic garbage collector.

A worker (gunicorn's, Celery's) loads Django, the apps, numpy, scipy and astropy: a few hundred thousand
objects that live as long as the process. Python's cyclic collector walks every one of them on each full
collection, and a site recompute makes enough short-lived objects to set one off now and then: about a
tenth of a recompute went there (benchmarks/README.md). ``gc.freeze()`` moves what exists now into a
permanent generation that collections skip; nothing is leaked, since these objects were never going to
be freed. Called by ``wsgi.py`` and, in the Celery worker, on ``worker_init`` (before the pool's
processes are forked, so they start frozen).
"""
from __future__ import annotations

import gc


def freeze_loaded_objects() -> None:
    """Collect once, then freeze everything still alive (the modules and their objects)."""
    import django
    from django.apps import apps

    if not apps.ready:
        django.setup()
    from observatory_ops.planning import services  # noqa: F401  # loads numpy and the calc modules first

    gc.collect()
    gc.freeze()
