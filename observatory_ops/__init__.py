"""observatory_ops: maintenance and service-schedule tracking for small observatories."""
from .celery import app as celery_app

__all__ = ("celery_app",)
