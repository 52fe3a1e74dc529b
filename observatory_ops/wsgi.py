"""WSGI entry point (gunicorn observatory_ops.wsgi).

It serves a deployment: with DEBUG on (the default when neither DEBUG nor SECRET_KEY is set, for the README's two
commands) it refuses to start, since every error page would then show settings and code and the key would be the
development one everybody can read (a security review lost both lines from an environment file). OBSOPS_SERVE_DEBUG=1
serves a development setup through it all the same.
"""
import os

from django.conf import settings
from django.core.exceptions import ImproperlyConfigured
from django.core.wsgi import get_wsgi_application

from observatory_ops.startup import freeze_loaded_objects

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "observatory_ops.settings")
if settings.DEBUG and os.environ.get("OBSOPS_SERVE_DEBUG") != "1":
    raise ImproperlyConfigured(
        "observatory_ops.wsgi serves a deployment, and DEBUG is on: write DEBUG=0 and a SECRET_KEY of its own in the "
        "environment file every process reads (README, Deployment). OBSOPS_SERVE_DEBUG=1 serves a development setup "
        "through it anyway."
    )
application = get_wsgi_application()
freeze_loaded_objects()
