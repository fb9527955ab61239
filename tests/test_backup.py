"""Backup and restore: a fleet survives the round trip table by table and photo by photo, on
SQLite, on PostgreSQL and from one to the other; a damaged archive is refused untouched."""

import datetime as dt
import hashlib
import json
import os
import subprocess
import sys
import zipfile
from pathlib import Path
from typing import Any

import pytest
from django.conf import settings as django_settings
from django.contrib.sessions.backends.db import SessionStore
from django.contrib.sessions.models import Session
from django.db import models
from django.test.utils import isolate_apps

from fleet.models import Place, ServiceRecord, Transponder
from fleet.services.backup import (
    RestoreError,
    backup_create,
    backup_models,
    backup_restore,
    dependency_order,
)
from tests.backup_fleet import build_small_fleet

AT = dt.datetime(2026, 3, 6, 12, 0, tzinfo=dt.UTC)
ROOT = Path(django_settings.BASE_DIR)


def table_contents() -> dict[str, list[Any]]:
    """Every backed-up table (and its many-to-many tables) as rows of column values."""
    contents: dict[str, list[Any]] = {}
    for model in backup_models():
        contents[model._meta.label] = list(model._base_manager.order_by("pk").values())
        for m2m in model._meta.many_to_many:
            through = m2m.remote_field.through
            # The link rows' own ids mean nothing; the pairs they link are the content.
            columns = [f.attname for f in through._meta.fields if not f.primary_key]
            contents[through._meta.label] = sorted(through.objects.values_list(*columns))
    return contents


def data_members(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as archive:
        return {n: archive.read(n) for n in archive.namelist() if n.startswith("data/")}


def manage(*args: str, database: Path, media: Path) -> subprocess.CompletedProcess[str]:
    env = {
        **os.environ,
        "DATABASE_URL": f"sqlite:///{database}",
        "MEDIA_ROOT": str(media),
        "SECRET_KEY": "test-only-secret-key-not-for-production",
    }
    return subprocess.run(
        [sys.executable, "manage.py", *args],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )


@pytest.fixture
def media(settings, tmp_path: Path) -> Path:
    settings.MEDIA_ROOT = tmp_path / "media"
    return settings.MEDIA_ROOT


def rewrite(source: Path, target: Path, change: dict[str, bytes], *, fix_manifest: bool) -> None:
    """Copy an archive with some members' bytes changed, the manifest's checksums optionally
    updated to match (a deliberate edit rather than damage)."""
    with zipfile.ZipFile(source) as old:
        members = {n: old.read(n) for n in old.namelist()}
    members.update(change)
    if fix_manifest:
        manifest = json.loads(members["manifest.json"])
        for name in change:
            manifest["files"][name]["sha256"] = hashlib.sha256(members[name]).hexdigest()
            manifest["files"][name]["bytes"] = len(members[name])
        members["manifest.json"] = json.dumps(manifest).encode()
    with zipfile.ZipFile(target, "w") as new:
        for name, data in members.items():
            new.writestr(name, data)


def test_it_orders_every_table_after_the_tables_its_keys_point_to():
    ordered = backup_models()
    index = {model: i for i, model in enumerate(ordered)}
    for model in ordered:
        for f in [*model._meta.fields, *model._meta.many_to_many]:
            if f.is_relation and f.related_model in index and f.related_model is not model:
                assert index[f.related_model] < index[model], (model, f.name)
    assert ordered.index(ServiceRecord) > ordered.index(Transponder)


@isolate_apps("tests")
def test_it_refuses_to_order_tables_whose_keys_form_a_cycle():
    class Left(models.Model):
        right = models.ForeignKey("Right", on_delete=models.CASCADE)

        class Meta:
            app_label = "tests"

        def __str__(self) -> str:
            return "left"

    class Right(models.Model):
        left = models.ForeignKey(Left, on_delete=models.CASCADE)

        class Meta:
            app_label = "tests"

        def __str__(self) -> str:
            return "right"

    with pytest.raises(RuntimeError, match="cycle"):
        dependency_order([Left, Right])


def test_it_restores_a_fleet_into_an_emptied_database_row_for_row_and_photo_for_photo(
    db, media, settings, tmp_path
):
    fleet = build_small_fleet()
    before = table_contents()
    archive = tmp_path / "backup.zip"
    result = backup_create(path=archive, at=AT)
    assert result.media_files == 2 and result.missing_media == ()
    assert result.rows == sum(len(before[m._meta.label]) for m in backup_models())
    SessionStore().create()  # a session that must not survive the replace

    settings.MEDIA_ROOT = tmp_path / "restored-media"
    restored = backup_restore(path=archive, replace=True, at=AT)

    assert restored.rows == result.rows
    assert table_contents() == before
    assert not Session.objects.exists()
    for name, data in fleet.photos.items():
        assert (tmp_path / "restored-media" / name).read_bytes() == data
    # Keys continue after the restored ones (PostgreSQL sequences are moved on).
    assert Place.objects.create(name="After restore", kind="store").pk > max(
        row["id"] for row in before["fleet.Place"]
    )


def test_it_round_trips_through_a_fresh_sqlite_database_and_back(db, media, settings, tmp_path):
    """The test database (SQLite, or PostgreSQL in CI's second pass) is backed up, restored by
    ``manage.py restore`` into a new SQLite file, backed up from there and restored back over
    the test database: on PostgreSQL this crosses both ways."""
    fleet = build_small_fleet()
    before = table_contents()
    first = tmp_path / "first.zip"
    backup_create(path=first, at=AT)

    fresh, fresh_media = tmp_path / "fresh.sqlite3", tmp_path / "fresh-media"
    for step in (("migrate", "--verbosity", "0"), ("restore", str(first))):
        done = manage(*step, database=fresh, media=fresh_media)
        assert done.returncode == 0, done.stderr
    assert "match a rebuild" in done.stdout
    for name, data in fleet.photos.items():
        assert (fresh_media / name).read_bytes() == data

    second = tmp_path / "second.zip"
    done = manage("backup", str(second), database=fresh, media=fresh_media)
    assert done.returncode == 0, done.stderr
    assert data_members(second) == data_members(first)
    with zipfile.ZipFile(second) as archive:
        assert json.loads(archive.read("manifest.json"))["database_vendor"] == "sqlite"

    settings.MEDIA_ROOT = tmp_path / "back-media"
    backup_restore(path=second, replace=True, at=AT)
    assert table_contents() == before
    for name, data in fleet.photos.items():
        assert (tmp_path / "back-media" / name).read_bytes() == data


def test_it_refuses_a_database_that_holds_data_unless_told_to_replace(db, media, tmp_path):
    build_small_fleet()
    archive = tmp_path / "backup.zip"
    backup_create(path=archive, at=AT)
    with pytest.raises(RestoreError, match="already holds data.*--replace"):
        backup_restore(path=archive, at=AT)


@pytest.mark.parametrize(
    "damage, message",
    [
        ("tamper", "does not match its SHA-256"),
        ("truncate", "not a readable archive"),
        ("extra", "does not list"),
        ("drop", "incomplete"),
    ],
)
def test_it_refuses_a_damaged_archive_before_touching_the_database(
    db, media, tmp_path, damage, message
):
    build_small_fleet()
    archive = tmp_path / "backup.zip"
    backup_create(path=archive, at=AT)
    before = table_contents()
    bad = tmp_path / "bad.zip"
    members = data_members(archive)
    record_file = next(n for n in members if n.endswith("fleet.servicerecord.jsonl"))
    if damage == "tamper":
        edited = members[record_file].replace(b'"version": 2', b'"version": 9', 1)
        assert edited != members[record_file]
        rewrite(archive, bad, {record_file: edited}, fix_manifest=False)
    elif damage == "truncate":
        data = archive.read_bytes()
        bad.write_bytes(data[: len(data) // 2])
    elif damage == "extra":
        rewrite(archive, bad, {"data/999_extra.jsonl": b"{}\n"}, fix_manifest=False)
    else:
        with zipfile.ZipFile(archive) as old, zipfile.ZipFile(bad, "w") as new:
            for name in old.namelist():
                if name != record_file:
                    new.writestr(name, old.read(name))
    with pytest.raises(RestoreError, match=message):
        backup_restore(path=bad, replace=True, at=AT)
    assert table_contents() == before


def test_it_refuses_a_restore_whose_stored_due_rows_differ_from_a_rebuild(db, media, tmp_path):
    """An archive edited consistently (checksums recomputed) with a due date moved: the
    rebuild check after loading catches it and nothing is restored."""
    build_small_fleet()
    archive = tmp_path / "backup.zip"
    backup_create(path=archive, at=AT)
    before = table_contents()
    members = data_members(archive)
    due_file = next(n for n in members if n.endswith("fleet.duerow.jsonl"))
    lines = members[due_file].splitlines()
    row = json.loads(lines[0])
    row["fields"]["due_on"] = "2099-01-01"
    edited = b"\n".join([json.dumps(row).encode(), *lines[1:]]) + b"\n"
    bad = tmp_path / "edited.zip"
    rewrite(archive, bad, {due_file: edited}, fix_manifest=True)
    with pytest.raises(RestoreError, match="differ from a rebuild"):
        backup_restore(path=bad, replace=True, at=AT)
    assert table_contents() == before


def test_it_refuses_an_archive_from_other_migrations(db, media, tmp_path):
    build_small_fleet()
    archive = tmp_path / "backup.zip"
    backup_create(path=archive, at=AT)
    with zipfile.ZipFile(archive) as old:
        manifest = json.loads(old.read("manifest.json"))
    manifest["migrations"]["fleet"] = "0099_from_the_future"
    bad = tmp_path / "future.zip"
    rewrite(archive, bad, {"manifest.json": json.dumps(manifest).encode()}, fix_manifest=False)
    with pytest.raises(RestoreError, match="other migrations.*fleet"):
        backup_restore(path=bad, replace=True, at=AT)


def test_the_commands_report_a_refusal_without_a_traceback(db, media, tmp_path):
    from django.core.management import CommandError, call_command

    bad = tmp_path / "not-an-archive.zip"
    bad.write_bytes(b"these are not the bytes of a zip file")
    with pytest.raises(CommandError, match="Restore refused: .*not a readable archive"):
        call_command("restore", str(bad))
    with pytest.raises(CommandError, match="does not exist"):
        call_command("backup", str(tmp_path / "no-such-folder" / "b.zip"))
