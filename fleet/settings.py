"""Holdfast settings, read from the environment with strict helpers.

Zero configuration gives a working local setup (a SQLite file in the project folder); every
value that matters in production comes from an environment variable listed in README.md.
"""

import datetime as dt
import os
from pathlib import Path
from typing import Any

import dj_database_url
import django_stubs_ext
from csp.constants import NONE, SELF
from django.core.exceptions import ImproperlyConfigured

# Lets classes such as ModelForm and ModelAdmin take the type arguments the stubs give them.
django_stubs_ext.monkeypatch()

BASE_DIR = Path(__file__).resolve().parent.parent

_TRUE = {"1", "true", "yes", "on"}
_FALSE = {"0", "false", "no", "off", ""}


def env_bool(name: str, default: bool) -> bool:
    raw = os.environ.get(name)
    if raw is None:
        return default
    value = raw.strip().lower()
    if value in _TRUE:
        return True
    if value in _FALSE:
        return False
    raise ImproperlyConfigured(
        f"{name} must be one of {sorted(_TRUE | _FALSE - {''})}, not {raw!r}"
    )


def env_int(name: str, default: int, *, minimum: int | None = None) -> int:
    raw = os.environ.get(name)
    if raw is None or raw.strip() == "":
        return default
    try:
        value = int(raw)
    except ValueError as exc:
        raise ImproperlyConfigured(f"{name} must be an integer, not {raw!r}") from exc
    if minimum is not None and value < minimum:
        raise ImproperlyConfigured(f"{name} must be at least {minimum}, not {value}")
    return value


def env_list(name: str, default: list[str]) -> list[str]:
    raw = os.environ.get(name)
    if raw is None:
        return default
    return [item.strip() for item in raw.split(",") if item.strip()]


DEBUG = env_bool("DEBUG", False)

SECRET_KEY = os.environ.get("SECRET_KEY", "")
if not SECRET_KEY:
    if not DEBUG:
        raise ImproperlyConfigured(
            "SECRET_KEY is not set. Set SECRET_KEY in the environment, or DEBUG=true for local use."
        )
    SECRET_KEY = "insecure-local-development-key-do-not-use-in-production"  # noqa: S105

ALLOWED_HOSTS = env_list("ALLOWED_HOSTS", ["127.0.0.1", "localhost"])
CSRF_TRUSTED_ORIGINS = env_list("CSRF_TRUSTED_ORIGINS", [])

INSTALLED_APPS = [
    "django.contrib.admin",
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "django.contrib.staticfiles",
    "django_tables2",
    "django_filters",
    "csp",
    # Before fleet: its permissions exist when fleet's post-migrate hook gives them to supervisors.
    "axes",
    "fleet",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    "whitenoise.middleware.WhiteNoiseMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    "django.contrib.auth.middleware.LoginRequiredMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
    "fleet.security.PageCSPMiddleware",
    # Last, as axes asks: it turns a locked-out sign-in into the lockout page.
    "axes.middleware.AxesMiddleware",
]

# The first backend refuses a locked-out user before the second checks the password.
AUTHENTICATION_BACKENDS = [
    "axes.backends.AxesStandaloneBackend",
    "django.contrib.auth.backends.ModelBackend",
]

ROOT_URLCONF = "fleet.urls"
WSGI_APPLICATION = "fleet.wsgi.application"

TEMPLATES = [
    {
        "BACKEND": "django.template.backends.django.DjangoTemplates",
        "DIRS": [BASE_DIR / "templates"],
        "APP_DIRS": True,
        "OPTIONS": {
            "context_processors": [
                "django.template.context_processors.request",
                "django.contrib.auth.context_processors.auth",
                "django.contrib.messages.context_processors.messages",
                "fleet.context_processors.role_flags",
                "fleet.context_processors.vessel_kit",
            ],
        },
    },
]

_SQLITE_PATH = BASE_DIR / "db.sqlite3"
_SQLITE_OPTIONS = {
    # Two technicians saving at once must never see "database is locked": take the write lock at
    # BEGIN (IMMEDIATE) and wait for it, and let readers run beside the writer (WAL).
    "transaction_mode": "IMMEDIATE",
    "init_command": "PRAGMA journal_mode=WAL; PRAGMA synchronous=NORMAL;",
    "timeout": 20,
}

# Also for the SQLite files a vessel kit opens beside the main database (fleet/kits/db.py).
HOLDFAST_SQLITE_OPTIONS = dict(_SQLITE_OPTIONS)

_database_url = os.environ.get("DATABASE_URL", "").strip()
DATABASES: dict[str, Any]
if _database_url:
    DATABASES = {"default": dj_database_url.parse(_database_url, conn_max_age=60)}
    if DATABASES["default"]["ENGINE"] == "django.db.backends.sqlite3":
        DATABASES["default"]["OPTIONS"] = dict(_SQLITE_OPTIONS)
    elif DATABASES["default"]["ENGINE"] == "django.db.backends.postgresql":
        # No just-in-time compilation: PostgreSQL compiles any statement its planner costs
        # above ``jit_above_cost``, which the fleet-wide counts reach; compiling took 80 of
        # the 140 ms of the overview's condition counts (5,000 units, EXPLAIN ANALYZE) and
        # pays off only for long analytic queries, which this application does not run.
        options = DATABASES["default"].setdefault("OPTIONS", {})
        options["options"] = f"{options.get('options', '')} -c jit=off".strip()
else:
    DATABASES = {
        "default": {
            "ENGINE": "django.db.backends.sqlite3",
            "NAME": _SQLITE_PATH,
            "OPTIONS": dict(_SQLITE_OPTIONS),
            # A file, not memory, so threaded tests share it; one per process so that two
            # test runs side by side never touch each other's database.
            "TEST": {"NAME": BASE_DIR / f"test-db-{os.getpid()}.sqlite3"},
        }
    }

DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.UserAttributeSimilarityValidator"},
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator"},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
    {"NAME": "django.contrib.auth.password_validation.NumericPasswordValidator"},
]

LOGIN_URL = "/accounts/login/"
LOGIN_REDIRECT_URL = "/"
LOGOUT_REDIRECT_URL = "/accounts/login/"

LANGUAGE_CODE = "en-gb"
TIME_ZONE = os.environ.get("TIME_ZONE", "UTC")
USE_I18N = True
USE_TZ = True

STATIC_URL = "static/"
STATICFILES_DIRS = [BASE_DIR / "static"]
STATIC_ROOT = BASE_DIR / "staticfiles"
# WhiteNoise serves the collected files with hashed names, compressed, cached for ever. The
# manifest exists only after collectstatic (make serve runs it); the test suite switches back to
# plain names (tests/conftest.py) and DEBUG uses plain names anyway.
STORAGES = {
    "default": {"BACKEND": "django.core.files.storage.FileSystemStorage"},
    "staticfiles": {"BACKEND": "whitenoise.storage.CompressedManifestStaticFilesStorage"},
}
MEDIA_URL = "media/"
MEDIA_ROOT = Path(os.environ.get("MEDIA_ROOT", str(BASE_DIR / "media")))
# Uploaded import files wait here, named by checksum, between the preview and the confirm.
IMPORT_STAGING_ROOT = Path(os.environ.get("IMPORT_STAGING_ROOT", str(BASE_DIR / "import-staging")))
# Vessel kit files made on the kits page, kept for download (named by kit code).
KIT_FILES_ROOT = Path(os.environ.get("KIT_FILES_ROOT", str(BASE_DIR / "kit-files")))

# Upload limits: workshop photos from a tablet camera, re-encoded on save.
FILE_UPLOAD_MAX_MEMORY_SIZE = 10 * 1024 * 1024
DATA_UPLOAD_MAX_MEMORY_SIZE = 12 * 1024 * 1024
PHOTO_MAX_BYTES = env_int("PHOTO_MAX_BYTES", 12 * 1024 * 1024, minimum=1024)

# HTTPS: one switch for a site served over TLS, normally by a proxy in front of gunicorn.
# It turns on the redirect to https, HSTS and secure cookies, and (unless
# TRUST_X_FORWARDED_PROTO=false, for a server that terminates TLS itself) trusts the proxy's
# X-Forwarded-Proto header, so that addresses the site prints (the verification link on a
# certificate) start with https://. Only trust that header when the proxy sets it on every
# request and no client can reach the app server directly.
HTTPS = env_bool("HTTPS", False)
if env_bool("TRUST_X_FORWARDED_PROTO", HTTPS):
    SECURE_PROXY_SSL_HEADER = ("HTTP_X_FORWARDED_PROTO", "https")
SECURE_SSL_REDIRECT = HTTPS
SECURE_HSTS_SECONDS = env_int("HSTS_SECONDS", 365 * 24 * 3600, minimum=0) if HTTPS else 0
SECURE_HSTS_INCLUDE_SUBDOMAINS = HTTPS
# Preloading is a promise the domain's owner makes to browser makers, not this app's choice:
# the header never asks for it, and the deploy check's reminder (W021) is silenced.
SECURE_HSTS_PRELOAD = False
SILENCED_SYSTEM_CHECKS = ["security.W021"]
SESSION_COOKIE_SECURE = env_bool("SECURE_COOKIES", HTTPS)
CSRF_COOKIE_SECURE = SESSION_COOKIE_SECURE
SESSION_COOKIE_HTTPONLY = True
# A workshop shift, not two weeks: a tablet left signed in on the bench signs itself out.
SESSION_COOKIE_AGE = env_int("SESSION_HOURS", 12, minimum=1) * 3600
X_FRAME_OPTIONS = "DENY"

# Content-Security-Policy (django-csp 4): everything from this site only, no inline script or
# style (templates link holdfast.css; charts are <img> of SVG files), no plugins, no framing.
# PDFs go without it (fleet.security.PageCSPMiddleware): Chrome's PDF viewer breaks under it.
CONTENT_SECURITY_POLICY = {
    "DIRECTIVES": {
        "default-src": [SELF],
        "script-src": [SELF],
        "style-src": [SELF],
        "img-src": [SELF],
        "font-src": [SELF],
        "connect-src": [SELF],
        "object-src": [NONE],
        "base-uri": [NONE],
        "form-action": [SELF],
        "frame-ancestors": [NONE],
        **({"upgrade-insecure-requests": True} if HTTPS else {}),
    },
}

# Sign-in throttling (django-axes): after LOGIN_FAILURE_LIMIT failed sign-ins for one user
# name, or from one address, that user name or address is refused for LOGIN_COOLOFF_MINUTES
# (each further failure during the lock restarts it); a supervisor can clear the lock in the
# admin (Access attempts). A right password resets the count for that user and address.
AXES_FAILURE_LIMIT = env_int("LOGIN_FAILURE_LIMIT", 5, minimum=1)
AXES_COOLOFF_TIME = dt.timedelta(minutes=env_int("LOGIN_COOLOFF_MINUTES", 15, minimum=1))
AXES_LOCKOUT_PARAMETERS = ["username", "ip_address"]  # each on its own, not the pair
AXES_RESET_ON_SUCCESS = True
AXES_LOCKOUT_CALLABLE = "fleet.views.signin.lockout_response"
AXES_CLIENT_IP_CALLABLE = "fleet.security.client_ip"
# Behind N proxies that each append to X-Forwarded-For, the client is the Nth address from
# the right; 0 (no proxy) uses the connection's own address. Without it, every sign-in
# behind a proxy comes "from" the proxy, and one user's typos would lock out everybody.
TRUSTED_PROXY_COUNT = env_int("TRUSTED_PROXY_COUNT", 0, minimum=0)

DJANGO_TABLES2_TEMPLATE = "django_tables2/table.html"

# Maintenance defaults used where a variant leaves a field empty. None of these comes from a
# published standard; they are workshop practice and belong to the operator to set.
HOLDFAST: dict[str, Any] = {
    "DUE_SOON_DAYS": env_int("HOLDFAST_DUE_SOON_DAYS", 30, minimum=0),
    "PRESSURE_TEST_VALID_MONTHS": 12,
    "PROOF_FACTOR": 1.25,
    # The one minimum hold for a pressure test: fleet.calc.pressure has no default of its own.
    "PRESSURE_HOLD_MIN_MINUTES": 30.0,
    "PRESSURE_ALLOWABLE_DROP_PERCENT": 1.0,
    # A test set to "1.25 × rating" on the workshop gauge is accepted within the gauge's
    # own uncertainty of the computed proof pressure.
    "PRESSURE_GAUGE_TOLERANCE_PERCENT": 0.5,
    # A test pressure entered above this multiple of the pressure at the variant's rated depth
    # is refused as a typing error: no housing is proof-tested that far over its rating
    # (common practice, no published source; proof factors run 1.1 to 1.5).
    "PRESSURE_TEST_MAX_OVER_RATING": 1.5,
    "RELEASE_TEST_VALID_DAYS": 180,
    "RELEASE_MAX_SECONDS": 60.0,
    "RELEASE_MAX_MOTOR_CURRENT_A": 3.0,
    "SENSOR_CHECK_INTERVAL_MONTHS": 12,
    "SENSOR_TOLERANCE": {"temperature": 0.1, "pressure_fraction_of_rating": 0.001, "tilt": 1.0},
    "PT100_CLASS": "B",
    "BOND_RESISTANCE_LIMIT_OHM": 0.1,
    "WEAR_FLAG_FACTOR": 1.5,
    "BATTERY_RESERVE_FRACTION": 0.2,
    # Where a pack waits between deployments (and works until a unit has a site): the store.
    "BATTERY_DEFAULT_TEMPERATURE_C": 20.0,
    "SEAL_SHELF_STANDARD": "ISO2230",
    "DEPTH_MARGIN_FRACTION": 0.10,
    # A recovered unit must float with at least the larger of these: an absolute minimum and
    # a share of its mass in air (fouling, entrained water); judged at the least favourable
    # density on the way up (fleet.calc.buoyancy.recovery_buoyancy).
    "RECOVERY_RESERVE_FRACTION_OF_MASS": 0.10,
    "RECOVERY_MIN_NET_BUOYANCY_KG": 2.0,
    # Surface water where a site does not give its own: warm, so the density is low.
    "SURFACE_TEMPERATURE_C": 30.0,
    # The interrogation geometry and cycle a plan assumes unless it gives its own: the
    # transceiver up to this far off the unit horizontally, interrogating every so often,
    # deaf for the blanking time after its own transmission; replies last the pulse time.
    "RANGING": {
        "HORIZONTAL_OFFSET_M": 1000.0,
        "PING_INTERVAL_S": 8.0,
        "BLANKING_S": 0.1,
        "REPLY_PULSE_S": 0.01,
    },
    "DEFAULT_LATITUDE_DEG": 45.0,
}

LOGGING = {
    "version": 1,
    "disable_existing_loggers": False,
    "handlers": {"console": {"class": "logging.StreamHandler"}},
    "root": {"handlers": ["console"], "level": "WARNING"},
}
