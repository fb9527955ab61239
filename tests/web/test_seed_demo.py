"""``manage.py seed_demo``: the invented demo fleet loads, is idempotent and deterministic.

Loading the fleet takes seconds (it writes ~200 visits through the services), so the module
loads it once: a first run, a second run (which must change nothing) and a ``--reset`` (which
must load the same fleet again on the same day), inside one transaction rolled back at the end.
"""

import datetime as dt
import re
from collections.abc import Iterator
from dataclasses import dataclass
from io import StringIO
from typing import Any

import pytest
from django.apps import apps
from django.contrib.auth import authenticate, get_user_model
from django.core.management import call_command
from django.db import models, transaction
from django.test import RequestFactory, override_settings
from django.utils import timezone

from fleet import demo
from fleet.due.condition import Condition, annotate_condition
from fleet.models import (
    Deployment,
    DueRow,
    ReleaseCertificate,
    ServiceRecord,
    Transponder,
    UnitHold,
    Variant,
)

# The demo password hashed by the real hasher costs ~0.4 s a time; these tests check logins,
# not hashing, so a fast hasher keeps the module quick.
FAST_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@dataclass(frozen=True)
class Seeded:
    first_output: str
    second_output: str
    reset_output: str
    records_after_first: int
    records_after_second: int
    fingerprint_first: dict
    fingerprint_second: dict
    fingerprint_reset: dict


@pytest.fixture(scope="module")
def seeded(django_db_setup: None, django_db_blocker: Any) -> Iterator[Seeded]:
    with (
        override_settings(PASSWORD_HASHERS=FAST_HASHERS, DEBUG=True),
        django_db_blocker.unblock(),
    ):
        with transaction.atomic():
            outputs = []
            snapshots = []
            for args in ((), (), ("--reset",)):
                out = StringIO()
                call_command("seed_demo", *args, stdout=out)
                outputs.append(out.getvalue())
                snapshots.append((ServiceRecord.objects.count(), demo.fleet_fingerprint()))
            yield Seeded(
                first_output=outputs[0],
                second_output=outputs[1],
                reset_output=outputs[2],
                records_after_first=snapshots[0][0],
                records_after_second=snapshots[1][0],
                fingerprint_first=snapshots[0][1],
                fingerprint_second=snapshots[1][1],
                fingerprint_reset=snapshots[2][1],
            )
            transaction.set_rollback(True)


pytestmark = pytest.mark.django_db


@pytest.mark.parametrize(
    ("username", "group", "staff"),
    [
        ("technician", "technician", False),
        ("supervisor", "supervisor", True),
        ("viewer", "viewer", False),
    ],
)
def test_it_creates_each_demo_login_in_its_group(
    seeded: Seeded, username: str, group: str, staff: bool
) -> None:
    # The sign-in throttle's backend needs the request, as every real sign-in has one.
    request = RequestFactory().post("/accounts/login/")
    user = authenticate(request, username=username, password="holdfast-demo")
    assert user is not None
    assert list(user.groups.values_list("name", flat=True)) == [group]
    assert user.is_staff is staff
    assert not user.is_superuser


def test_extra_technicians_appear_in_records_but_cannot_log_in(seeded: Seeded) -> None:
    users = get_user_model().objects.filter(username__in=demo.EXTRA_TECHNICIANS)
    assert users.count() == len(demo.EXTRA_TECHNICIANS) >= 2
    for user in users:
        assert not user.has_usable_password()
        assert list(user.groups.values_list("name", flat=True)) == ["technician"]
        assert ServiceRecord.objects.filter(technician=user).exists()


def test_it_loads_about_thirty_units_of_three_variants(seeded: Seeded) -> None:
    assert Variant.objects.count() == 3
    assert 28 <= Transponder.objects.count() <= 32
    assert set(Transponder.objects.values_list("variant__name", flat=True)) == set(
        demo.DEMO_VARIANT_NAMES
    )


def test_every_unit_has_at_least_one_service_record(seeded: Seeded) -> None:
    assert not Transponder.objects.filter(service_records__isnull=True).exists()


def test_it_leaves_open_work_and_units_in_every_state(seeded: Seeded) -> None:
    assert 2 <= ServiceRecord.objects.filter(closed_at__isnull=True).count() <= 3
    assert Deployment.objects.filter(recovered_at__isnull=True).exists()
    conditions = set(
        annotate_condition(Transponder.objects.all(), timezone.localdate()).values_list(
            "condition", flat=True
        )
    )
    assert conditions == set(Condition)
    assert Transponder.objects.filter(hold=UnitHold.QUARANTINED).count() == 1
    assert not Transponder.objects.exclude(hold=UnitHold.NONE).filter(hold_reason="").exists()


def test_unit_condition_agrees_with_open_deployments(seeded: Seeded) -> None:
    # Units in the water have an open deployment; the lost unit's last one was never recovered.
    units = annotate_condition(Transponder.objects.all(), timezone.localdate())
    open_units = set(
        Deployment.objects.filter(recovered_at__isnull=True).values_list("unit__hold", flat=True)
    )
    assert open_units == {UnitHold.NONE, UnitHold.LOST}
    for unit in units.filter(condition=Condition.IN_WATER):
        assert unit.deployments.filter(recovered_at__isnull=True).count() == 1
        assert unit.place is None


def test_it_keeps_exactly_one_acoustic_address_clash(seeded: Seeded) -> None:
    addresses = list(Transponder.objects.values_list("acoustic_address", flat=True))
    clashes = {a for a in addresses if addresses.count(a) > 1}
    assert len(clashes) == 1
    assert addresses.count(clashes.pop()) == 2


def test_its_acoustic_addresses_are_a_channel_and_a_number(seeded: Seeded) -> None:
    units = list(Transponder.objects.select_related("variant"))
    assert units
    for unit in units:
        assert re.fullmatch(r"C[1-3]-\d{2}", unit.acoustic_address), unit.acoustic_address
        unit.full_clean()  # the model's validators accept the scheme
    # One channel per variant.
    channels = {(u.variant.name, u.acoustic_address.split("-")[0]) for u in units}
    assert len(channels) == len({u.variant.name for u in units})


def test_it_shows_a_certificate_in_each_state(seeded: Seeded) -> None:
    by_status = {
        status: list(ReleaseCertificate.objects.filter(status=status))
        for status in ReleaseCertificate.Status.values
    }
    assert len(by_status["issued"]) == 2  # one alone, one that superseded another
    assert len(by_status["superseded"]) == 1
    assert len(by_status["withdrawn"]) == 1
    assert by_status["not_valid"] == []
    superseded = by_status["superseded"][0]
    assert superseded.superseded_by in by_status["issued"]
    assert by_status["withdrawn"][0].status_reason
    # Three different units, each on its latest release test.
    tests = [c.release_test for c in ReleaseCertificate.objects.select_related("release_test")]
    assert len({t.record.unit_id for t in tests}) == 3
    for test in tests:
        assert test.record.unit.state.last_release_test_id == test.pk


def test_a_second_run_says_so_and_changes_nothing(seeded: Seeded) -> None:
    assert "Loaded the demo fleet" in seeded.first_output
    assert "demo fleet already loaded" in seeded.second_output
    assert seeded.records_after_second == seeded.records_after_first
    assert seeded.fingerprint_second == seeded.fingerprint_first


def test_a_reset_on_the_same_day_loads_the_same_fleet(seeded: Seeded) -> None:
    assert "Deleted the demo fleet" in seeded.reset_output
    assert seeded.fingerprint_reset == seeded.fingerprint_first
    assert len(seeded.fingerprint_reset) == Transponder.objects.count()


def test_the_plan_is_the_same_for_the_same_day() -> None:
    # No database: planning is pure, so two plans for one day are equal field by field.
    day = dt.date(2031, 5, 17)
    assert demo.plan_fleet(day) == demo.plan_fleet(day)
    assert demo.plan_fleet(day) != demo.plan_fleet(day + dt.timedelta(days=1))


def test_the_summary_names_the_logins(seeded: Seeded) -> None:
    for output in (seeded.first_output, seeded.second_output):
        assert "technician, supervisor, viewer; password holdfast-demo" in output


# Derived state rows (fleet/models/state.py) are written by the due engine, not by hand.
DERIVED_STATE_MODULE = "fleet.models.state"


def _all_rows(*, derived: bool = False) -> Iterator[models.Model]:
    for model in apps.get_app_config("fleet").get_models():
        if (model.__module__ == DERIVED_STATE_MODULE) is derived:
            yield from model.objects.all()
    if not derived:
        yield from get_user_model().objects.all()


def test_every_row_passes_full_clean(seeded: Seeded) -> None:
    checked = 0
    for row in _all_rows():
        row.full_clean()
        checked += 1
    assert checked > 1000


def test_every_derived_state_row_passes_full_clean(seeded: Seeded) -> None:
    for row in _all_rows(derived=True):
        row.full_clean()


def test_no_date_is_in_the_future(seeded: Seeded) -> None:
    now, today = timezone.now(), timezone.localdate()
    # Stored due items look ahead by design, and so does a certificate's end of validity;
    # every other value records what happened.
    looks_ahead = {(ReleaseCertificate, "valid_until")}
    rows = [*_all_rows(), *(r for r in _all_rows(derived=True) if not isinstance(r, DueRow))]
    for row in rows:
        for field in row._meta.concrete_fields:
            if (type(row), field.name) in looks_ahead:
                continue
            value = getattr(row, field.attname)
            if isinstance(value, dt.datetime):
                assert value <= now, (row, field.name)
            elif isinstance(value, dt.date):
                assert value <= today, (row, field.name)


def test_the_mid_water_units_can_be_planned_for_their_own_shallow_site(seeded: Seeded) -> None:
    """They have always worked at the 62 m site: recovery buoyancy (judged at the least dense
    water on the way up) and reply timing pass there, and the ones left ready go."""
    from fleet.due.planned import PlannedDeployment
    from fleet.due.readiness import Verdict, plan_campaign, readiness_for
    from fleet.models import Site

    today = timezone.localdate()
    shoal = Site.objects.get(name="Grey Shoal Array")
    planned = PlannedDeployment(shoal, today, 30)
    mid_water = Transponder.objects.filter(variant__name="Mid-water 500 m", hold=UnitHold.NONE)
    assert mid_water.count() >= 5
    for unit in mid_water:
        result = readiness_for(unit, planned, on=today)
        checks = {c.name: c for c in result.checks}
        assert checks["Recovery buoyancy"].verdict == Verdict.PASS, checks["Recovery buoyancy"]
        assert checks["Reply timing"].verdict == Verdict.PASS, checks["Reply timing"]
        assert checks["Depth rating"].verdict == Verdict.PASS
    plan = plan_campaign(planned, wanted=4, on=today)
    ready = {r.unit.serial for r in plan.ready}
    assert {"HF1-0103", "HF1-0109"} <= ready


def test_demo_records_carry_their_own_dates_not_the_load_time(seeded: Seeded) -> None:
    # A visit from 2023 was created in 2023: the record's audit trail tells its own history,
    # and closing it is not a change to its contents.
    records = list(ServiceRecord.objects.all())
    assert records
    for record in records:
        assert record.created_at == record.opened_at, record.pk
        assert record.updated_by_id is None, record.pk
        if record.closed_at is not None:
            assert record.closed_at >= record.created_at
    oldest = min(r.created_at for r in records)
    assert oldest.date() < timezone.localdate() - dt.timedelta(days=365)
