"""fleet/services/fleet.py: variants with their positions and power steps, units brought into
service, moved and held. Each write is all or nothing and leaves the stored due rows equal to
a rebuild."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from fleet.due.condition import Condition, condition_of
from fleet.due.snapshot import rebuild_differences
from fleet.models import (
    AnodePosition,
    Deployment,
    DueRow,
    HoldChange,
    ReplyChargeStep,
    SealPosition,
    Transponder,
    UnitHold,
    Variant,
)
from fleet.services.deployments import deployment_start
from fleet.services.fleet import (
    VariantParts,
    unit_hold_set,
    unit_move,
    units_bring_into_service,
    variant_save,
)
from tests.builders import make_place, make_record, make_unit, serviced_unit

pytestmark = pytest.mark.django_db

AT = dt.datetime(2026, 5, 4, 10, 0, tzinfo=dt.UTC)


def _recently() -> dt.date:
    return timezone.localdate() - dt.timedelta(days=10)


def _new_variant(name: str = "Shelf variant 3000") -> Variant:
    return Variant(
        name=name,
        depth_rating_m=3000.0,
        housing_alloy="al7075",
        allowed_chemistries=["li_socl2"],
        cells_in_series=14,
        listen_current_a=0.0003,
    )


def _in_water(unit, site, by):
    return deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=timezone.now() - dt.timedelta(days=3),
            planned_days=90,
            planned_interrogations_per_day=100,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,
    )


def test_it_creates_a_variant_with_its_positions_and_power_steps():
    variant = variant_save(
        variant=_new_variant(),
        parts=VariantParts(
            anode_positions=[AnodePosition(name="Collar", new_net_mass_g=600.0)],
            seal_positions=[
                SealPosition(
                    name="End cap",
                    as568_dash="-240",
                    interval_months=12,
                    max_openings=4,
                    gland_kind="radial",
                    bore_diameter_mm=101.60,
                    groove_diameter_mm=95.96,
                    groove_width_mm=4.75,
                )
            ],
            reply_steps=[ReplyChargeStep(step=1, charge_per_reply_as=0.004)],
        ),
    )
    variant.refresh_from_db()
    assert [p.name for p in variant.anode_positions.all()] == ["Collar"]
    seal = variant.seal_positions.get()
    assert (seal.as568_dash, seal.groove_width_mm) == ("240", 4.75)  # dash normalised by clean()
    assert list(variant.reply_steps.values_list("step", flat=True)) == [1]


def test_a_refused_row_saves_nothing_and_leaves_the_callers_copies_new():
    variant = _new_variant()
    good = AnodePosition(name="Collar", new_net_mass_g=600.0)
    bad = SealPosition(name="End cap", interval_months=12, max_openings=4)  # no size at all
    with pytest.raises(ValidationError, match="Give an AS568 dash number"):
        variant_save(
            variant=variant, parts=VariantParts(anode_positions=[good], seal_positions=[bad])
        )
    assert not Variant.objects.exists() and not AnodePosition.objects.exists()
    assert variant.pk is None and good.pk is None


def test_an_edit_refreshes_the_units_so_stored_due_rows_equal_a_rebuild(
    variant, workshop, site, technician
):
    units = [
        make_unit(serial=f"TX-{i:04d}", acoustic_address=str(300 + i), variant=variant)
        for i in range(3)
    ]
    serviced_unit(units[0], by=technician, site=site, day=_recently())
    seal = variant.seal_positions.order_by("name").first()
    before = DueRow.objects.get(unit=units[0], key=f"seal:{seal.pk}").due_on

    seal.interval_months = 3
    added = AnodePosition(name="Release arm", new_net_mass_g=150.0)
    variant.listen_current_a = 0.0004
    variant_save(
        variant=variant, parts=VariantParts(anode_positions=[added], seal_positions=[seal])
    )

    after = DueRow.objects.get(unit=units[0], key=f"seal:{seal.pk}").due_on
    assert after < before  # a 3-month interval brings the seal change forward
    assert DueRow.objects.filter(unit__in=units, key=f"anode:{added.pk}").count() == 3
    differences, compared = rebuild_differences(at=timezone.now())
    assert differences == [] and compared > 0


def test_it_refuses_to_delete_a_position_with_history_and_saves_nothing(variant, unit, technician):
    position = variant.anode_positions.first()
    record = make_record(unit=unit, by=technician)
    from fleet.models import AnodeReading

    AnodeReading.objects.create(record=record, position=position, mass_g=390)
    variant.name = "Renamed"
    with pytest.raises(ValidationError, match=f"Anode position {position.name} has readings"):
        variant_save(variant=variant, parts=VariantParts(deleted=[position]))
    assert AnodePosition.objects.filter(pk=position.pk).exists()
    assert Variant.objects.get(pk=variant.pk).name == "Test variant 1500"


def test_it_deletes_a_position_without_history(variant, unit):
    position = variant.seal_positions.first()
    variant_save(variant=variant, parts=VariantParts(deleted=[position]))
    assert not SealPosition.objects.filter(pk=position.pk).exists()
    differences, _ = rebuild_differences(at=timezone.now())
    assert differences == []


def test_it_keeps_a_power_step_a_unit_uses(variant, unit):
    step = variant.reply_steps.get(step=1)
    with pytest.raises(ValidationError, match="Power step 1 is set on a unit"):
        variant_save(variant=variant, parts=VariantParts(deleted=[step]))
    step.step = 2  # renumbering it away from the unit's step is refused too
    with pytest.raises(ValidationError, match="Power step 1 is in use"):
        variant_save(variant=variant, parts=VariantParts(reply_steps=[step]))
    assert list(variant.reply_steps.values_list("step", flat=True)) == [1]


def _batch(variant, place, serials):
    return [
        Transponder(
            serial=serial,
            variant=variant,
            place=place,
            acoustic_address=str(400 + i),
            turnaround_delay_ms=12.5,
        )
        for i, serial in enumerate(serials)
    ]


def test_it_brings_several_units_into_service_with_their_due_rows(variant, workshop):
    units = units_bring_into_service(
        units=_batch(variant, workshop, [f"NB-{i:04d}" for i in range(1, 11)])
    )
    assert Transponder.objects.filter(serial__startswith="NB-").count() == 10
    assert all(DueRow.objects.filter(unit=u).exists() for u in units)
    assert rebuild_differences(at=timezone.now())[0] == []


def test_one_bad_serial_stops_the_whole_batch_and_each_is_named(variant, workshop, unit):
    batch = _batch(variant, workshop, ["NB-0001", "nb 2", unit.serial, "NB-0001", "NB-0005"])
    with pytest.raises(ValidationError) as caught:
        units_bring_into_service(units=batch)
    messages = caught.value.messages
    assert len(messages) == 3
    assert messages[0].startswith("nb 2: Use 2 to 31 capital letters")
    assert messages[1].startswith(f"{unit.serial}: Transponder with this Serial already exists")
    assert messages[2] == "NB-0001: listed twice."
    assert not Transponder.objects.filter(serial__startswith="NB-").exists()
    assert all(u.pk is None for u in batch)


def test_it_moves_a_unit_ashore_and_refuses_one_in_the_water(unit, site, technician):
    store = make_place(name="Store B", kind="store")
    unit_move(unit=unit, place=store, expected_version=unit.version)
    unit.refresh_from_db()
    assert unit.place == store and unit.version == 2
    with pytest.raises(ValidationError, match="already at Store B"):
        unit_move(unit=unit, place=store)
    with pytest.raises(ValidationError, match="changed after you loaded it"):
        unit_move(unit=unit, place=make_place(name="Shed"), expected_version=1)
    _in_water(unit, site, technician)
    with pytest.raises(ValidationError, match="is in the water"):
        unit_move(unit=unit, place=make_place(name="Quay"))
    assert Transponder.objects.get(pk=unit.pk).place == store


def test_a_hold_keeps_who_when_and_why_and_leads_the_condition(unit, supervisor):
    change = unit_hold_set(
        unit=unit, hold=UnitHold.QUARANTINED, reason="Cracked end cap", by=supervisor, at=AT
    )
    unit.refresh_from_db()
    assert (unit.hold, unit.hold_reason, unit.hold_set_by, unit.hold_set_at) == (
        "quarantined",
        "Cracked end cap",
        supervisor,
        AT,
    )
    assert (change.from_hold, change.to_hold, change.set_by) == ("none", "quarantined", supervisor)
    assert condition_of(unit, timezone.localdate()) == Condition.QUARANTINED
    unit_hold_set(unit=unit, hold=UnitHold.NONE, reason="New end cap fitted", by=supervisor, at=AT)
    unit.refresh_from_db()
    assert (unit.hold, unit.hold_reason) == ("none", "")
    assert [c.to_hold for c in HoldChange.objects.filter(unit=unit)] == ["none", "quarantined"]
    assert rebuild_differences(at=timezone.now())[0] == []


def test_lost_then_found_for_a_unit_in_the_water(unit, site, technician, supervisor):
    _in_water(unit, site, technician)
    with pytest.raises(ValidationError, match="recover it before retiring it"):
        unit_hold_set(unit=unit, hold=UnitHold.RETIRED, reason="Old", by=supervisor, at=AT)
    unit_hold_set(unit=unit, hold=UnitHold.LOST, reason="No reply", by=supervisor, at=AT)
    assert condition_of(unit, timezone.localdate()) == Condition.LOST
    unit_hold_set(unit=unit, hold=UnitHold.NONE, reason="Answered again", by=supervisor, at=AT)
    assert condition_of(unit, timezone.localdate()) == Condition.IN_WATER


def test_it_refuses_impossible_or_unexplained_holds(unit, technician, supervisor):
    with pytest.raises(ValidationError, match="already without a hold"):
        unit_hold_set(unit=unit, hold=UnitHold.NONE, reason="x", by=supervisor, at=AT)
    with pytest.raises(ValidationError, match="Say why"):
        unit_hold_set(unit=unit, hold=UnitHold.LOST, reason="   ", by=supervisor, at=AT)
    make_record(unit=unit, by=technician)  # an open bench visit: the unit is in hand
    for hold in (UnitHold.LOST, UnitHold.RETIRED):
        with pytest.raises(ValidationError, match="open bench visit"):
            unit_hold_set(unit=unit, hold=hold, reason="gone", by=supervisor, at=AT)
    assert not HoldChange.objects.exists()
    assert Transponder.objects.get(pk=unit.pk).hold == UnitHold.NONE
