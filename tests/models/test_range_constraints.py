"""The physical ranges are CHECK constraints too, so a row written around the models (raw SQL,
``QuerySet.update``) is held to the numbers the forms and validators enforce.

NaN: PostgreSQL orders NaN above every number (PostgreSQL 15 manual, 8.1.3 "Floating-Point
Types"), so ``value <= upper`` refuses it; SQLite stores a NaN as NULL (SQLite documentation,
"Datatypes In SQLite", floating point values), so a NOT NULL column refuses it.
"""

import math

import pytest
from django.core.exceptions import ImproperlyConfigured
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import IntegrityError, connection, models, transaction

from fleet.integrity import amending
from fleet.models import PressureTest, ReleaseTest, SensorCheck, Site, Variant
from fleet.models.records import entry_kinds
from fleet.models.validators import range_checks
from tests.web.entry_rows import closed_record_with_every_kind

pytestmark = pytest.mark.django_db

CHECKED_MODELS = (*entry_kinds(), Site, Variant)


def _bounded_float_fields(model: type[models.Model]) -> list[models.FloatField]:
    return [
        f
        for f in model._meta.concrete_fields
        if isinstance(f, models.FloatField)
        and any(isinstance(v, MinValueValidator | MaxValueValidator) for v in f.validators)
    ]


def test_every_bounded_float_of_the_entries_sites_and_variants_has_a_check():
    names = {c.name for m in CHECKED_MODELS for c in m._meta.constraints}
    missing = [
        f"{m.__name__}.{f.name}"
        for m in CHECKED_MODELS
        for f in _bounded_float_fields(m)
        if f"{m._meta.model_name}_{f.name}_range" not in names
    ]
    assert missing == []


def test_a_range_check_needs_both_bounds():
    with pytest.raises(ImproperlyConfigured, match="both a lower and an upper bound"):
        range_checks({"mass_g": models.FloatField(validators=[MinValueValidator(0.0)])})


def _refused(queryset: models.QuerySet, **values: object) -> bool:
    """Whether the database refuses the update. The rows may belong to a closed record, so
    the update goes through the amendment door (``fleet.integrity``): only the range CHECK
    can refuse it then."""
    try:
        with transaction.atomic(), amending():
            queryset.update(**values)
    except IntegrityError:
        return True
    return False


@pytest.fixture
def entries(unit, technician):
    record = closed_record_with_every_kind(unit, technician)
    return record


@pytest.mark.parametrize(
    ("model", "field", "inside", "outside"),
    [
        (PressureTest, "test_pressure_dbar", 1900.0, 12000.5),
        (PressureTest, "hold_minutes", 60.0, 0.5),
        (PressureTest, "water_temperature_start_c", 12.0, -2.5),
        (ReleaseTest, "seconds_to_release", 5.0, 600.5),
        (ReleaseTest, "motor_current_a", 1.1, 20.5),
        (ReleaseTest, "load_kg", 200.0, -1.0),
    ],
)
def test_the_database_refuses_an_entry_value_outside_its_range(
    entries, model, field, inside, outside
):
    rows = model.objects.filter(record=entries)
    assert not _refused(rows, **{field: inside})
    assert _refused(rows, **{field: outside})


@pytest.mark.parametrize(
    ("field", "outside"),
    [
        ("latitude_deg", 90.5),
        ("longitude_deg", -180.5),
        ("water_depth_m", 11000.5),
        ("bottom_temperature_c", 40.5),
        ("practical_salinity", 42.5),
    ],
)
def test_the_database_refuses_a_site_value_outside_its_range(site, field, outside):
    assert _refused(Site.objects.filter(pk=site.pk), **{field: outside})


def test_the_database_refuses_a_depth_rating_outside_its_range(variant):
    assert _refused(Variant.objects.filter(pk=variant.pk), depth_rating_m=11000.5)
    assert _refused(Variant.objects.filter(pk=variant.pk), depth_rating_m=0.5)


def test_the_database_refuses_a_sensor_value_outside_its_sensor_range(entries):
    temperature = SensorCheck.objects.filter(record=entries, sensor="temperature")
    pressure = SensorCheck.objects.filter(record=entries, sensor="pressure")
    assert _refused(temperature, reference_value=50.5)  # fine for a pressure sensor
    assert not _refused(pressure, reference_value=50.5, unit_reading=50.5)
    assert _refused(pressure, unit_reading=-0.5)


def _raw_nan(table: str, column: str, pk: int) -> bool:
    nan = "'NaN'::float8" if connection.vendor == "postgresql" else "%s"
    params = [pk] if connection.vendor == "postgresql" else [math.nan, pk]
    try:
        with transaction.atomic(), connection.cursor() as cursor:
            cursor.execute(f'UPDATE "{table}" SET "{column}" = {nan} WHERE id = %s', params)
    except IntegrityError:
        return True
    return False


def test_a_nan_written_in_raw_sql_to_a_required_number_is_refused(entries):
    test = PressureTest.objects.get(record=entries)
    assert _raw_nan(PressureTest._meta.db_table, "hold_minutes", test.pk)
    test.refresh_from_db()
    assert test.hold_minutes == 60.0


@pytest.mark.skipif(
    connection.vendor != "postgresql", reason="SQLite stores a NaN in a nullable column as NULL"
)
def test_on_postgresql_a_nan_in_a_nullable_number_is_refused_too(entries):
    test = ReleaseTest.objects.get(record=entries)
    assert _raw_nan(ReleaseTest._meta.db_table, "load_kg", test.pk)
    test.refresh_from_db()
    assert test.load_kg == 200.0
