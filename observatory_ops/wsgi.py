"""WSGI entry point (gunicorn observatory_ops.wsgi)."""
import os

from django.core.wsgi import get_wsgi_application

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "observatory_ops.settings")
application = get_wsgi_application()
