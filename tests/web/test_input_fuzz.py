"""Whatever is typed into any field of any entry row or any correction, the page answers with
200, 302 or 400, never a 500, and nothing is stored that the form would refuse.

Hypothesis draws the field and the value; the values mix the classic troublemakers (NaN,
infinities, 1e309, NUL, right-to-left text, a megabyte, naive and aware times, year 1 and
9999) with arbitrary text, numbers, dates and times.
"""

import datetime as dt

import pytest
from django.urls import reverse
from django.utils import timezone
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fleet.forms import entry_forms
from fleet.models import ServiceRecord
from fleet.models.records import entry_kinds
from fleet.services.records import amendable_fields, amendable_targets
from tests.web.entry_rows import assert_storable, closed_record_with_every_kind, good_rows
from tests.web.test_records import record_post

pytestmark = pytest.mark.django_db

TROUBLE = [
    "nan",
    "NaN",
    "inf",
    "-inf",
    "1e309",
    "-1e309",
    "1e-320",
    "-0",
    "",
    " ",
    "\x00",
    "5\x00",
    "\u202e5.0",  # right-to-left override before a number
    "מדידה חוזרת",  # right-to-left words
    "٣",  # an Arabic-Indic digit, which float() reads as 3
    "5,5",
    "1_000",
    "x" * 1_000_000,
    "2026-03-02 09:30",
    "2026-03-02T09:30+14:00",
    "2026-03-02T09:30-11:00",
    "0001-01-01",
    "9999-12-31",
    "0001-01-01T00:00",
    "9999-12-31T23:59",
    "0001-01-01T00:00+14:00",
    "9999-12-31T23:59-11:00",
    "yes",
    "no",
    "on",
]
_OFFSETS = st.sampled_from([None, dt.UTC, dt.timezone(dt.timedelta(hours=14))])
VALUES = st.one_of(
    st.sampled_from(TROUBLE),
    st.text(max_size=40),
    st.floats().map(repr),
    st.integers(-(10**20), 10**20).map(str),
    st.dates().map(dt.date.isoformat),
    st.datetimes(timezones=_OFFSETS).map(dt.datetime.isoformat),
    st.times().map(dt.time.isoformat),
)
FUZZ = settings(
    max_examples=25,
    deadline=None,
    suppress_health_check=[
        HealthCheck.function_scoped_fixture,
        HealthCheck.too_slow,
        HealthCheck.data_too_large,
    ],
)

# (kind, field) for every field of every entry form but the photo upload.
ENTRY_FIELDS = [
    (kind, name)
    for kind in entry_kinds()
    for name in entry_forms()[kind]._meta.fields
    if name != "photo"
]


def test_the_good_rows_cover_every_entry_form_field(unit):
    rows = good_rows(unit)
    missing = [
        f"{kind.__name__}.{name}"
        for kind, name in ENTRY_FIELDS
        if name not in rows[kind.bench_prefix]
    ]
    assert missing == []


@FUZZ
@given(pick=st.sampled_from(ENTRY_FIELDS), value=VALUES)
def test_any_value_in_any_entry_field_gets_a_page_never_a_500(
    as_technician, unit, workshop, technician, pick, value
):
    kind, name = pick
    row = {**good_rows(unit)[kind.bench_prefix], name: value}
    before = kind.objects.count()
    data = record_post(unit, workshop, technician, **{kind.bench_prefix: [row]})
    response = as_technician.post(reverse("record-new", args=[unit.serial]), data)
    assert response.status_code in (302, 400)
    if response.status_code == 400:
        assert kind.objects.count() == before
        return
    record = ServiceRecord.objects.get(unit=unit, closed_at=None)
    assert_storable(record)
    for entry in getattr(record, kind.related_name()).all():
        assert_storable(entry)
    # One open visit per unit: close it before the next example opens another.
    ServiceRecord.objects.filter(pk=record.pk).update(closed_at=timezone.now())


@FUZZ
@given(data=st.data(), value=VALUES)
def test_any_correction_of_any_amendable_field_gets_a_page_never_a_500(
    as_supervisor, unit, technician, data, value
):
    # Only supervisors correct a closed record.
    record = ServiceRecord.objects.filter(
        unit=unit, pressure_tests__isnull=False
    ).first() or closed_record_with_every_kind(unit, technician)
    choices = [(t, f) for t in amendable_targets(record) for f in amendable_fields(t)]
    target, field_name = data.draw(st.sampled_from(choices))
    url = reverse("record-amend", args=[record.pk])
    key = f"{target._meta.model_name}:{target.pk}:{field_name}"
    before = record.amendments.count()
    record.refresh_from_db()
    response = as_supervisor.post(
        url,
        {
            "version": record.version,
            "target_field": key,
            "corrected_value": value,
            "reason": "Fuzzed correction",
        },
    )
    assert response.status_code in (302, 400)
    target.refresh_from_db()
    assert_storable(target)
    if response.status_code == 400:
        assert record.amendments.count() == before
    assert as_supervisor.get(url).status_code == 200


def test_every_entry_form_field_meets_every_troublemaker_without_an_exception(unit, technician):
    """The whole grid without HTTP: each field of each entry form, each troublemaker; the form
    refuses it or what it accepts passes the model's checks."""
    rows = good_rows(unit)
    record = ServiceRecord(
        unit=unit,
        opened_at=dt.datetime(2026, 3, 2, 9, tzinfo=dt.UTC),
        technician=technician,
        place=unit.place,
    )
    accepted = refused = 0
    for kind, name in ENTRY_FIELDS:
        for value in TROUBLE:
            form = entry_forms()[kind](data={**rows[kind.bench_prefix], name: value}, record=record)
            if form.is_valid():
                accepted += 1
                assert_storable_unsaved(form.instance)
            else:
                refused += 1
                assert form.errors, (kind.__name__, name, value[:20])
    assert refused > accepted > 0


def assert_storable_unsaved(instance):
    """``assert_storable`` for an entry whose record is not saved (no unique checks)."""
    import math

    from django.db import models

    from fleet.models.validators import within_date_bounds

    instance.full_clean(exclude=["record"], validate_unique=False, validate_constraints=False)
    for field in instance._meta.concrete_fields:
        value = getattr(instance, field.attname)
        if isinstance(field, models.FloatField) and value is not None:
            assert math.isfinite(value), f"{field.name} = {value!r}"
        if isinstance(field, models.DateField) and field.editable:
            assert within_date_bounds(value), f"{field.name} = {value!r}"
