import os
import subprocess
import sys

import pytest
from django.core.exceptions import ImproperlyConfigured

from fleet.settings import env_bool, env_int


def test_env_bool_reads_the_usual_spellings(monkeypatch):
    monkeypatch.setenv("X_FLAG", "yes")
    assert env_bool("X_FLAG", False) is True
    monkeypatch.setenv("X_FLAG", "0")
    assert env_bool("X_FLAG", True) is False
    monkeypatch.setenv("X_FLAG", "maybe")
    with pytest.raises(ImproperlyConfigured, match="X_FLAG"):
        env_bool("X_FLAG", False)


def test_env_int_refuses_junk_and_small_values(monkeypatch):
    monkeypatch.setenv("X_NUM", "abc")
    with pytest.raises(ImproperlyConfigured, match="X_NUM must be an integer"):
        env_int("X_NUM", 1)
    monkeypatch.setenv("X_NUM", "-3")
    with pytest.raises(ImproperlyConfigured, match="at least 0"):
        env_int("X_NUM", 1, minimum=0)


def _import_settings(env: dict[str, str]) -> subprocess.CompletedProcess:
    clean = {k: v for k, v in os.environ.items() if k not in ("SECRET_KEY", "DEBUG")}
    clean.update(env)
    return subprocess.run(
        [
            sys.executable,
            "-c",
            "import fleet.settings as s; print(s.DATABASES['default']['ENGINE'])",
        ],
        env=clean,
        capture_output=True,
        text=True,
        check=False,
    )


def test_it_refuses_to_start_without_a_secret_key_when_debug_is_off():
    result = _import_settings({"DEBUG": "false"})
    assert result.returncode != 0
    assert "SECRET_KEY is not set" in result.stderr


def test_it_reads_a_postgres_database_url():
    result = _import_settings(
        {"SECRET_KEY": "k", "DATABASE_URL": "postgres://u:p@127.0.0.1:5432/holdfast"}
    )
    assert result.stdout.strip() == "django.db.backends.postgresql"


def test_the_sqlite_default_takes_the_write_lock_up_front(settings):
    if settings.DATABASES["default"]["ENGINE"] != "django.db.backends.sqlite3":
        pytest.skip("SQLite only")
    options = settings.DATABASES["default"]["OPTIONS"]
    assert options["transaction_mode"] == "IMMEDIATE"
    assert "journal_mode=WAL" in options["init_command"]
    assert options["timeout"] >= 5
