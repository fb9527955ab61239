"""kit_export: a kit holds exactly the chosen units' rows, with their keys and uids, derived
state equal to a rebuild, the sailing users able to sign in, and its own certificate range; a
damaged, changed or foreign kit file is refused with a plain message."""

import datetime as dt
import io
import json
import sqlite3
import zipfile
from pathlib import Path

import pytest
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.db.models import Max
from django.utils import timezone

from fleet.kits.db import kit_database
from fleet.kits.files import KitFileError, read_kit_file
from fleet.models import (
    Amendment,
    AnodeState,
    CertificateCounter,
    Deployment,
    DueRow,
    HoldChange,
    HousingOpening,
    Kit,
    PackRemoval,
    ReleaseCertificate,
    SealState,
    ServiceRecord,
    Site,
    Transponder,
    UnitState,
    Variant,
)
from fleet.models.records import entry_kinds
from fleet.services.kits import (
    CERTIFICATE_RESERVE,
    KEY_HEADROOM,
    check_derived_state,
    kit_export,
    reserve_certificates,
)

pytestmark = pytest.mark.django_db


def _export(shore, tmp_path: Path, name: str = "k", **kwargs) -> tuple[Kit, Path]:
    out = tmp_path / f"{name}.holdfast-kit"
    kwargs.setdefault("units", shore.units[:2])
    kwargs.setdefault("sites", shore.sites[:1])
    kwargs.setdefault("users", shore.sailing)
    kit = kit_export(job="Survey block North 7", by=shore.sailing[1], out=out, **kwargs)
    return kit, out


def _by_unit(model, units) -> set:
    ids = [u.pk for u in units]
    if hasattr(model, "record"):
        return set(model.objects.filter(record__unit__in=ids).values_list("pk", flat=True))
    if model is Amendment:
        return set(model.objects.filter(record__unit__in=ids).values_list("pk", flat=True))
    if model is ReleaseCertificate:
        rows = model.objects.filter(release_test__record__unit__in=ids)
        return set(rows.values_list("pk", flat=True))
    return set(model.objects.filter(unit__in=ids).values_list("pk", flat=True))


HISTORY = [
    ServiceRecord,
    *entry_kinds(),
    Amendment,
    Deployment,
    ReleaseCertificate,
    HoldChange,
    UnitState,
    AnodeState,
    SealState,
    DueRow,
]


def test_a_kit_holds_exactly_the_chosen_units_rows_with_their_keys_and_uids(shore, tmp_path):
    kit, out = _export(shore, tmp_path)
    unpacked = read_kit_file(out, into=tmp_path / "unpacked")
    assert unpacked.kit_code == kit.code == "K0001"
    assert unpacked.direction == "out"
    assert unpacked.manifest["kit"]["units"] == ["TX-0001", "TX-0002"]
    with kit_database(unpacked.db_path) as alias:
        serials = set(Transponder.objects.using(alias).values_list("serial", flat=True))
        assert serials == {"TX-0001", "TX-0002"}
        for model in HISTORY:
            expected = _by_unit(model, shore.units[:2])
            if model not in (HousingOpening, PackRemoval):  # the fixture makes none
                assert expected, model.__name__
            got = set(model.objects.using(alias).values_list("pk", flat=True))
            assert got == expected, model.__name__
            if hasattr(model, "uid"):
                ashore = dict(model.objects.filter(pk__in=expected).values_list("pk", "uid"))
                aboard = dict(model.objects.using(alias).values_list("pk", "uid"))
                assert aboard == ashore, model.__name__
        # The chosen site and the one the history names; the variant with its positions.
        sites = set(Site.objects.using(alias).values_list("name", flat=True))
        assert sites == {"North 7", "Deep 2"}
        assert Variant.objects.using(alias).count() == 1
        variant = Variant.objects.using(alias).get()
        assert variant.anode_positions.count() == shore.units[0].variant.anode_positions.count()
        here = Kit.objects.using(alias).get()
        assert (here.code, here.here, here.pk) == (kit.code, True, kit.pk)
        assert set(here.units.values_list("serial", flat=True)) == serials


def test_derived_state_in_the_kit_equals_a_rebuild_and_the_check_can_fail(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    db = read_kit_file(out, into=tmp_path / "k").db_path
    assert check_derived_state(db) == ""
    with sqlite3.connect(db) as raw:
        raw.execute("UPDATE fleet_duerow SET due_on = '2001-01-01'")
    raw.close()
    assert "differ" in check_derived_state(db)


def test_sailing_users_sign_in_on_board_and_others_named_by_history_cannot(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    db = read_kit_file(out, into=tmp_path / "k").db_path
    with kit_database(db) as alias:
        users = {u.username: u for u in User.objects.using(alias).all()}
        assert users["tech"].is_active
        assert users["tech"].check_password("pw-for-tests-only")
        assert set(users["tech"].groups.values_list("name", flat=True)) == {"technician"}
        assert set(users["super"].groups.values_list("name", flat=True)) == {"supervisor"}
        # harbour amended and set holds ashore: named by the history, copied, not sailing.
        assert not users["harbour"].is_active
        assert "view" not in users


def test_the_shore_reserves_the_kits_certificate_numbers(shore, tmp_path):
    year = timezone.localdate().year
    before = CertificateCounter.objects.get(year=year).last_number
    kit, out = _export(shore, tmp_path)
    assert (kit.certificate_first, kit.certificate_last) == (
        before + 1,
        before + CERTIFICATE_RESERVE,
    )
    assert CertificateCounter.objects.get(year=year).last_number == before + CERTIFICATE_RESERVE
    second, _ = _export(shore, tmp_path, "second", units=shore.units[2:])
    assert second.code == "K0002"
    assert second.certificate_first == kit.certificate_last + 1
    db = read_kit_file(out, into=tmp_path / "k").db_path
    with kit_database(db) as alias:
        counter = CertificateCounter.objects.using(alias).get(year=year)
        assert counter.last_number == kit.certificate_first - 1


def test_a_kit_made_before_the_new_year_also_holds_numbers_for_the_next(shore):
    kit = Kit(code="K0100", job="x", created_at=timezone.now(), created_by=shore.sailing[1])
    # Years no certificate was issued in: the ranges start at 1.
    reserve_certificates(kit, on=dt.date(2040, 12, 10))
    assert kit.certificate_range(2040) == (1, CERTIFICATE_RESERVE)
    assert kit.certificate_range(2041) == (1, CERTIFICATE_RESERVE)
    assert CertificateCounter.objects.get(year=2041).last_number == CERTIFICATE_RESERVE
    autumn = Kit(code="K0101", job="x", created_at=timezone.now(), created_by=shore.sailing[1])
    reserve_certificates(autumn, on=dt.date(2042, 10, 1))
    assert autumn.certificate_range(2042) == (1, CERTIFICATE_RESERVE)
    assert autumn.certificate_range(2043) is None
    assert not CertificateCounter.objects.filter(year=2043).exists()


def test_keys_made_on_board_start_far_above_the_shores(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    db = read_kit_file(out, into=tmp_path / "k").db_path
    with sqlite3.connect(db) as raw:
        seqs = dict(raw.execute("SELECT name, seq FROM sqlite_sequence"))
    raw.close()
    for model in (ServiceRecord, Deployment, HoldChange, *entry_kinds()):
        top = model.objects.aggregate(top=Max("pk"))["top"] or 0
        assert seqs[model._meta.db_table] == top + KEY_HEADROOM, model.__name__


def test_the_shore_row_keeps_the_files_checksum_and_status(shore, tmp_path):
    import hashlib

    kit, out = _export(shore, tmp_path)
    kit.refresh_from_db()
    assert kit.status == Kit.Status.EXPORTED
    assert not kit.here
    assert kit.exported_sha256 == hashlib.sha256(out.read_bytes()).hexdigest()


def test_a_kit_needs_units_a_sailing_user_and_a_job(shore, tmp_path):
    with pytest.raises(ValidationError) as refused:
        kit_export(units=[], sites=[], users=[], job=" ", by=shore.sailing[1], out=tmp_path / "x")
    assert set(refused.value.message_dict) == {"units", "users", "job"}
    assert not Kit.objects.exists()
    assert not (tmp_path / "x").exists()


def test_a_kit_cannot_make_a_kit(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    Kit.objects.filter(code="K0001").update(here=True)
    with pytest.raises(ValidationError, match="vessel copy"):
        _export(shore, tmp_path, "again")


# --- the file ---------------------------------------------------------------------------------


def test_a_truncated_kit_file_is_refused(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    data = out.read_bytes()
    out.write_bytes(data[: len(data) // 2])
    with pytest.raises(KitFileError, match="truncated"):
        read_kit_file(out, into=tmp_path / "k")


def test_a_changed_kit_database_is_refused(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    with zipfile.ZipFile(out) as z:
        members = {name: z.read(name) for name in z.namelist()}
    db = bytearray(members["kit.sqlite3"])
    db[-100] ^= 0xFF
    members["kit.sqlite3"] = bytes(db)
    _rezip(out, members)
    with pytest.raises(KitFileError, match="SHA-256"):
        read_kit_file(out, into=tmp_path / "k")


def test_a_foreign_zip_and_a_kit_of_other_migrations_are_refused(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    with zipfile.ZipFile(out) as z:
        members = {name: z.read(name) for name in z.namelist()}
    manifest = json.loads(members["manifest.json"])
    manifest["migrations"]["fleet"] = "0019_import_batches"
    _rezip(out, {**members, "manifest.json": json.dumps(manifest).encode()})
    with pytest.raises(KitFileError, match="other migrations.*0019_import_batches"):
        read_kit_file(out, into=tmp_path / "k")
    foreign = tmp_path / "foreign.zip"
    _rezip(foreign, {"manifest.json": b'{"format": "holdfast-backup"}'})
    with pytest.raises(KitFileError, match="not a Holdfast kit file"):
        read_kit_file(foreign, into=tmp_path / "k")
    text = tmp_path / "notes.txt"
    text.write_text("not a zip")
    with pytest.raises(KitFileError, match="not a zip"):
        read_kit_file(text, into=tmp_path / "k")


def _rezip(path: Path, members: dict[str, bytes]) -> None:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as z:
        for name, data in members.items():
            z.writestr(name, data)
    path.write_bytes(buffer.getvalue())


# --- on board ---------------------------------------------------------------------------------


def test_a_row_written_into_the_kit_database_carries_the_kits_code(shore, tmp_path):
    _, out = _export(shore, tmp_path)
    db = read_kit_file(out, into=tmp_path / "k").db_path
    with kit_database(db) as alias:
        unit = Transponder.objects.using(alias).get(serial="TX-0001")
        user = User.objects.using(alias).get(username="tech")
        change = HoldChange.objects.using(alias).create(
            unit=unit,
            from_hold="none",
            to_hold="quarantined",
            reason="Flood alarm",
            set_by=user,
            set_at=timezone.now(),
        )
        assert change.origin == "K0001"
        assert change.uid is not None
        assert change.pk > KEY_HEADROOM
    assert HoldChange.objects.filter(reason="Flood alarm").count() == 0
