"""manage.py export_all: typed CSV for every fleet table and the users, photos, certificate
PDFs and a manifest whose counts and checksums match what is in the archive."""

import csv
import datetime as dt
import hashlib
import io
import json
import zipfile

import pytest
from django.apps import apps
from django.core.management import call_command
from pypdf import PdfReader

from fleet.export_archive import cell
from tests.backup_fleet import build_small_fleet


@pytest.fixture
def exported(db, settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    fleet = build_small_fleet()
    path = tmp_path / "export.zip"
    out = io.StringIO()
    call_command(
        "export_all", "--output", str(path), "--base-url", "https://holdfast.invalid", stdout=out
    )
    archive = zipfile.ZipFile(path)
    yield fleet, archive, out.getvalue()
    archive.close()


def rows(archive: zipfile.ZipFile, name: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(archive.read(name).decode("utf-8"))))


def test_it_writes_every_fleet_table_and_the_users_with_a_matching_manifest(exported):
    _, archive, output = exported
    manifest = json.loads(archive.read("manifest.json"))
    fleet_tables = {
        f"fleet/{m._meta.model_name}.csv" for m in apps.get_app_config("fleet").get_models()
    }
    assert fleet_tables | {"auth/user.csv", "auth/group.csv", "auth/user_groups.csv"} <= set(
        manifest["files"]
    )
    assert set(manifest["files"]) == set(archive.namelist()) - {"manifest.json"}
    for name, entry in manifest["files"].items():
        data = archive.read(name)
        assert entry["sha256"] == hashlib.sha256(data).hexdigest()
        assert entry["bytes"] == len(data)
        if name.endswith(".csv"):
            assert entry["rows"] == len(rows(archive, name))
    assert manifest["command"] == "manage.py export_all"
    assert manifest["migrations"]["fleet"].startswith("0")
    assert dt.datetime.fromisoformat(manifest["created_at"]).utcoffset() == dt.timedelta(0)
    assert "exported" in output


def test_it_leaves_the_password_hashes_out(exported):
    _, archive, _ = exported
    users = rows(archive, "auth/user.csv")
    assert {u["username"] for u in users} == {"tech", "boss", "reader"}
    assert all("password" not in column for column in users[0])
    assert b"md5$" not in archive.read("auth/user.csv")  # the tests' password hasher
    memberships = rows(archive, "auth/user_groups.csv")
    assert len(memberships) == 3


def test_it_writes_typed_cells_and_escapes_formulas(exported):
    fleet, archive, _ = exported
    records = {r["id"]: r for r in rows(archive, "fleet/servicerecord.csv")}
    closed = records[str(fleet.closed_record.pk)]
    assert closed["opened_at"] == "2026-03-02T08:00:00+00:00"
    assert closed["closed_at"] == "2026-03-02T12:00:00+00:00"
    # Never changed since it was opened: no value, an empty cell.
    assert records[str(fleet.open_record.pk)]["updated_by_id"] == ""
    assert records[str(fleet.open_record.pk)]["summary"] == "'@ bench, left overnight"
    units = {u["serial"]: u for u in rows(archive, "fleet/transponder.csv")}
    assert units["TX-0001"]["notes"] == "'=SUM(A1:A9) typed by hand"
    assert units["TX-0001"]["turnaround_delay_ms"] == "12.5"
    assert (
        rows(archive, "fleet/variant.csv")[0]["allowed_chemistries"] == '["alkaline", "li_socl2"]'
    )
    assert rows(archive, "fleet/variant.csv")[0]["release_fitted"] == "true"
    deployment = next(d for d in rows(archive, "fleet/deployment.csv") if not d["recovered_at"])
    assert deployment["over_side_at"] == "2026-03-05T07:30:15.123456+00:00"
    amendment = rows(archive, "fleet/amendment.csv")[0]
    assert amendment["target_type"] == "fleet.releasetest"
    assert (amendment["original_value"], amendment["corrected_value"]) == ("5.0", "4.5")
    assert rows(archive, "auth/user.csv")[2]["email"] == "'=HYPERLINK(1)@example.invalid"
    anode = next(r for r in rows(archive, "fleet/anodereading.csv") if r["photo"])
    assert anode["note"] == "'+ pitting at the base"


@pytest.mark.parametrize(
    "value, text",
    [
        (-2.5, "-2.5"),  # a negative number is a number, not a formula
        (1e-05, "1e-05"),
        (True, "true"),
        (None, ""),
        (dt.date(2026, 3, 2), "2026-03-02"),
        (
            dt.datetime(2026, 3, 2, 9, 0, tzinfo=dt.timezone(dt.timedelta(hours=2))),
            "2026-03-02T07:00:00+00:00",
        ),
        ("-1 dbar drift", "'-1 dbar drift"),
        ("@SUM(1)", "'@SUM(1)"),
    ],
)
def test_a_cell_has_one_form_per_type(value, text):
    assert cell(value) == text


def test_it_carries_the_photos_and_the_certificates(exported):
    fleet, archive, _ = exported
    for name, data in fleet.photos.items():
        assert archive.read(f"media/{name}") == data
    pdfs = sorted(n for n in archive.namelist() if n.startswith("certificates/"))
    assert len(pdfs) == 2  # the superseded certificate and the current one
    text = "".join(
        page.extract_text()
        for page in PdfReader(
            io.BytesIO(archive.read(f"certificates/{fleet.certificate.number}.pdf"))
        ).pages
    )
    assert fleet.certificate.number in text
    assert f"https://holdfast.invalid/verify/{fleet.certificate.verification_code}/" in text
