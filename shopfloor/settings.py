"""Settings for the shop-floor service: one module, every value from the environment.

Defaults give the embedded first-run mode (SQLite under var/, Celery tasks run eagerly
in-process). Production (DEBUG off) refuses to start without a real SECRET_KEY and
ALLOWED_HOSTS. See README "Configuration" for every variable.
"""

from __future__ import annotations

import logging
from pathlib import Path

from django.core.exceptions import ImproperlyConfigured
from django.utils.csp import CSP

from shopfloor.env import database_from_url, env_bool, env_int, env_list, env_str

BASE_DIR = Path(__file__).resolve().parent.parent
VAR_DIR = BASE_DIR / "var"

DEBUG = env_bool("DEBUG", False)

_secret = env_str("SECRET_KEY")
if not _secret:
    if not DEBUG:
        raise ImproperlyConfigured(
            "SECRET_KEY is not set. Production (DEBUG off) needs a long random value; "
            "for a local first run set DEBUG=1 to use the development key."
        )
    # The development key, only ever with DEBUG on (production refuses to start above).
    _secret = "dev-only-insecure-key-do-not-use-in-production-0123456789abcdef"  # noqa: S105
SECRET_KEY: str = _secret

ALLOWED_HOSTS = env_list("ALLOWED_HOSTS", ["localhost", "127.0.0.1", "[::1]"] if DEBUG else [])
if not DEBUG and not ALLOWED_HOSTS:
    raise ImproperlyConfigured("ALLOWED_HOSTS is empty; name the host names this service answers")
CSRF_TRUSTED_ORIGINS = env_list("CSRF_TRUSTED_ORIGINS", [])

INSTALLED_APPS = [
    "django.contrib.admin",
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "django.contrib.staticfiles",
    "rest_framework",
    "drf_spectacular",
    "drf_spectacular_sidecar",  # Swagger UI served from our own static files (CSP: 'self')
    "django_htmx",
    "shopfloor.audit",
    "shopfloor.plant",
    "routing",
    "shopfloor.floor",
    "shopfloor.quality",
    "shopfloor.planning",
    "shopfloor.chemistry",
    "shopfloor.orders",
    "shopfloor.shipping",
]

MIDDLEWARE = [
    # First, so a database outage met by any later middleware (sessions, auth) is a 503.
    "shopfloor.middleware.DatabaseUnavailableMiddleware",
    "django.middleware.security.SecurityMiddleware",
    "django.middleware.csp.ContentSecurityPolicyMiddleware",
    # /healthz answers here: before host validation (CommonMiddleware), sessions and auth.
    "shopfloor.health.HealthCheckMiddleware",
    "whitenoise.middleware.WhiteNoiseMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    # A NUL in the URL, query or a form field is a 400 before any view (PostgreSQL refuses it).
    "shopfloor.input_guard.RejectNulMiddleware",
    "shopfloor.floor.middleware.IdleTimeoutMiddleware",
    # After auth and the idle logout: the person's language on /floor/ pages.
    "shopfloor.floor.language.PersonLanguageMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
    "django_htmx.middleware.HtmxMiddleware",
]

ROOT_URLCONF = "shopfloor.urls"
WSGI_APPLICATION = "shopfloor.wsgi.application"

TEMPLATES = [
    {
        "BACKEND": "django.template.backends.django.DjangoTemplates",
        "DIRS": [BASE_DIR / "templates"],
        "APP_DIRS": True,
        "OPTIONS": {
            "context_processors": [
                "django.template.context_processors.request",
                "django.template.context_processors.csp",
                "django.contrib.auth.context_processors.auth",
                "django.contrib.messages.context_processors.messages",
                "shopfloor.context.site",
                "shopfloor.display.context",
            ],
        },
    }
]

_default_db = f"sqlite:///{VAR_DIR / 'shopfloor.sqlite3'}"
DATABASE_URL = env_str("DATABASE_URL", _default_db) or _default_db
DATABASES = {"default": database_from_url(DATABASE_URL)}
DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator"},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
]
PASSWORD_HASHERS = [
    "django.contrib.auth.hashers.PBKDF2PasswordHasher",
    "shopfloor.plant.hashers.PinHasher",
]
LOGIN_URL = "/floor/login/"
LOGIN_REDIRECT_URL = "/"

# Languages (README "Languages"): the tablet pages and the traveller are translated; a
# person's language is `Person.language` (shopfloor.floor.middleware.PersonLanguageMiddleware
# turns it on for /floor/ pages only). English formats are ISO dates and a decimal point
# (shopfloor/formats/en); Spanish uses Django's own formats (dd/mm/yyyy, decimal comma).
LANGUAGE_CODE = "en"
LANGUAGES = [("en", "English"), ("es", "Español")]
USE_I18N = True
LOCALE_PATHS = [BASE_DIR / "locale"]
FORMAT_MODULE_PATH = ["shopfloor.formats"]
USE_TZ = True
TIME_ZONE = "UTC"  # stored and processed in UTC
SITE_TIME_ZONE = env_str("SITE_TIME_ZONE", "UTC") or "UTC"  # shown to people

STATIC_URL = "/static/"
STATIC_ROOT = VAR_DIR / "static"
STATICFILES_DIRS = [BASE_DIR / "shopfloor" / "static"]
# Files served at the site root (the favicon browsers ask for at /favicon.ico).
WHITENOISE_ROOT = BASE_DIR / "shopfloor" / "root_files"
STORAGES = {
    "default": {"BACKEND": "django.core.files.storage.FileSystemStorage"},
    "staticfiles": {
        "BACKEND": "whitenoise.storage.CompressedStaticFilesStorage"
        if not DEBUG
        else "django.contrib.staticfiles.storage.StaticFilesStorage"
    },
}

# Sessions: a tablet left logged in at a work center must ask for the badge again.
SESSION_IDLE_TIMEOUT_SECONDS = env_int("SESSION_IDLE_TIMEOUT_SECONDS", 15 * 60, minimum=60)
SESSION_COOKIE_AGE = 12 * 3600
PIN_MAX_FAILURES = env_int("PIN_MAX_FAILURES", 5, minimum=1)
# Sign-in throttling (shopfloor.throttle; counts kept in the database for every process).
LOGIN_THROTTLE_WINDOW_SECONDS = env_int("LOGIN_THROTTLE_WINDOW_SECONDS", 15 * 60, minimum=10)
LOGIN_BLOCK_SECONDS = env_int("LOGIN_BLOCK_SECONDS", 15 * 60, minimum=10)
LOGIN_FAILURES_PER_IP = env_int("LOGIN_FAILURES_PER_IP", 20, minimum=1)
LOGIN_FAILURES_PER_BADGE = env_int("LOGIN_FAILURES_PER_BADGE", PIN_MAX_FAILURES, minimum=1)
ADMIN_LOGIN_MAX_FAILURES = env_int("ADMIN_LOGIN_MAX_FAILURES", 5, minimum=1)
# Behind a proxy: the request header (WSGI name, e.g. HTTP_X_REAL_IP) with the client address.
CLIENT_IP_HEADER = env_str("CLIENT_IP_HEADER", "") or ""

SECURE_PROXY_SSL_HEADER = ("HTTP_X_FORWARDED_PROTO", "https")
if not DEBUG:
    SECURE_SSL_REDIRECT = env_bool("SECURE_SSL_REDIRECT", True)
    # The container healthcheck calls http://127.0.0.1:8000/healthz inside the network.
    SECURE_REDIRECT_EXEMPT = [r"^healthz$"]
    SESSION_COOKIE_SECURE = True
    CSRF_COOKIE_SECURE = True
    SECURE_HSTS_SECONDS = env_int("SECURE_HSTS_SECONDS", 31536000)
    SECURE_HSTS_INCLUDE_SUBDOMAINS = True
    SECURE_HSTS_PRELOAD = True
    SECURE_CONTENT_TYPE_NOSNIFF = True
X_FRAME_OPTIONS = "DENY"

# Content-Security-Policy (Django's built-in middleware), on every response in every mode:
# scripts and styles only from our own static files, or inline with this response's nonce
# ({{ csp_nonce }} in templates); no inline event handlers, no eval, no plug-ins, no
# framing, forms post only to us. Images: ours plus data: URIs (inline SVG charts and QR
# codes need neither). DEVELOPERS.md "Templates under the CSP" says how to write pages.
SECURE_CSP = {
    "default-src": [CSP.SELF],
    "script-src": [CSP.SELF, CSP.NONCE],
    "style-src": [CSP.SELF, CSP.NONCE],
    "img-src": [CSP.SELF, "data:"],
    "font-src": [CSP.SELF],
    "connect-src": [CSP.SELF],
    "object-src": [CSP.NONE],
    "base-uri": [CSP.NONE],
    "frame-ancestors": [CSP.NONE],
    "form-action": [CSP.SELF],
}

REST_FRAMEWORK = {
    "DEFAULT_AUTHENTICATION_CLASSES": [
        "shopfloor.floor.api_auth.InstrumentTokenAuthentication",
        "rest_framework.authentication.SessionAuthentication",
    ],
    "DEFAULT_PERMISSION_CLASSES": ["rest_framework.permissions.IsAuthenticated"],
    "DEFAULT_SCHEMA_CLASS": "drf_spectacular.openapi.AutoSchema",
    "EXCEPTION_HANDLER": "shopfloor.api_errors.exception_handler",
    # Strict JSON: deep nesting, 1e400, NaN and NUL are a 400 (shopfloor.strict_json).
    "DEFAULT_PARSER_CLASSES": [
        "shopfloor.api_parsers.StrictJSONParser",
        "shopfloor.api_parsers.NulSafeFormParser",
        "shopfloor.api_parsers.NulSafeMultiPartParser",
    ],
    "DEFAULT_PAGINATION_CLASS": "rest_framework.pagination.LimitOffsetPagination",
    "PAGE_SIZE": 100,
}
API_DOCS_PUBLIC = env_bool("API_DOCS_PUBLIC", DEBUG)
SPECTACULAR_SETTINGS = {
    "TITLE": "Shop-floor traveller API",
    "DESCRIPTION": "Routing preview, lot status, readings and step sign-off for PCB fabrication.",
    "VERSION": "1",
    "SERVE_INCLUDE_SCHEMA": False,
    # The API description is for signed-in people and token holders unless opened on
    # purpose (API_DOCS_PUBLIC; open by default only in development).
    "SERVE_PERMISSIONS": ["rest_framework.permissions.AllowAny"]
    if API_DOCS_PUBLIC
    else ["rest_framework.permissions.IsAuthenticated"],
    # Self-hosted Swagger UI (no CDN), so the CSP can stay at 'self'.
    "SWAGGER_UI_DIST": "SIDECAR",
    "SWAGGER_UI_FAVICON_HREF": "SIDECAR",
    "REDOC_DIST": "SIDECAR",
    "COMPONENT_SPLIT_REQUEST": True,
}

# Celery: with no REDIS_URL the tasks run eagerly in this process (embedded first run).
REDIS_URL = env_str("REDIS_URL") or ""
CELERY_TASK_ALWAYS_EAGER = not REDIS_URL
CELERY_TASK_EAGER_PROPAGATES = True
CELERY_BROKER_URL = REDIS_URL or "memory://"
CELERY_RESULT_BACKEND = None
CELERY_TASK_IGNORE_RESULT = True
CELERY_TASK_ACKS_LATE = True
CELERY_TASK_REJECT_ON_WORKER_LOST = True
CELERY_WORKER_PREFETCH_MULTIPLIER = 1
CELERY_BROKER_CONNECTION_RETRY_ON_STARTUP = True
# Redis redelivers a task nobody acknowledged after visibility_timeout; kombu sweeps for
# such messages every unacked_restore_interval seconds (lower them only for fault tests).
CELERY_BROKER_TRANSPORT_OPTIONS = {
    "visibility_timeout": env_int("CELERY_VISIBILITY_TIMEOUT", 300, minimum=1),
    "unacked_restore_interval": env_int("CELERY_UNACKED_RESTORE_INTERVAL", 100, minimum=1),
}
CELERY_DB_REUSE_MAX = 200
# The relay re-publishes an event published this long ago but still not processed.
OUTBOX_REPUBLISH_AFTER_SECONDS = env_int("OUTBOX_REPUBLISH_AFTER_SECONDS", 120, minimum=5)
BENCH_ENDPOINTS = env_bool("BENCH_ENDPOINTS", False)  # ./dev bench only
OUTBOX_RELAY_SECONDS = env_int("OUTBOX_RELAY_SECONDS", 15, minimum=1)
# The sealing task chains new audit entries this often; `audit verify` reports entries
# left unsealed for longer than the bound (a stopped beat or a transaction left open).
AUDIT_SEAL_SECONDS = env_int("AUDIT_SEAL_SECONDS", 2, minimum=1)
AUDIT_SEAL_MAX_DELAY_SECONDS = env_int("AUDIT_SEAL_MAX_DELAY_SECONDS", 600, minimum=1)
# Finish forecasts (shopfloor/planning): how often beat re-runs the floor simulation, its
# Monte Carlo replications, how many processes share them, and how old a forecast may be
# before the board falls back to the flow-factor rule.
FORECAST_EVERY_SECONDS = env_int("FORECAST_EVERY_SECONDS", 300, minimum=30)
FORECAST_REPLICATIONS = env_int("FORECAST_REPLICATIONS", 100, minimum=10)
FORECAST_PROCESSES = env_int("FORECAST_PROCESSES", 2, minimum=1)
FORECAST_STALE_MINUTES = env_int("FORECAST_STALE_MINUTES", 60, minimum=5)

CELERY_BEAT_SCHEDULE = {
    "relay-outbox": {
        "task": "shopfloor.quality.tasks.relay_outbox",
        "schedule": float(OUTBOX_RELAY_SECONDS),
    },
    "seal-audit": {
        "task": "shopfloor.quality.tasks.seal_audit",
        "schedule": float(AUDIT_SEAL_SECONDS),
        # A pass queued while no worker ran is pointless later: the next one does it all.
        "options": {"expires": float(AUDIT_SEAL_SECONDS * 5)},
    },
    "check-queue-times": {"task": "shopfloor.quality.tasks.check_queue_times", "schedule": 60.0},
    "check-due-dates": {"task": "shopfloor.quality.tasks.check_due_dates", "schedule": 900.0},
    "forecast-finishes": {
        "task": "shopfloor.planning.tasks.run_forecast",
        "schedule": float(FORECAST_EVERY_SECONDS),
    },
    "check-bath-analyses": {
        "task": "shopfloor.quality.tasks.check_bath_analyses",
        "schedule": 300.0,
    },
}

# Mail (Django 6.1 MAILERS); alerts go to each work center's notification list.
_mail_backend = (
    env_str(
        "MAIL_BACKEND",
        "django.core.mail.backends.console.EmailBackend"
        if DEBUG
        else "django.core.mail.backends.smtp.EmailBackend",
    )
    or ""
)
_mail_options: dict[str, object] = {}
if _mail_backend.endswith("smtp.EmailBackend"):
    _mail_options = {
        "host": env_str("MAIL_HOST", "localhost"),
        "port": env_int("MAIL_PORT", 587),
        "username": env_str("MAIL_USER", "") or "",
        "password": env_str("MAIL_PASSWORD", "") or "",
        "use_tls": env_bool("MAIL_USE_TLS", True),
        "timeout": 10,
    }
elif _mail_backend.endswith("filebased.EmailBackend"):  # the demo: one file per message
    _mail_options = {"file_path": env_str("MAIL_FILE_PATH", str(VAR_DIR / "mail"))}
MAILERS = {"default": {"BACKEND": _mail_backend, "OPTIONS": _mail_options}}
DEFAULT_FROM_EMAIL = env_str("DEFAULT_FROM_EMAIL", "shopfloor@localhost")
ALERT_WEBHOOK_URL = env_str("ALERT_WEBHOOK_URL", "") or ""
ALERT_WEBHOOK_SECRET = env_str("ALERT_WEBHOOK_SECRET", "") or ""

LOGGING = {
    "version": 1,
    "disable_existing_loggers": False,
    "formatters": {"plain": {"format": "%(asctime)s %(levelname)s %(name)s: %(message)s"}},
    "handlers": {"console": {"class": "logging.StreamHandler", "formatter": "plain"}},
    "root": {"handlers": ["console"], "level": env_str("LOG_LEVEL", "INFO")},
    "loggers": {
        "django.db.backends": {"level": "WARNING"},
        # runserver's request lines follow LOG_LEVEL too (the demo keeps only 4xx/5xx).
        "django.server": {"level": env_str("LOG_LEVEL", "INFO")},
        # Eager tasks (no REDIS_URL) never reach a broker; kombu's "no hostname" note is noise.
        "kombu.connection": {"level": "ERROR" if not REDIS_URL else "WARNING"},
    },
}

if CELERY_TASK_ALWAYS_EAGER:
    logging.getLogger("shopfloor").info(
        "REDIS_URL is not set: Celery tasks run eagerly in this process (embedded mode)"
    )
