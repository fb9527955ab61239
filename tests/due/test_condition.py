"""A unit's condition: derived from its records, the same in SQL for a list as for one unit.

The order of the rules is our own (fleet/due/condition.py), no published source: a hold first,
then in the water, on the bench, needs work, ready.
"""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.utils import timezone

from fleet.due.condition import Condition, annotate_condition, condition_of
from fleet.models import Deployment, DueRow, Transponder, UnitHold
from fleet.services.deployments import deployment_start
from tests.builders import make_record, make_unit, serviced_unit

pytestmark = pytest.mark.django_db


def _in_water(unit, site, by):
    deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=timezone.now() - dt.timedelta(days=2),
            planned_days=90,
            planned_interrogations_per_day=200,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,  # built as history; the gate is tested in tests/web/test_gates.py
    )


def _hold(unit, hold, reason="set for the test"):
    unit.hold, unit.hold_reason = hold, reason
    unit.full_clean()
    unit.save()


def test_the_condition_in_sql_equals_condition_of_for_hand_built_units(
    variant, workshop, site, technician
):
    today = timezone.localdate()
    recently = today - dt.timedelta(days=10)

    def unit(n):
        return make_unit(
            serial=f"C-{n}", acoustic_address=str(300 + n), variant=variant, place=workshop
        )

    expected = {}
    u = unit(1)
    serviced_unit(u, by=technician, site=site, day=recently)
    expected[u.serial] = Condition.READY
    u = unit(2)
    serviced_unit(u, by=technician, site=site, day=recently, limit_switch_ok=False)
    expected[u.serial] = Condition.NEEDS_WORK  # failed release test on a closed record
    u = unit(3)
    serviced_unit(u, by=technician, site=site, day=recently)
    _in_water(u, site, technician)
    expected[u.serial] = Condition.IN_WATER
    u = unit(4)
    serviced_unit(u, by=technician, site=site, day=recently)
    make_record(unit=u, by=technician, opened_at=timezone.now() - dt.timedelta(hours=2))
    expected[u.serial] = Condition.ON_BENCH
    u = unit(5)
    make_record(unit=u, by=technician)
    _hold(u, UnitHold.QUARANTINED)
    expected[u.serial] = Condition.QUARANTINED  # the hold outranks the open visit
    u = unit(6)
    serviced_unit(u, by=technician, site=site, day=recently)
    _in_water(u, site, technician)
    _hold(u, UnitHold.LOST)
    expected[u.serial] = Condition.LOST  # the hold outranks the open deployment
    u = unit(7)
    _hold(u, UnitHold.RETIRED)
    expected[u.serial] = Condition.RETIRED
    u = unit(8)
    expected[u.serial] = Condition.NEEDS_WORK  # no stored rows: nothing is known

    in_sql = dict(
        annotate_condition(Transponder.objects.all(), today).values_list("serial", "condition")
    )
    one_by_one = {u.serial: condition_of(u, today) for u in Transponder.objects.all()}
    assert in_sql == one_by_one == expected


@pytest.mark.parametrize(
    ("offset", "condition"),
    [
        (-1, Condition.NEEDS_WORK),  # overdue yesterday
        (0, Condition.NEEDS_WORK),  # due today is due now (engine.classify)
        (1, Condition.READY),  # due tomorrow
    ],
)
def test_a_row_due_on_or_before_today_means_needs_work(unit, site, technician, offset, condition):
    today = timezone.localdate()
    serviced_unit(unit, by=technician, site=site, day=today - dt.timedelta(days=10))
    DueRow.objects.filter(unit=unit, item="Pressure test").update(
        due_on=today + dt.timedelta(days=offset)
    )
    assert condition_of(unit, today) == condition
    assert annotate_condition(Transponder.objects.filter(pk=unit.pk), today).get().condition == (
        condition
    )


def test_a_row_with_no_data_means_needs_work(unit, site, technician):
    today = timezone.localdate()
    serviced_unit(unit, by=technician, site=site, day=today - dt.timedelta(days=10))
    assert condition_of(unit, today) == Condition.READY
    DueRow.objects.filter(unit=unit, item="Pressure test").update(due_on=None)
    assert condition_of(unit, today) == Condition.NEEDS_WORK


def test_each_condition_has_its_own_word_and_shape():
    icons = [c.icon for c in Condition]
    assert len(set(icons)) == len(icons)
    # Distinct from the due-state shapes and the verdict shapes.
    assert not set(icons) & {"▲", "◆", "●", "○", "✔", "!", "✖"}
    assert len({c.label for c in Condition}) == len(Condition)


def test_a_hold_needs_a_reason(unit):
    unit.hold = UnitHold.QUARANTINED
    with pytest.raises(ValidationError) as exc:
        unit.full_clean()
    assert exc.value.message_dict["hold_reason"] == ["Say why the unit is held."]
    # The database refuses it too, whatever writes it.
    with pytest.raises(IntegrityError), transaction.atomic():
        Transponder.objects.filter(pk=unit.pk).update(hold=UnitHold.LOST, hold_reason="")
    unit.hold_reason = "water found behind the end cap"
    unit.full_clean()


def test_the_admin_shows_a_hold_but_leaves_setting_it_to_the_unit_page(client, supervisor, unit):
    # A hold set in the admin would skip the refusal of impossible moves and the hold history.
    supervisor.is_superuser = True
    supervisor.save()
    client.force_login(supervisor)
    url = f"/admin/fleet/transponder/{unit.pk}/change/"
    data = {
        "serial": unit.serial,
        "variant": unit.variant_id,
        "place": unit.place_id or "",
        "acoustic_address": unit.acoustic_address,
        "turnaround_delay_ms": unit.turnaround_delay_ms,
        "transmit_power_step": unit.transmit_power_step,
        "notes": "moved to the long shelf",
        "hold": "quarantined",
        "hold_reason": "water found behind the end cap",
    }
    assert client.post(url, data).status_code == 302
    unit.refresh_from_db()
    assert unit.notes == "moved to the long shelf"
    assert (unit.hold, unit.hold_reason, unit.hold_set_by) == (UnitHold.NONE, "", None)
    assert not unit.hold_changes.exists()
    page = client.get(url).content.decode()
    assert 'name="hold"' not in page
