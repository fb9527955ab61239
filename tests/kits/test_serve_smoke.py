"""kit_serve for real: a child process unpacks a kit file and serves it on 127.0.0.1; the
sign-in page answers with the vessel copy's banner."""

import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest
from django.conf import settings

from fleet.services.kits import kit_export

pytestmark = pytest.mark.django_db


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _get(url: str, seconds: float) -> str:
    deadline = time.monotonic() + seconds
    while True:
        try:
            with urllib.request.urlopen(url, timeout=5) as response:  # noqa: S310 (loopback)
                return response.read().decode()
        except (urllib.error.URLError, ConnectionError):
            if time.monotonic() > deadline:
                raise
            time.sleep(0.5)


def test_kit_serve_serves_the_kit_on_loopback_with_its_banner(shore, tmp_path):
    out = tmp_path / "k.holdfast-kit"
    kit_export(
        units=shore.units[:1],
        sites=[],
        users=shore.sailing,
        job="Survey block North 7",
        by=shore.sailing[1],
        out=out,
    )
    port = _free_port()
    env = {**os.environ, "DEBUG": "true"}
    env.pop("DATABASE_URL", None)
    manage = str(Path(settings.BASE_DIR) / "manage.py")
    server = subprocess.Popen(  # noqa: S603 (our own manage.py)
        [
            sys.executable,
            manage,
            "kit_serve",
            str(out),
            "--dir",
            str(tmp_path / "w"),
            "--port",
            str(port),
        ],
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        page = _get(f"http://127.0.0.1:{port}/accounts/login/", seconds=60)
    finally:
        server.terminate()
        server.wait(timeout=30)
    assert "Vessel copy K0001" in page
    assert "job Survey block North 7" in page
