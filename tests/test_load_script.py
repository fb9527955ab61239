"""scripts/load.py, run small so that it cannot rot: 2 clients for 3 s against gunicorn on a
scratch SQLite database. The full run (50 clients, 60 s) is run by hand, not here."""

import importlib.util
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from django.conf import settings

ROOT = Path(settings.BASE_DIR)
SCRIPT = ROOT / "scripts" / "load.py"


def run(*args: str, tmp_path: Path) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if k != "DATABASE_URL"}
    return subprocess.run(
        [sys.executable, str(SCRIPT), *args],
        cwd=tmp_path,
        env=env,
        capture_output=True,
        text=True,
        timeout=600,
        check=False,
    )


@pytest.mark.skipif(importlib.util.find_spec("gunicorn") is None, reason="gunicorn not installed")
def test_it_loads_a_scratch_server_and_finds_every_acknowledged_write(tmp_path):
    figures_file = tmp_path / "figures.json"
    done = run(
        "--clients",
        "2",
        "--seconds",
        "3",
        "--database",
        f"sqlite:///{tmp_path / 'load.sqlite3'}",
        "--json",
        str(figures_file),
        tmp_path=tmp_path,
    )
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-3000:]
    figures = json.loads(figures_file.read_text())
    assert figures["requests"] > 0
    assert figures["errors"] == {}
    assert figures["lost_writes"] == 0
    assert figures["saves_found"] == figures["saves_acknowledged"]
    assert figures["rebuild_check_passed"] is True
    assert {"login", "overview"} <= set(figures["latency_ms"])
    assert "lost writes: 0" in done.stdout


@pytest.mark.parametrize(
    "option, value",
    [
        ("--url", "http://192.0.2.10:8000"),
        ("--url", "http://holdfast.example.invalid"),
        ("--database", "postgres://postgres@192.0.2.10:5432/holdfast"),
    ],
)
def test_it_refuses_anything_off_this_machine(tmp_path, option, value):
    done = run(option, value, "--seconds", "1", tmp_path=tmp_path)
    assert done.returncode != 0
    assert "refused" in done.stderr
    assert not (tmp_path / "load.sqlite3").exists()
