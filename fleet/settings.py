"""Holdfast settings, read from the environment with strict helpers.

Zero configuration gives a working local setup (a SQLite file in the project folder); every
value that matters in production comes from an environment variable listed in README.md.
"""

import os
from pathlib import Path
from typing import Any

import dj_database_url
import django_stubs_ext
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
    "fleet",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    "django.contrib.auth.middleware.LoginRequiredMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
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

_database_url = os.environ.get("DATABASE_URL", "").strip()
DATABASES: dict[str, Any]
if _database_url:
    DATABASES = {"default": dj_database_url.parse(_database_url, conn_max_age=60)}
    if DATABASES["default"]["ENGINE"] == "django.db.backends.sqlite3":
        DATABASES["default"]["OPTIONS"] = dict(_SQLITE_OPTIONS)
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
MEDIA_URL = "media/"
MEDIA_ROOT = Path(os.environ.get("MEDIA_ROOT", str(BASE_DIR / "media")))

# Upload limits: workshop photos from a tablet camera, re-encoded on save.
FILE_UPLOAD_MAX_MEMORY_SIZE = 10 * 1024 * 1024
DATA_UPLOAD_MAX_MEMORY_SIZE = 12 * 1024 * 1024
PHOTO_MAX_BYTES = env_int("PHOTO_MAX_BYTES", 12 * 1024 * 1024, minimum=1024)

SESSION_COOKIE_HTTPONLY = True
SESSION_COOKIE_SECURE = env_bool("SECURE_COOKIES", False)
CSRF_COOKIE_SECURE = SESSION_COOKIE_SECURE
X_FRAME_OPTIONS = "DENY"

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
