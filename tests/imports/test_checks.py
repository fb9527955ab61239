"""Every bad row named (row, column, message), nothing written; the file formats a
spreadsheet saves; the numeric and date gates; a file imported once only."""

import datetime as dt

import pytest

from fleet.models import (
    AnodeReading,
    Deployment,
    ImportBatch,
    ImportedRow,
    ServiceRecord,
    Site,
    Transponder,
)
from fleet.services.imports import ImportRefusedError, import_commit, import_preview
from tests.builders import make_unit
from tests.imports.files import anode_history, csv_bytes

pytestmark = pytest.mark.django_db

UNIT_HEADER = ["serial", "variant", "acoustic_address", "turnaround_delay_ms"]


def _where(problems):
    return {(p.row, p.column) for p in problems}


def test_it_names_all_three_bad_rows_of_a_thousand_and_writes_nothing(
    variant, workshop, supervisor
):
    make_unit(variant=variant, place=workshop, serial="TX-A")
    make_unit(variant=variant, place=workshop, serial="TX-B", acoustic_address="102")
    table = anode_history(["TX-A", "TX-B"], rows=1000, place=workshop.name)
    assert len(table) == 1001
    # Spreadsheet rows: the header is row 1, so table[i] is row i + 1.
    table[9][5] = "NaN"  # row 10
    table[499][5] = "999"  # row 500: heavier than the 400 g new anode
    table[899][4] = "Anode 9"  # row 900: no such position on the variant
    data = csv_bytes(table)

    preview = import_preview(kind="visits", data=data, file_name="h.csv", by=supervisor)
    with pytest.raises(ImportRefusedError) as refused:
        import_commit(kind="visits", data=data, file_name="h.csv", by=supervisor)

    expected = {(10, "mass_g"), (500, "mass_g"), (900, "position")}
    for problems in (preview.problems, refused.value.outcome.problems):
        assert _where(problems) == expected and len(problems) == 3
        messages = {p.row: p.message for p in problems}
        assert "not a finite number" in messages[10]
        assert "999 g is heavier than a new anode" in messages[500]
        assert "has no anode position named 'Anode 9'" in messages[900]
    assert not ServiceRecord.objects.exists()
    assert not AnodeReading.objects.exists()
    assert not ImportBatch.objects.exists() and not ImportedRow.objects.exists()


def test_it_counts_what_a_clean_file_would_create_and_writes_nothing_before_the_confirm(
    variant, workshop, supervisor
):
    make_unit(variant=variant, place=workshop, serial="TX-A")
    data = csv_bytes(anode_history(["TX-A"], rows=20, place=workshop.name))

    preview = import_preview(kind="visits", data=data, file_name="h.csv", by=supervisor)

    assert preview.ok and preview.rows == 20
    assert preview.counts == {"bench visits": 10, "anode readings": 20}
    assert [number for number, _ in preview.sample] == list(range(2, 12))
    assert not ServiceRecord.objects.exists()
    import_commit(kind="visits", data=data, file_name="h.csv", by=supervisor)
    assert ServiceRecord.objects.filter(closed_at__isnull=False).count() == 10
    # A date alone is taken at 09:00 local time (docs/import.md).
    first = ServiceRecord.objects.order_by("opened_at").first()
    assert first.opened_at == dt.datetime(2023, 1, 2, 9, 0, tzinfo=dt.UTC)


def test_it_reads_a_byte_order_mark_semicolons_and_decimal_commas(variant, supervisor):
    data = csv_bytes(
        [UNIT_HEADER, ["TX-7", variant.name, "17", "12,5"], ["TX-8", variant.name, "18", "9"]],
        delimiter=";",
        bom=True,
    )
    sites = csv_bytes(
        [
            ["name", "latitude_deg", "longitude_deg", "water_depth_m", "bottom_temperature_c"],
            ["Comma shoal", "-38,412", "-21,806", "62", "11,4"],
        ],
        delimiter=";",
    )

    import_commit(kind="units", data=data, file_name="u.csv", by=supervisor)
    import_commit(kind="sites", data=sites, file_name="s.csv", by=supervisor)

    assert Transponder.objects.get(serial="TX-7").turnaround_delay_ms == 12.5
    site = Site.objects.get(name="Comma shoal")
    assert (site.latitude_deg, site.longitude_deg, site.bottom_temperature_c) == (
        -38.412,
        -21.806,
        11.4,
    )


def test_it_refuses_the_same_file_twice_naming_when_and_by_whom(variant, supervisor):
    supervisor.first_name, supervisor.last_name = "Ada", "Quill"
    supervisor.save()
    data = csv_bytes([UNIT_HEADER, ["TX-7", variant.name, "17", "12.5"]])
    import_commit(kind="units", data=data, file_name="first.csv", by=supervisor)
    batch = ImportBatch.objects.get()

    with pytest.raises(ImportRefusedError) as refused:
        import_commit(kind="units", data=data, file_name="again.csv", by=supervisor)

    (problem,) = refused.value.outcome.problems
    assert f"{batch.imported_at:%Y-%m-%d %H:%M}" in problem.message
    assert "by Ada Quill" in problem.message and "first.csv" in problem.message
    assert Transponder.objects.count() == 1
    assert import_preview(kind="units", data=data, file_name="x", by=supervisor).problems == [
        problem
    ]


@pytest.mark.parametrize(
    ("cell", "message"),
    [
        ("NaN", "'NaN' is not a finite number."),
        ("inf", "'inf' is not a finite number."),
        ("-Infinity", "'-Infinity' is not a finite number."),
        ("1e400", "'1e400' is too large to be a finite number."),
        ("1.234,5", "is not a number"),
        ("1500", "Ensure this value is less than or equal to 1000.0."),
    ],
)
def test_it_refuses_a_number_that_is_not_finite_or_out_of_range(variant, supervisor, cell, message):
    data = csv_bytes([UNIT_HEADER, ["TX-7", variant.name, "17", cell]])

    outcome = import_preview(kind="units", data=data, file_name="u.csv", by=supervisor)

    (problem,) = outcome.problems
    assert (problem.row, problem.column) == (2, "turnaround_delay_ms")
    assert message in problem.message


DEPLOYMENT_HEADER = [
    "unit",
    "site",
    "over_side_at",
    "recovered_at",
    "planned_days",
    "planned_interrogations_per_day",
    "transmit_power_step",
]


@pytest.mark.parametrize(
    ("over", "message"),
    [
        ("9999-12-31", "9999-12-31 is after"),
        ("0001-01-01", "0001-01-01 is before 1 January 1980"),
        ("0001-01-01T00:00+05:00", "out of the range of dates"),
        ("2024-05-01T10:00", "has no offset from UTC"),
        ("2024-13-01", "is not a date written YYYY-MM-DD"),
        ("01/05/2024", "is not a date"),
    ],
)
def test_it_refuses_dates_out_of_bounds_or_without_an_offset(unit, site, supervisor, over, message):
    data = csv_bytes(
        [DEPLOYMENT_HEADER, [unit.serial, site.name, over, "2024-08-01", "90", "100", "1"]]
    )

    outcome = import_preview(kind="deployments", data=data, file_name="d.csv", by=supervisor)

    # The model may add what follows from the date (in the future, recovered before).
    assert {p.row for p in outcome.problems} == {2}
    assert any(p.column == "over_side_at" and message in p.message for p in outcome.problems)
    assert not Deployment.objects.exists()


def test_it_names_unknown_and_missing_columns(supervisor, variant):
    data = csv_bytes([["serial", "variant", "colour"], ["TX-7", variant.name, "red"]])

    outcome = import_preview(kind="units", data=data, file_name="u.csv", by=supervisor)

    assert _where(outcome.problems) == {
        (1, "colour"),
        (1, "acoustic_address"),
        (1, "turnaround_delay_ms"),
    }


def test_it_refuses_a_file_that_is_not_utf8(supervisor):
    outcome = import_preview(
        kind="units", data="serial;variant\nTX-é;x\n".encode("cp1252"), file_name="u", by=supervisor
    )

    (problem,) = outcome.problems
    assert "not UTF-8" in problem.message


def test_it_refuses_a_value_in_a_column_the_entry_kind_does_not_use(variant, workshop, supervisor):
    make_unit(variant=variant, place=workshop, serial="TX-A")
    table = anode_history(["TX-A"], rows=2, place=workshop.name)
    table[0].append("sensor")
    table[1].append("pressure")
    table[2].append("")

    outcome = import_preview(kind="visits", data=csv_bytes(table), file_name="h", by=supervisor)

    assert [(p.row, p.column) for p in outcome.problems] == [(2, "sensor")]


def test_it_refuses_rows_of_one_visit_apart_and_visits_out_of_date_order(
    variant, workshop, supervisor
):
    make_unit(variant=variant, place=workshop, serial="TX-A")
    table = anode_history(["TX-A"], rows=6, place=workshop.name)
    # Rows 2 and 4 are one visit, rows 3 and 5 the next: rows 4 and 5 are apart from theirs.
    table[2], table[3] = table[3], table[2]
    later, earlier = table[5], table[1]
    table.append([earlier[0], "2022-12-30", *earlier[2:]])  # row 8: before the rest

    outcome = import_preview(kind="visits", data=csv_bytes(table), file_name="h", by=supervisor)

    assert _where(outcome.problems) == {
        (4, "visit_opened_at"),
        (5, "visit_opened_at"),
        (8, "visit_opened_at"),
    }
    assert later  # the file's other rows are good
