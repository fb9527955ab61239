"""Production switches in fleet/settings.py, read in a fresh interpreter from the environment,
and the page policy (Content-Security-Policy) on real responses."""

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from django.conf import settings as django_settings
from django.urls import reverse

SETTINGS_KEYS = [
    "SECURE_PROXY_SSL_HEADER",
    "SECURE_SSL_REDIRECT",
    "SECURE_HSTS_SECONDS",
    "SECURE_HSTS_INCLUDE_SUBDOMAINS",
    "SESSION_COOKIE_SECURE",
    "CSRF_COOKIE_SECURE",
    "SESSION_COOKIE_AGE",
]

_PRINT = (
    "import json, fleet.settings as s; "
    f"keys = {SETTINGS_KEYS!r}; "
    "out = {k: getattr(s, k, None) for k in keys}; "
    "out['CSP'] = s.CONTENT_SECURITY_POLICY['DIRECTIVES'].get('upgrade-insecure-requests'); "
    "print(json.dumps(out))"
)

PRODUCTION_VARIABLES = (
    "HTTPS",
    "TRUST_X_FORWARDED_PROTO",
    "SECURE_COOKIES",
    "HSTS_SECONDS",
    "SESSION_HOURS",
)


def read_settings(**env: str) -> dict:
    clean = {k: v for k, v in os.environ.items() if k not in PRODUCTION_VARIABLES}
    clean.update({"SECRET_KEY": "k", **env})
    result = subprocess.run(
        [sys.executable, "-c", _PRINT], env=clean, capture_output=True, text=True, check=False
    )
    assert result.returncode == 0, result.stderr
    return json.loads(result.stdout)


def test_https_off_by_default_trusts_no_proxy_header_and_sends_cookies_anywhere():
    values = read_settings()
    assert values["SECURE_PROXY_SSL_HEADER"] is None
    assert values["SECURE_SSL_REDIRECT"] is False
    assert values["SECURE_HSTS_SECONDS"] == 0
    assert values["SESSION_COOKIE_SECURE"] is False
    assert values["CSP"] is None


def test_https_on_turns_on_the_proxy_header_redirect_hsts_and_secure_cookies():
    values = read_settings(HTTPS="true")
    assert values["SECURE_PROXY_SSL_HEADER"] == ["HTTP_X_FORWARDED_PROTO", "https"]
    assert values["SECURE_SSL_REDIRECT"] is True
    assert values["SECURE_HSTS_SECONDS"] == 365 * 24 * 3600
    assert values["SECURE_HSTS_INCLUDE_SUBDOMAINS"] is True
    assert values["SESSION_COOKIE_SECURE"] is True
    assert values["CSRF_COOKIE_SECURE"] is True
    assert values["CSP"] is True


def test_a_server_terminating_tls_itself_can_refuse_the_proxy_header():
    values = read_settings(HTTPS="true", TRUST_X_FORWARDED_PROTO="false")
    assert values["SECURE_PROXY_SSL_HEADER"] is None
    assert values["SECURE_SSL_REDIRECT"] is True


def test_sessions_last_twelve_hours_unless_set():
    assert read_settings()["SESSION_COOKIE_AGE"] == 12 * 3600
    assert read_settings(SESSION_HOURS="8")["SESSION_COOKIE_AGE"] == 8 * 3600


def test_a_session_of_zero_hours_is_refused():
    clean = {k: v for k, v in os.environ.items() if k not in PRODUCTION_VARIABLES}
    clean.update({"SECRET_KEY": "k", "SESSION_HOURS": "0"})
    result = subprocess.run(
        [sys.executable, "-c", "import fleet.settings"],
        env=clean,
        capture_output=True,
        text=True,
        check=False,
    )
    assert result.returncode != 0
    assert "SESSION_HOURS must be at least 1" in result.stderr


@pytest.mark.django_db
def test_pages_carry_a_policy_without_inline_script_or_style(as_technician, client):
    for response in (as_technician.get(reverse("dashboard")), client.get(reverse("login"))):
        assert response.status_code == 200
        policy = response["Content-Security-Policy"]
        directives = dict(
            (part.split(" ", 1) + [""])[:2] for part in (p.strip() for p in policy.split(";"))
        )
        assert directives["default-src"] == "'self'"
        assert directives["script-src"] == "'self'"
        assert directives["style-src"] == "'self'"
        assert directives["object-src"] == "'none'"
        assert directives["frame-ancestors"] == "'none'"
        assert "unsafe-inline" not in policy


@pytest.mark.django_db
def test_pdfs_go_without_the_policy(as_technician, unit):
    response = as_technician.get(reverse("labels-pdf"))
    assert response.status_code == 200
    assert response["Content-Type"] == "application/pdf"
    assert "Content-Security-Policy" not in response


@pytest.mark.django_db
def test_charts_keep_the_policy(as_technician, unit):
    response = as_technician.get(reverse("unit-battery-chart", args=[unit.serial]))
    assert response.status_code == 200
    assert "Content-Security-Policy" in response


INLINE = [
    (re.compile(r"<style", re.I), "a <style> element"),
    (re.compile(r"<script(?![^>]*\ssrc=)", re.I), "a <script> without src"),
    (re.compile(r"\sstyle\s*=", re.I), "a style= attribute"),
    (re.compile(r"\son[a-z]+\s*=", re.I), "an on…= event handler"),
    (re.compile(r"javascript:", re.I), "a javascript: address"),
]


def test_no_template_carries_inline_script_or_style():
    # The policy forbids them; they would silently stop working.
    templates = Path(django_settings.BASE_DIR) / "templates"
    found = []
    for path in sorted(templates.rglob("*.html")):
        text = path.read_text()
        for pattern, what in INLINE:
            if pattern.search(text):
                found.append(f"{path.relative_to(templates)}: {what}")
    assert len(list(templates.rglob("*.html"))) > 10
    assert found == []


def _database_options(url: str) -> dict:
    env = {**os.environ, "SECRET_KEY": "k", "DATABASE_URL": url}
    code = "import json, fleet.settings as s; print(json.dumps(s.DATABASES['default']['OPTIONS']))"
    result = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, check=False
    )
    assert result.returncode == 0, result.stderr
    return json.loads(result.stdout)


def test_postgresql_connections_turn_just_in_time_compilation_off():
    # Any libpq options given in the address are kept beside it.
    assert _database_options("postgres://u@db/holdfast")["options"] == "-c jit=off"
    given = _database_options("postgres://u@db/holdfast?options=-c%20work_mem%3D8MB")
    assert given["options"] == "-c work_mem=8MB -c jit=off"
    assert "options" not in _database_options("sqlite:////tmp/x.sqlite3")
