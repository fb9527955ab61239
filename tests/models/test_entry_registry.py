"""The registry of entry kinds: every kind is declared once, on its model, and the bench-visit
page, the record page, the amendment form, the unit page and the service report find it there."""

import datetime as dt

import pytest
from django.conf import settings as django_settings
from django.db import connection, models
from django.template import Context, Template
from django.test import override_settings
from django.urls import reverse
from django.utils import timezone

from fleet.forms import entry_forms
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    HousingOpening,
    PackRemoval,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
)
from fleet.models.records import Entry, entry_kinds
from fleet.services.records import amendable_fields, amendable_targets
from tests.builders import T0, make_record, pressure_test


def _concrete_subclasses(cls: type) -> list[type]:
    found = []
    for sub in cls.__subclasses__():
        if not sub._meta.abstract and not sub._meta.proxy:
            found.append(sub)
        found.extend(_concrete_subclasses(sub))
    return found


# --- (a) the registry covers every kind, and every kind is complete ---------------------------


def test_it_lists_the_eight_kinds_in_the_bench_page_order():
    assert entry_kinds() == (
        AnodeReading,
        SealChange,
        BatteryInstall,
        PressureTest,
        ReleaseTest,
        SensorCheck,
        HousingOpening,
        PackRemoval,
    )
    assert [k.bench_prefix for k in entry_kinds()] == [
        "anodes",
        "seals",
        "battery",
        "pressure",
        "release",
        "sensors",
        "openings",
        "packremovals",
    ]


def test_every_concrete_entry_model_of_an_installed_app_is_registered():
    # A kind from a test app that is not installed right now (tests.extra_entry) is skipped.
    installed = [m for m in _concrete_subclasses(Entry) if m._meta.app_config is not None]
    assert installed
    assert set(installed) == set(entry_kinds())


@pytest.mark.parametrize("kind", entry_kinds(), ids=lambda k: k.__name__)
def test_every_registered_kind_is_complete(kind):
    form = entry_forms()[kind]
    assert form._meta.model is kind

    relation = ServiceRecord._meta.get_field(kind.related_name())
    assert relation.related_model is kind
    assert hasattr(ServiceRecord, kind.related_name())

    assert kind.bench_prefix
    assert kind.bench_extra >= 0
    assert kind.amendable_fields
    for name in kind.amendable_fields:
        field = kind._meta.get_field(name)
        assert field.concrete and field.editable and not field.is_relation, name
        assert name in form._meta.fields, f"{name} can be amended but not entered"
    for name in kind.list_select_related:
        field = kind._meta.get_field(name)
        assert field.many_to_one or field.one_to_one, name  # one row each: select_related

    *path, last = kind.dated_by.split("__")
    model = kind
    for part in path:
        model = model._meta.get_field(part).related_model
    assert isinstance(model._meta.get_field(last), models.DateField)  # DateTimeField is one


def test_bench_prefixes_are_unique():
    prefixes = [k.bench_prefix for k in entry_kinds()]
    assert len(prefixes) == len(set(prefixes))


# --- what each kind says about itself -------------------------------------------------------


# The unit page's history lines as the template wrote them before the kinds described
# themselves: Django's own template filters (floatformat, date, lower) are the reference.
HISTORY_TEMPLATE = {
    SealChange: "Seal {{ e.position.name }} changed ({{ e.get_reason_display|lower }})",
    BatteryInstall: 'Battery {{ e.pack_serial }} installed {{ e.installed_on|date:"Y-m-d" }}'
    '{% if e.removed_on %}, removed {{ e.removed_on|date:"Y-m-d" }}{% endif %}',
    HousingOpening: "Housing opened: {{ e.reason }}",
    PackRemoval: 'Battery {{ e.install.pack_serial }} removed {{ e.removed_on|date:"Y-m-d" }}',
}


def _entries(unit, record):
    """One entry of each kind with values that exercise rounding (x.5) and trailing zeros."""
    entries = {
        SealChange: SealChange(
            record=record,
            position=unit.variant.seal_positions.first(),
            material="nbr70",
            cure_date=dt.date(2025, 1, 1),
            reason=SealChange.Reason.LEAK,
        ),
        BatteryInstall: BatteryInstall(
            record=record,
            unit=unit,
            pack_serial="PK-7",
            chemistry="alkaline",
            nominal_voltage_v=18.0,
            capacity_ah=30.0,
            made_on=dt.date(2025, 1, 5),
            installed_on=dt.date(2025, 2, 3),
            ocv_install_v=19.1,
        ),
        PressureTest: pressure_test(
            dt.date(2026, 3, 2), record=record, test_pressure_dbar=1900.5, hold_minutes=44.5
        ),
        ReleaseTest: ReleaseTest(
            record=record,
            tested_on=dt.date(2026, 3, 2),
            kind=ReleaseTest.Kind.WET,
            seconds_to_release=4.25,
            motor_current_a=1.2,
        ),
        SensorCheck: SensorCheck(
            record=record,
            checked_on=dt.date(2026, 3, 2),
            sensor=SensorCheck.Sensor.TEMPERATURE,
            reference_value=21.1,
            unit_reading=21.1234,
        ),
        HousingOpening: HousingOpening(
            record=record, opened_at=T0, reason="Seal check <after> leak & drip"
        ),
    }
    entries[PackRemoval] = PackRemoval(
        record=record, install=entries[BatteryInstall], removed_on=dt.date(2026, 2, 9)
    )
    return entries


@pytest.mark.django_db
def test_each_kind_describes_itself_as_the_history_template_did(unit, technician):
    record = make_record(unit=unit, by=technician)
    for kind, entry in _entries(unit, record).items():
        if kind not in HISTORY_TEMPLATE:
            continue
        expected = Template(HISTORY_TEMPLATE[kind]).render(Context({"e": entry}, autoescape=False))
        assert entry.history_line() == expected, kind.__name__


@pytest.mark.django_db
def test_each_test_kind_reads_its_numbers_with_units_in_the_history(unit, technician):
    # Worked by hand from the values in _entries: thousands grouped, trailing zeros dropped,
    # a space before every unit.
    entries = _entries(unit, make_record(unit=unit, by=technician))
    assert entries[PressureTest].history_line() == (
        "Pressure test at 1,900.5 dbar: 1,900 dbar to 1,898 dbar over 44.5 min, "
        "water 12 °C to 12.2 °C, ingress no"
    )
    assert entries[ReleaseTest].history_line() == (
        "Wet (in tank or alongside) release test: released in 4.25 s at 1.2 A, "
        "limit switch no, acoustic command no"
    )
    assert entries[SensorCheck].history_line() == (
        "Temperature (°C) check: reads 21.123 °C against 21.1 °C (error +0.023 °C)"
    )


@pytest.mark.django_db
def test_an_anode_reading_names_its_position_in_the_history(unit, technician):
    record = make_record(unit=unit, by=technician)
    position = unit.variant.anode_positions.first()
    reading = AnodeReading(record=record, position=position, mass_g=331.0, replaced=True)
    assert reading.history_line() == f"Anode {position.name}: 331 g, replaced"


@pytest.mark.django_db
def test_only_a_pressure_test_with_ingress_carries_a_warning(unit, technician):
    record = make_record(unit=unit, by=technician)
    entries = _entries(unit, record)
    assert entries[PressureTest].warning() == ""
    entries[PressureTest].ingress_found = True
    assert entries[PressureTest].warning() == "ingress found"
    assert [k for k, e in entries.items() if e.warning()] == [PressureTest]


@pytest.mark.django_db
def test_each_kind_is_dated_by_its_own_date_or_the_visit(unit, technician):
    record = make_record(
        unit=unit, by=technician, opened_at=dt.datetime(2026, 3, 1, 23, 30, tzinfo=dt.UTC)
    )
    entries = _entries(unit, record)
    entries[AnodeReading] = AnodeReading(record=record, mass_g=1.0)
    dated = {kind.__name__: entry.dated_on() for kind, entry in entries.items()}
    visit_day = timezone.localdate(record.opened_at)
    assert dated == {
        "SealChange": visit_day,  # the cure date is the O-ring's age, not the change
        "BatteryInstall": dt.date(2025, 2, 3),
        "PressureTest": dt.date(2026, 3, 2),
        "ReleaseTest": dt.date(2026, 3, 2),
        "SensorCheck": dt.date(2026, 3, 2),
        "HousingOpening": timezone.localdate(T0),
        "PackRemoval": dt.date(2026, 2, 9),
        "AnodeReading": visit_day,
    }


# --- (b) a new kind, added by the recipe alone, shows up everywhere -------------------------


@pytest.fixture
def extra_kind(transactional_db, settings):
    """tests.extra_entry installed for one test, with its table; both gone afterwards (the
    table before the flush that ends a transactional test, or PostgreSQL refuses to truncate
    the record table it points at)."""
    with override_settings(INSTALLED_APPS=[*settings.INSTALLED_APPS, "tests.extra_entry"]):
        from tests.extra_entry.models import GaugeZeroCheck

        with connection.schema_editor() as editor:
            editor.create_model(GaugeZeroCheck)
        try:
            yield GaugeZeroCheck
        finally:
            with connection.schema_editor() as editor:
                editor.delete_model(GaugeZeroCheck)


def _post(unit, workshop, technician, **rows):
    data = {
        "opened_at": "2026-03-02T09:00",
        "technician": technician.pk,
        "place": workshop.pk,
        "summary": "Gauge zeroed",
    }
    for kind in entry_kinds():
        forms = rows.get(kind.bench_prefix, [])
        data[f"{kind.bench_prefix}-TOTAL_FORMS"] = str(len(forms))
        data[f"{kind.bench_prefix}-INITIAL_FORMS"] = "0"
        for i, fields in enumerate(forms):
            for key, value in fields.items():
                data[f"{kind.bench_prefix}-{i}-{key}"] = value
    return data


def test_a_kind_added_by_the_recipe_shows_up_on_every_page(
    extra_kind, as_technician, as_supervisor, unit, workshop, technician
):
    from fleet.documents.report import EntrySection, prepare_report

    assert entry_kinds()[-1] is extra_kind

    # The bench-visit page offers it, after the eight, with one blank row.
    page = as_technician.get(reverse("record-new", args=[unit.serial]))
    assert page.status_code == 200
    title, formset = page.context["formsets"][-1]
    assert (title, formset.prefix, formset.total_form_count()) == ("Gauge zero checks", "gauges", 1)
    assert b'name="gauges-0-zero_offset_dbar"' in page.content

    # It is saved with the visit, validated by its model like any other entry.
    bad = _post(
        unit, workshop, technician, gauges=[{"checked_on": "2026-03-02", "zero_offset_dbar": "80"}]
    )
    assert as_technician.post(reverse("record-new", args=[unit.serial]), bad).status_code == 400
    assert not ServiceRecord.objects.exists()
    good = _post(
        unit,
        workshop,
        technician,
        gauges=[{"checked_on": "2026-03-02", "zero_offset_dbar": "-0.4"}],
    )
    response = as_technician.post(reverse("record-new", args=[unit.serial]), good)
    assert response.status_code == 302
    record = ServiceRecord.objects.get()
    check = extra_kind.objects.get()
    assert (check.record, check.zero_offset_dbar) == (record, -0.4)

    # The record page has its section; the unit page's history has its line.
    body = as_technician.get(record.get_absolute_url()).content.decode()
    assert "<h2>Gauge zero checks</h2>" in body
    assert "<th>Zero offset (dbar)</th>" in body
    assert "<td>-0.4 dbar</td>" in body
    history = as_technician.get(unit.get_absolute_url()).content.decode().split("<h2>History")[1]
    assert "<li>Gauge reads -0.4 dbar at the surface</li>" in history

    # Once closed, its values can be amended.
    as_supervisor.post(
        reverse("record-close", args=[record.pk]), {"confirm": "on", "version": record.version}
    )
    record.refresh_from_db()
    assert amendable_targets(record) == [record, check]
    assert amendable_fields(check) == ("checked_on", "zero_offset_dbar", "note")
    amend = as_supervisor.get(reverse("record-amend", args=[record.pk]))
    assert f'value="gaugezerocheck:{check.pk}"' in amend.content.decode()
    amend = as_supervisor.get(
        reverse("record-amend", args=[record.pk]), {"target": f"gaugezerocheck:{check.pk}"}
    )
    assert "Zero offset (dbar) (now: -0.4 dbar)" in amend.content.decode()
    response = as_supervisor.post(
        reverse("record-amend", args=[record.pk]),
        {
            "target_field": f"gaugezerocheck:{check.pk}:zero_offset_dbar",
            "corrected_value": "-0.6",
            "reason": "Read the gauge again after venting",
            "version": record.version,
        },
    )
    assert response.status_code == 302
    check.refresh_from_db()
    assert check.zero_offset_dbar == -0.6

    # The service report prints it with its fields, by label, as columns.
    record.refresh_from_db()
    assert prepare_report(record).sections == (
        EntrySection(
            "Gauge zero checks",
            ("#", "Checked on", "Zero offset (dbar)", "Note"),
            ((str(check.pk), "2026-03-02", "-0.6 dbar", "—"),),
            singular="Gauge zero check",
        ),
    )


def test_the_registry_forgets_a_kind_whose_app_is_uninstalled(extra_kind):
    assert extra_kind in entry_kinds()
    with override_settings(
        INSTALLED_APPS=[a for a in django_settings.INSTALLED_APPS if a != "tests.extra_entry"]
    ):
        assert extra_kind not in entry_kinds()
        assert len(entry_kinds()) == 8
