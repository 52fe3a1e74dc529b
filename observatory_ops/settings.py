"""Settings for observatory_ops, read from the environment.

Environment variables
---------------------
DEBUG            "1"/"true" for development (the default); "0" in production (see README, Deployment).
SECRET_KEY       required when DEBUG is off; a development key is used only when it is not set and DEBUG is
                 on. An installation with a key of its own is treated as production (``demo`` refuses it).
OBSOPS_DATA_DIR  where the SQLite file, the weekly work-order batches and the beat schedule live (default:
                 the git-ignored ``data/`` folder beside ``manage.py``).
DATABASE_URL     default: a SQLite file in OBSOPS_DATA_DIR.
ALLOWED_HOSTS    comma-separated host names.
CSRF_TRUSTED_ORIGINS  comma-separated origins (scheme and host, e.g. https://observatory.example.org) whose
                 forms are accepted besides the page's own host; default none.
USE_X_FORWARDED_HOST  "1" to take the host from the proxy's X-Forwarded-Host header (default off: the proxy
                 passes the public Host header itself).
OBSOPS_TRUSTED_PROXIES  how many reverse proxies stand in front of the web processes (default 0): sign-in
                 limits then count the address in X-Forwarded-For that many hops from the right.
STATIC_ROOT      where `collectstatic` gathers the static files and whitenoise serves them from
                 (default: ``staticfiles/`` beside ``manage.py``).
CELERY_BROKER_URL  e.g. redis://127.0.0.1:6379/0; without it tasks run inline.
CELERY_RESULT_BACKEND  optional, e.g. redis://127.0.0.1:6379/1; without it task results are not kept.
CELERY_VISIBILITY_TIMEOUT  seconds before Redis hands an unacknowledged task to another worker (3600).
CACHE_URL        e.g. redis://127.0.0.1:6379/2; default: memory of each process.
EMAIL_BACKEND, EMAIL_HOST, EMAIL_PORT, EMAIL_HOST_USER, EMAIL_HOST_PASSWORD, EMAIL_USE_TLS, EMAIL_USE_SSL,
DEFAULT_FROM_EMAIL  outgoing mail (due digests); default: printed on the console.
EMAIL_TIMEOUT    seconds to wait for the mail server at each step before giving up (30).
SITE_URL         address the pages are served at, for links in e-mails and QR codes (http://127.0.0.1:8000).
SECURE_SSL_REDIRECT  with DEBUG off, "0" when the proxy in front already sends plain HTTP to HTTPS (default on).
SECURE_HSTS_SECONDS  with DEBUG off, how long browsers keep to HTTPS (31536000, a year).
LOG_LEVEL        the console log's level: DEBUG, INFO, WARNING (the default), ERROR or CRITICAL.
OBSOPS_DIGEST_HOUR  the hour of each site's day from which its due digest goes out (6).
OBSOPS_SERVE_DEBUG  "1" lets the WSGI application (gunicorn) serve with DEBUG on, for a development setup only
                 (``wsgi.py`` refuses otherwise).
A whole-number variable that is not one stops start-up with a message naming it.
"""
import os
from pathlib import Path

import dj_database_url
from celery.schedules import crontab

BASE_DIR = Path(__file__).resolve().parent.parent
DATA_DIR = Path(os.environ.get("OBSOPS_DATA_DIR", BASE_DIR / "data"))


def _env_flag(name: str, default: bool) -> bool:
    value = os.environ.get(name)
    if value is None:
        return default
    return value.strip().lower() in {"1", "true", "yes", "on"}


def _env_count(name: str, default: int, minimum: int = 0) -> int:
    """A whole number of at least ``minimum`` from the environment; a refusal naming the variable otherwise."""
    value = os.environ.get(name, "").strip()
    if not value:
        return default
    if not (value.isascii() and value.isdigit()) or int(value) < minimum:
        raise RuntimeError(f"{name} must be a whole number of {minimum} or more, not {value!r}.")
    return int(value)


def _env_choice(name: str, default: str, choices: tuple[str, ...]) -> str:
    """One of ``choices`` from the environment, capitals aside; a refusal naming the variable otherwise."""
    value = os.environ.get(name, "").strip().upper() or default
    if value not in choices:
        raise RuntimeError(f"{name} must be one of {', '.join(choices)}, not {os.environ.get(name)!r}.")
    return value


def _env_list(name: str, default: str = "") -> list[str]:
    return [item.strip() for item in os.environ.get(name, default).split(",") if item.strip()]


# DEBUG is on unless turned off, for the README's two commands; a key of one's own says a deployment, where a
# forgotten DEBUG=0 would show settings and code on every error page: refused rather than guessed.
if os.environ.get("SECRET_KEY") and os.environ.get("DEBUG") is None:
    raise RuntimeError(
        "SECRET_KEY is set but DEBUG is not: write DEBUG=0 in a deployment's environment (README, Deployment), or "
        "DEBUG=1 to develop with a key of your own."
    )
DEBUG = _env_flag("DEBUG", True)

# A fixed key is acceptable only with DEBUG on and no key set (bandit B105 is accepted for this line).
DEVELOPMENT_SECRET_KEY = "development-only-key-not-for-production"  # noqa: S105  # nosec B105
SECRET_KEY = os.environ.get("SECRET_KEY", "")
if not SECRET_KEY:
    if not DEBUG:
        raise RuntimeError("SECRET_KEY must be set when DEBUG is off.")
    SECRET_KEY = DEVELOPMENT_SECRET_KEY

ALLOWED_HOSTS = _env_list("ALLOWED_HOSTS", "127.0.0.1,localhost")
if DEBUG:
    ALLOWED_HOSTS += ["testserver"]
CSRF_TRUSTED_ORIGINS = _env_list("CSRF_TRUSTED_ORIGINS")
USE_X_FORWARDED_HOST = _env_flag("USE_X_FORWARDED_HOST", False)
#: Reverse proxies in front of the web processes, each appending the address it saw to X-Forwarded-For;
#: the sign-in limits (access/login.py) count the client address that many hops from the right.
TRUSTED_PROXIES = _env_count("OBSOPS_TRUSTED_PROXIES", 0)

INSTALLED_APPS = [
    "observatory_ops.admin_site.ObservatoryAdminConfig",  # django.contrib.admin, with the project's admin site
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "whitenoise.runserver_nostatic",
    "django.contrib.staticfiles",
    "django_tables2",
    "django_filters",
    "simple_history",
    "observatory_ops.access",
    "observatory_ops.registry",
    "observatory_ops.logbook",
    "observatory_ops.planning",
    "observatory_ops.workorders",
    "observatory_ops.mirrors",
    "observatory_ops.reliability",
    "observatory_ops.api",
    "observatory_ops.archive",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    "observatory_ops.content_policy.ContentPolicyMiddleware",
    "whitenoise.middleware.WhiteNoiseMiddleware",
    "observatory_ops.upload_limit.UploadLimitMiddleware",  # before anything reads the body (the CSRF check does)
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "observatory_ops.archive.middleware.history_middleware",
    "observatory_ops.api.middleware.ApiJsonErrors",  # before DatabaseBusy: a locked database stays a 503
    "observatory_ops.database_busy.DatabaseBusyMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
]

ROOT_URLCONF = "observatory_ops.urls"

TEMPLATES = [
    {
        "BACKEND": "django.template.backends.django.DjangoTemplates",
        "DIRS": [BASE_DIR / "observatory_ops" / "templates"],
        "APP_DIRS": True,
        "OPTIONS": {
            "context_processors": [
                "django.template.context_processors.request",
                "django.contrib.auth.context_processors.auth",
                "django.contrib.messages.context_processors.messages",
                "observatory_ops.access.context.roles",
            ],
        },
    },
]

# No WSGI_APPLICATION: runserver (the demo) builds its own handler, and observatory_ops.wsgi, which gunicorn serves,
# refuses to start with DEBUG on.

DATA_DIR.mkdir(parents=True, exist_ok=True)
DATABASE_URL_GIVEN = bool(os.environ.get("DATABASE_URL"))  # read by the deploy checks (planning/checks.py)
DATABASES = {
    "default": dj_database_url.parse(
        os.environ.get("DATABASE_URL", f"sqlite:///{DATA_DIR / 'observatory_ops.sqlite3'}"),
        conn_max_age=60,
        # A connection kept across requests is checked before use: after a database restart the next request of each
        # web worker failed with a 500 (an operator review).
        conn_health_checks=True,
    )
}
if DATABASES["default"]["ENGINE"] == "django.db.backends.sqlite3":
    # Wait for a competing writer instead of failing at once with "database is locked".
    # Start write transactions with the write lock (IMMEDIATE), so two writers queue for it instead of one
    # failing part-way with "database is locked"; wait up to 20 s for it.
    DATABASES["default"].setdefault("OPTIONS", {}).update(timeout=20, transaction_mode="IMMEDIATE")
    DATABASES["default"]["CONN_MAX_AGE"] = 0

DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.UserAttributeSimilarityValidator"},
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator", "OPTIONS": {"min_length": 10}},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
    {"NAME": "django.contrib.auth.password_validation.NumericPasswordValidator"},
]

LOGIN_URL = "login"
LOGIN_REDIRECT_URL = "home"
LOGOUT_REDIRECT_URL = "login"

LANGUAGE_CODE = "en"  # its input formats start with ISO dates, which <input type="date"> needs
FORMAT_MODULE_PATH = ["observatory_ops.formats"]  # dates shown as "23 Mar 2027" (formats/en/formats.py)
TIME_ZONE = "UTC"  # stored and computed in UTC; pages show each site's own zone
USE_I18N = False
USE_TZ = True

STATIC_URL = "static/"
STATIC_ROOT = Path(os.environ.get("STATIC_ROOT") or BASE_DIR / "staticfiles")
STATIC_ROOT.mkdir(parents=True, exist_ok=True)  # whitenoise expects it even before collectstatic (git-ignored)
STATICFILES_DIRS = [BASE_DIR / "observatory_ops" / "static"]
STORAGES = {
    "default": {"BACKEND": "django.core.files.storage.FileSystemStorage"},
    "staticfiles": {
        "BACKEND": "django.contrib.staticfiles.storage.StaticFilesStorage"
        if DEBUG
        else "whitenoise.storage.CompressedManifestStaticFilesStorage"
    },
}

# Uploads (CSV of nights) are read into memory up to this size and refused above it.
NIGHTS_UPLOAD_MAX_BYTES = 5 * 1024 * 1024
DATA_UPLOAD_MAX_MEMORY_SIZE = NIGHTS_UPLOAD_MAX_BYTES
FILE_UPLOAD_MAX_MEMORY_SIZE = NIGHTS_UPLOAD_MAX_BYTES
# A multipart body declared over this is refused before it is read (upload_limit.py): the largest file with the
# form around it, as nginx's client_max_body_size (README, Deployment).
REQUEST_UPLOAD_MAX_BYTES = NIGHTS_UPLOAD_MAX_BYTES + 1024 * 1024

DJANGO_TABLES2_TEMPLATE = "django_tables2/table.html"

SITE_URL = os.environ.get("SITE_URL", "http://127.0.0.1:8000").rstrip("/")

# --- e-mail (due digests) ---------------------------------------------------------------------------
EMAIL_BACKEND = os.environ.get("EMAIL_BACKEND") or "django.core.mail.backends.console.EmailBackend"
EMAIL_HOST = os.environ.get("EMAIL_HOST", "localhost")
EMAIL_PORT = _env_count("EMAIL_PORT", 25, minimum=1)
EMAIL_HOST_USER = os.environ.get("EMAIL_HOST_USER", "")
EMAIL_HOST_PASSWORD = os.environ.get("EMAIL_HOST_PASSWORD", "")
EMAIL_USE_TLS = _env_flag("EMAIL_USE_TLS", False)  # STARTTLS, usually on port 587
EMAIL_USE_SSL = _env_flag("EMAIL_USE_SSL", False)  # TLS from the first byte, usually on port 465
# Without a timeout a server that accepts the connection but never answers holds the digest for ever.
EMAIL_TIMEOUT = _env_count("EMAIL_TIMEOUT", 30, minimum=1)
DEFAULT_FROM_EMAIL = os.environ.get("DEFAULT_FROM_EMAIL", "observatory_ops <observatory-ops@localhost>")
SERVER_EMAIL = DEFAULT_FROM_EMAIL

# --- cache: shared through Redis when several processes must agree (one digest a day per site) --------
CACHE_URL = os.environ.get("CACHE_URL", "")
CACHES = {
    "default": {"BACKEND": "django.core.cache.backends.redis.RedisCache", "LOCATION": CACHE_URL}
    if CACHE_URL
    else {"BACKEND": "django.core.cache.backends.locmem.LocMemCache"}
}

# --- background work (observatory_ops/celery.py) ----------------------------------------------------
CELERY_BROKER_URL = os.environ.get("CELERY_BROKER_URL") or None
if CELERY_BROKER_URL and "://" not in CELERY_BROKER_URL:  # taken by Celery as a host name, failing on the first task
    raise RuntimeError(f"CELERY_BROKER_URL must name its scheme, e.g. redis://127.0.0.1:6379/0, not "
                       f"{CELERY_BROKER_URL!r}.")
# Without a broker every task runs inline in the calling process and its errors reach the caller.
CELERY_TASK_ALWAYS_EAGER = CELERY_BROKER_URL is None
CELERY_TASK_EAGER_PROPAGATES = CELERY_TASK_ALWAYS_EAGER
CELERY_RESULT_BACKEND = os.environ.get("CELERY_RESULT_BACKEND") or None
CELERY_TASK_IGNORE_RESULT = CELERY_RESULT_BACKEND is None
CELERY_TASK_SERIALIZER = "json"
CELERY_ACCEPT_CONTENT = ["json"]
# A task is acknowledged when it has finished, so a worker that dies mid-task (killed, machine lost)
# leaves it to run again elsewhere; one task at a time per process, so none waits behind a long one.
CELERY_TASK_ACKS_LATE = True
CELERY_TASK_REJECT_ON_WORKER_LOST = True
CELERY_WORKER_PREFETCH_MULTIPLIER = 1
CELERY_WORKER_CANCEL_LONG_RUNNING_TASKS_ON_CONNECTION_LOSS = True
CELERY_BROKER_CONNECTION_RETRY_ON_STARTUP = True
# Must exceed the longest task plus its longest retry delay, or Redis hands a running task out twice.
CELERY_BROKER_TRANSPORT_OPTIONS = {"visibility_timeout": _env_count("CELERY_VISIBILITY_TIMEOUT", 3600, minimum=1)}
# No task waits for ever on a server that stopped answering. The slowest legitimate task (tasks work one site
# each) is a new site's first nights cache, median 1.6 s in benchmarks/bench_network.py, or a week's work-order
# PDFs at about 60 ms an order (bench_workorder_pdf.py); 5 minutes is a wide margin. At the soft limit the task
# gets an exception and its transaction is rolled back (the digest's day stays unsent for the next hourly
# run); a task still running a minute later has its process ended. Both stay far below the visibility timeout.
CELERY_TASK_SOFT_TIME_LIMIT = 300
CELERY_TASK_TIME_LIMIT = 360
CELERY_TIMEZONE = "UTC"
CELERY_BEAT_SCHEDULE_FILENAME = str(DATA_DIR / "celerybeat-schedule")  # when each entry last ran
#: The local hour (each site's own time zone) from which the day's due digest goes out: set in the environment, so an
#: upgrade's ``git pull`` keeps it (an operator review had to edit this file).
SITE_DIGEST_HOUR = _env_count("OBSOPS_DIGEST_HOUR", 6)
if SITE_DIGEST_HOUR > 23:
    raise RuntimeError(f"OBSOPS_DIGEST_HOUR must be an hour of the day, 0 to 23, not {SITE_DIGEST_HOUR}.")
CELERY_BEAT_SCHEDULE = {
    # Each ingest recomputes its own site at once. This, every hour, takes each site whose states were
    # computed before its today (so within the hour after its local midnight, and after any pause of the
    # workers), adds the next night to its nights cache and moves its calendar triggers and "today" forward.
    "site-new-day": {
        "task": "planning.sites_recompute_all",
        "schedule": crontab(minute=30),
        "kwargs": {"stale_only": True},
    },
    # Every hour: each site from SITE_DIGEST_HOUR local time on whose digest of the day is not sent yet.
    "site-due-digest": {
        "task": "planning.sites_due_digest_all",
        "schedule": crontab(minute=0),  # the task's hour is SITE_DIGEST_HOUR unless given
    },
    # Sunday 18:00 UTC is Sunday or early Monday at every site: each builds the week starting that Monday.
    "weekly-work-order-batch": {
        "task": "workorders.sites_work_order_batch_all",
        "schedule": crontab(day_of_week="sun", hour=18, minute=0),
    },
}

if not DEBUG:
    SESSION_COOKIE_SECURE = True
    CSRF_COOKIE_SECURE = True
    SECURE_SSL_REDIRECT = _env_flag("SECURE_SSL_REDIRECT", True)
    SECURE_HSTS_SECONDS = _env_count("SECURE_HSTS_SECONDS", 31536000)
    SECURE_HSTS_INCLUDE_SUBDOMAINS = True
    SECURE_HSTS_PRELOAD = True
    # Believed only from a proxy in front (a security review sent it to gunicorn facing the network, and plain
    # HTTP passed as HTTPS): with OBSOPS_TRUSTED_PROXIES at 0, gunicorn serves HTTPS itself (README, One machine).
    if TRUSTED_PROXIES:
        SECURE_PROXY_SSL_HEADER = ("HTTP_X_FORWARDED_PROTO", "https")

def _without_traceback(record) -> bool:
    """A logging filter: the message alone, its traceback dropped."""
    record.exc_info = record.exc_text = None
    return True


LOGGING = {
    "version": 1,
    "disable_existing_loggers": False,
    "filters": {"without_traceback": {"()": "django.utils.log.CallbackFilter", "callback": _without_traceback}},
    "handlers": {
        "console": {"class": "logging.StreamHandler"},
        "console_one_line": {"class": "logging.StreamHandler", "filters": ["without_traceback"]},
    },
    # A request for a host not in ALLOWED_HOSTS in one line ("Invalid HTTP_HOST header: ..."), not fifteen: scanners
    # calling the bare address filled the journal (a deployment review).
    "loggers": {"django.security.DisallowedHost": {"handlers": ["console_one_line"], "propagate": False}},
    "root": {"handlers": ["console"],
             "level": _env_choice("LOG_LEVEL", "WARNING", ("DEBUG", "INFO", "WARNING", "ERROR", "CRITICAL"))},
}
