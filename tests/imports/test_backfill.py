"""Back-filling a past deployment between or before later ones: allowed when it overlaps
nothing, refused with the clashing dates otherwise; the derived state equals a rebuild."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.models import Deployment, UnitState
from fleet.services.deployments import deployment_backfill, deployment_recover, deployment_start
from tests.imports.files import csv_bytes

pytestmark = pytest.mark.django_db

UTC = dt.UTC


def _deployment(unit, site, over, back=None, **kwargs):
    kwargs.setdefault("planned_days", 60)
    kwargs.setdefault("planned_interrogations_per_day", 500)
    kwargs.setdefault("transmit_power_step", 1)
    return Deployment(unit=unit, site=site, over_side_at=over, recovered_at=back, **kwargs)


def _later_history(unit, site, by):
    """Deployed in 2025 and recovered, then deployed again now (still in the water)."""
    first = deployment_start(
        deployment=_deployment(unit, site, dt.datetime(2025, 3, 1, 8, tzinfo=UTC)),
        by=by,
        check_readiness=False,
    )
    deployment_recover(
        deployment=first,
        recovered_at=dt.datetime(2025, 6, 1, 8, tzinfo=UTC),
        replies_counted=None,
        place=None,
        by=by,
    )
    over = timezone.now() - dt.timedelta(days=3)
    deployment_start(deployment=_deployment(unit, site, over), by=by, check_readiness=False)


def test_it_enters_a_past_deployment_before_later_ones_and_the_state_equals_a_rebuild(
    unit, site, supervisor
):
    _later_history(unit, site, supervisor)
    before = UnitState.objects.get(unit=unit).immersed_days_closed

    deployment_backfill(
        deployment=_deployment(
            unit,
            site,
            dt.datetime(2024, 5, 1, 8, tzinfo=UTC),
            dt.datetime(2024, 7, 10, 8, tzinfo=UTC),
        ),
        by=supervisor,
    )

    assert Deployment.objects.filter(unit=unit).count() == 3
    state = UnitState.objects.get(unit=unit)
    # 1 May to 10 July 2024 is 70 days more in the water.
    assert state.immersed_days_closed == pytest.approx(before + 70)
    assert state.first_over_side_at == dt.datetime(2024, 5, 1, 8, tzinfo=UTC)
    assert rebuild_differences(at=timezone.now())[0] == []


@pytest.mark.parametrize(
    ("over", "back"),
    [
        (dt.datetime(2025, 2, 1, tzinfo=UTC), dt.datetime(2025, 3, 2, tzinfo=UTC)),  # into it
        (dt.datetime(2025, 5, 31, tzinfo=UTC), dt.datetime(2025, 7, 1, tzinfo=UTC)),  # out of it
        (dt.datetime(2025, 4, 1, tzinfo=UTC), dt.datetime(2025, 4, 2, tzinfo=UTC)),  # inside
        (dt.datetime(2025, 8, 1, tzinfo=UTC), timezone.now() - dt.timedelta(days=1)),  # open one
    ],
)
def test_it_refuses_a_past_deployment_that_overlaps_another(unit, site, supervisor, over, back):
    _later_history(unit, site, supervisor)

    with pytest.raises(ValidationError) as refused:
        deployment_backfill(deployment=_deployment(unit, site, over, back), by=supervisor)

    (message,) = refused.value.message_dict["over_side_at"]
    assert message.startswith(f"{unit.serial} was already deployed at {site.name} from 20")
    assert "overlaps these dates" in message
    assert Deployment.objects.filter(unit=unit).count() == 2


def test_it_refuses_a_past_deployment_without_a_recovery(unit, site, supervisor):
    with pytest.raises(ValidationError) as refused:
        deployment_backfill(
            deployment=_deployment(unit, site, dt.datetime(2024, 5, 1, tzinfo=UTC)),
            by=supervisor,
        )

    assert "recovery date" in refused.value.message_dict["recovered_at"][0]


def test_it_names_overlaps_within_a_file_and_with_the_records(unit, site, supervisor):
    from fleet.services.imports import import_preview

    _later_history(unit, site, supervisor)
    header = [
        "unit",
        "site",
        "over_side_at",
        "recovered_at",
        "planned_days",
        "planned_interrogations_per_day",
        "transmit_power_step",
    ]
    rows = [
        [unit.serial, site.name, "2024-01-01", "2024-02-01", "30", "100", "1"],
        [unit.serial, site.name, "2024-01-20", "2024-03-01", "30", "100", "1"],  # row 3
        [unit.serial, site.name, "2025-05-01", "2025-07-01", "30", "100", "1"],  # row 4
        [unit.serial, site.name, "2024-06-01", "2024-07-01", "30", "100", "1"],
    ]

    outcome = import_preview(
        kind="deployments", data=csv_bytes([header, *rows]), file_name="d", by=supervisor
    )

    assert [(p.row, p.column) for p in outcome.problems] == [(3, "unit"), (4, "over_side_at")]
    assert "overlaps the one in row 2 of this file" in outcome.problems[0].message
    assert "was already deployed" in outcome.problems[1].message
