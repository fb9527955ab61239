"""Rows that are possible but unlikely are flagged, not refused: an anode heavier than its last
reading (an anode only loses mass, so it is a misread or another anode; common practice, no
published source). They are imported only when whoever imports says they checked them, as the
bench-visit form asks for a tick."""

import re

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import CommandError, call_command
from django.urls import reverse

from fleet.models import AnodeReading, ServiceRecord
from fleet.services.imports import ImportRefusedError, import_commit, import_preview
from tests.builders import make_unit
from tests.imports.files import VISIT_HEADER, csv_bytes

pytestmark = pytest.mark.django_db


def _file(place: str, rows: list[tuple[str, str, str]]) -> bytes:
    return csv_bytes(
        [VISIT_HEADER]
        + [["TX-A", day, place, "anode_reading", position, mass] for day, position, mass in rows]
    )


@pytest.fixture
def heavier(variant, workshop):
    make_unit(variant=variant, place=workshop, serial="TX-A")
    # Anode 1 gains 5 g between the second and third visits; Anode 2 only loses mass.
    return _file(
        workshop.name,
        [
            ("2024-01-10", "Anode 1", "398"),
            ("2024-01-10", "Anode 2", "397"),
            ("2024-03-10", "Anode 1", "391"),
            ("2024-03-10", "Anode 2", "390"),
            ("2024-05-10", "Anode 1", "396"),
            ("2024-05-10", "Anode 2", "385"),
        ],
    )


def test_the_preview_flags_the_heavier_reading_and_nothing_else(heavier, supervisor):
    outcome = import_preview(kind="visits", data=heavier, file_name="h.csv", by=supervisor)
    assert outcome.ok
    assert [(f.row, f.column) for f in outcome.flagged] == [(6, "mass_g")]
    assert "396 g is heavier than this anode's last reading (391 g on 2024-03-10)" in (
        outcome.flagged[0].message
    )


def test_the_commit_refuses_flagged_rows_unless_they_were_checked(heavier, supervisor):
    with pytest.raises(ImportRefusedError) as refused:
        import_commit(kind="visits", data=heavier, file_name="h.csv", by=supervisor)
    assert "1 row flagged to check" in refused.value.outcome.problems[0].message
    assert not ServiceRecord.objects.exists()

    import_commit(
        kind="visits", data=heavier, file_name="h.csv", by=supervisor, accept_flagged=True
    )
    assert AnodeReading.objects.count() == 6


def test_it_compares_with_the_readings_already_kept_and_forgets_a_replaced_anode(
    variant, workshop, supervisor
):
    make_unit(variant=variant, place=workshop, serial="TX-A")
    first = _file(
        workshop.name, [("2024-01-10", "Anode 1", "380"), ("2024-01-10", "Anode 2", "370")]
    )
    import_commit(kind="visits", data=first, file_name="1.csv", by=supervisor)
    later = csv_bytes(
        [VISIT_HEADER + ["replaced"]]
        + [
            ["TX-A", "2024-06-10", workshop.name, "anode_reading", "Anode 1", "385", ""],
            ["TX-A", "2024-06-10", workshop.name, "anode_reading", "Anode 2", "360", "yes"],
            # A new anode went on at position 2: 398 g is no gain.
            ["TX-A", "2024-09-10", workshop.name, "anode_reading", "Anode 2", "398", ""],
        ]
    )
    outcome = import_preview(kind="visits", data=later, file_name="2.csv", by=supervisor)
    assert outcome.ok, outcome.problems
    assert [(f.row, re.findall(r"\d+ g", f.message)[:2]) for f in outcome.flagged] == [
        (2, ["385 g", "380 g"])
    ]


def test_the_page_asks_for_the_tick_and_imports_with_it(as_supervisor, heavier):
    upload = {"kind": "visits", "file": SimpleUploadedFile("h.csv", heavier)}
    page = as_supervisor.post(reverse("import"), upload).content.decode()
    assert "1 row to check" in page and 'name="accept_flagged"' in page
    checksum = re.search(r'name="checksum" value="([0-9a-f]{64})"', page).group(1)
    confirm = {"kind": "visits", "checksum": checksum, "file_name": "h.csv"}

    refused = as_supervisor.post(reverse("import-confirm"), confirm)
    assert refused.status_code == 400
    assert "nothing was imported" in refused.content.decode()
    assert 'name="accept_flagged"' in refused.content.decode()
    assert not ServiceRecord.objects.exists()

    done = as_supervisor.post(reverse("import-confirm"), {**confirm, "accept_flagged": "on"})
    assert done.status_code == 302
    assert AnodeReading.objects.count() == 6


def test_the_command_names_the_flagged_rows_and_needs_its_flag(heavier, supervisor, tmp_path):
    path = tmp_path / "h.csv"
    path.write_bytes(heavier)
    with pytest.raises(CommandError):
        call_command("import_csv", "visits", str(path), "--user", supervisor.username, "--commit")
    assert not ServiceRecord.objects.exists()
    call_command(
        "import_csv",
        "visits",
        str(path),
        "--user",
        supervisor.username,
        "--commit",
        "--accept-flagged",
    )
    assert AnodeReading.objects.count() == 6
