"""WSGI entry point (gunicorn observatory_ops.wsgi)."""
import os

from django.core.wsgi import get_wsgi_application

from observatory_ops.startup import freeze_loaded_objects

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "observatory_ops.settings")
application = get_wsgi_application()
freeze_loaded_objects()
