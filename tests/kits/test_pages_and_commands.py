"""The kits pages (supervisors only), the banner on a vessel copy, the pages refused on board,
and the commands: kit_export, kit_serve's working copy, kit_pack."""

import sqlite3
from pathlib import Path

import pytest
from django.core.management import CommandError, call_command
from django.db import connection
from django.urls import reverse
from django.utils import timezone

from fleet.kits.files import read_kit_file
from fleet.models import Kit

pytestmark = pytest.mark.django_db


@pytest.fixture
def kit_files(settings, tmp_path):
    settings.KIT_FILES_ROOT = tmp_path / "kit-files"
    return settings.KIT_FILES_ROOT


def _kit_here(by) -> Kit:
    year = timezone.localdate().year
    return Kit.objects.create(
        code="K0003",
        job="Survey block North 7",
        created_at=timezone.now(),
        created_by=by,
        here=True,
        certificate_year=year,
        certificate_first=201,
        certificate_last=400,
    )


def test_only_supervisors_see_the_kits_pages(as_technician, as_viewer, as_supervisor):
    for client in (as_technician, as_viewer):
        assert client.get(reverse("kit-list")).status_code == 403
        assert client.get(reverse("kit-new")).status_code == 403
    page = as_supervisor.get(reverse("kit-list"))
    assert page.status_code == 200
    assert b"No kit made yet" in page.content


def test_the_new_kit_page_lists_units_and_narrows_them_by_serial(shore, as_supervisor):
    page = as_supervisor.get(reverse("kit-new"))
    assert page.status_code == 200
    assert b"TX-0001" in page.content and b"TX-0003" in page.content
    narrowed = as_supervisor.get(reverse("kit-new"), {"q": "0002"})
    assert b"TX-0002" in narrowed.content and b"TX-0001" not in narrowed.content


def test_a_supervisor_makes_a_kit_on_the_page_and_downloads_its_file(
    shore, as_supervisor, kit_files, tmp_path
):
    tech, boss = shore.sailing
    response = as_supervisor.post(
        reverse("kit-new"),
        {
            "job": "Survey block North 7",
            "units": [u.pk for u in shore.units[:2]],
            "sites": [shore.sites[0].pk],
            "users": [tech.pk, boss.pk],
        },
    )
    assert response.status_code == 302
    kit = Kit.objects.get()
    listing = as_supervisor.get(reverse("kit-list"))
    assert b"K0001" in listing.content
    assert reverse("kit-file", args=["K0001"]).encode() in listing.content
    download = as_supervisor.get(reverse("kit-file", args=["K0001"]))
    assert download.status_code == 200
    assert "attachment" in download["Content-Disposition"]
    saved = tmp_path / "down.holdfast-kit"
    saved.write_bytes(b"".join(download.streaming_content))
    assert read_kit_file(saved, into=tmp_path / "k").kit_code == kit.code


def test_a_kit_without_units_or_users_is_refused_on_the_page(shore, as_supervisor, kit_files):
    response = as_supervisor.post(reverse("kit-new"), {"job": "Survey", "units": [], "users": []})
    assert response.status_code == 400
    assert b"Choose at least one unit" in response.content
    assert b"Choose who sails" in response.content
    assert not Kit.objects.exists()


def test_a_vessel_copy_says_so_on_every_page(as_technician, supervisor):
    assert b"Vessel copy" not in as_technician.get(reverse("dashboard")).content
    _kit_here(supervisor)
    for name in ("dashboard", "unit-list", "help"):
        page = as_technician.get(reverse(name))
        assert b"Vessel copy K0003" in page.content, name
        assert b"job Survey block North 7" in page.content
        assert b"merge back ashore" in page.content


def test_making_a_kit_and_importing_are_refused_on_board(as_supervisor, supervisor):
    _kit_here(supervisor)
    for name in ("kit-new", "import"):
        response = as_supervisor.get(reverse(name), follow=True)
        assert response.redirect_chain[-1][0] == reverse("kit-list"), name
        assert b"is done ashore, not on board" in response.content, name
    listing = as_supervisor.get(reverse("kit-list"))
    assert b"This laptop holds kit K0003" in listing.content
    assert b"Pack the return file" in listing.content


@pytest.mark.skipif(connection.vendor != "sqlite", reason="a kit's database is SQLite")
def test_the_pack_button_gives_the_return_file(as_supervisor, supervisor, tmp_path):
    _kit_here(supervisor)
    response = as_supervisor.post(reverse("kit-pack"))
    assert response.status_code == 200
    assert "K0003-return-" in response["Content-Disposition"]
    saved = tmp_path / "return.holdfast-kit"
    saved.write_bytes(b"".join(response.streaming_content))
    back = read_kit_file(saved, into=tmp_path / "r")
    assert (back.kit_code, back.direction) == ("K0003", "return")
    assert back.manifest["kit"]["packed_by"] == "super"


def test_packing_ashore_is_refused(as_supervisor):
    response = as_supervisor.post(reverse("kit-pack"), follow=True)
    assert b"no vessel kit to pack" in response.content


# --- commands ---------------------------------------------------------------------------------


def _command_kit(shore, tmp_path) -> Path:
    out = tmp_path / "k.holdfast-kit"
    call_command(
        "kit_export",
        units="TX-0001,TX-0002",
        sites="North 7",
        users="tech,super",
        job="Survey block North 7",
        by="super",
        out=str(out),
    )
    return out


def test_kit_export_writes_the_file_and_names_unknown_units(shore, tmp_path):
    out = _command_kit(shore, tmp_path)
    assert read_kit_file(out, into=tmp_path / "k").manifest["kit"]["sites"] == ["North 7"]
    with pytest.raises(CommandError, match="No unit named TX-9999"):
        call_command(
            "kit_export",
            units="TX-9999",
            users="tech",
            job="x",
            by="super",
            out=str(tmp_path / "other"),
        )


def test_kit_serve_unpacks_once_and_never_overwrites_work_done_on_board(shore, tmp_path):
    out = _command_kit(shore, tmp_path)
    folder = tmp_path / "laptop"
    call_command("kit_serve", str(out), dir=str(folder), unpack_only=True)
    db = folder / "kit.sqlite3"
    assert db.is_file() and (folder / "secret-key").is_file()
    call_command("kit_serve", str(out), dir=str(folder), unpack_only=True)  # unchanged: fine
    with sqlite3.connect(db) as raw:
        raw.execute("UPDATE fleet_transponder SET notes = 'changed on board'")
    raw.close()
    with pytest.raises(CommandError, match="with changes made since it was unpacked"):
        call_command("kit_serve", str(out), dir=str(folder), unpack_only=True)
    call_command("kit_serve", str(out), dir=str(folder), unpack_only=True, keep=True)
    with sqlite3.connect(db) as raw:
        assert raw.execute(
            "SELECT count(*) FROM fleet_transponder WHERE notes != ''"
        ).fetchone() == (2,)
    raw.close()
    call_command("kit_serve", str(out), dir=str(folder), unpack_only=True, replace=True)
    assert list(folder.glob("kit.sqlite3.replaced-*"))
    with sqlite3.connect(db) as raw:
        assert raw.execute(
            "SELECT count(*) FROM fleet_transponder WHERE notes != ''"
        ).fetchone() == (0,)
    raw.close()


def test_kit_serve_refuses_a_damaged_file(tmp_path):
    bad = tmp_path / "bad.holdfast-kit"
    bad.write_bytes(b"PK\x03\x04 cut short")
    with pytest.raises(CommandError, match="truncated, damaged or not a zip"):
        call_command("kit_serve", str(bad), dir=str(tmp_path / "x"), unpack_only=True)


def test_kit_pack_writes_the_return_file_of_a_working_copy(shore, tmp_path):
    out = _command_kit(shore, tmp_path)
    folder = tmp_path / "laptop"
    call_command("kit_serve", str(out), dir=str(folder), unpack_only=True)
    back = tmp_path / "back.holdfast-kit"
    call_command("kit_pack", out=str(back), by="tech", dir=str(folder))
    returned = read_kit_file(back, into=tmp_path / "r")
    assert (returned.kit_code, returned.direction) == ("K0001", "return")
    assert returned.manifest["kit"]["packed_by"] == "tech"
    assert returned.manifest["kit"]["units"] == ["TX-0001", "TX-0002"]


def test_the_kits_list_is_one_query_with_its_unit_counts(shore, django_assert_num_queries):
    from fleet.selectors import kit_rows

    for code, units in (("K0001", shore.units[:2]), ("K0002", shore.units[2:])):
        kit = _kit_here(shore.sailing[1])
        Kit.objects.filter(pk=kit.pk).update(code=code, here=False)
        kit.units.set(units)
    with django_assert_num_queries(1):
        rows = kit_rows()
        counts = {k.code: (k.unit_count, k.created_by.username) for k in rows}
    assert counts == {"K0001": (2, "super"), "K0002": (1, "super")}
