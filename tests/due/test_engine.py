"""Due rules on hand-built histories, written through the same services as the pages."""

import datetime as dt

import pytest

from fleet.due.engine import DueState, evaluate_fleet, evaluate_unit, fleet_queryset
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    Deployment,
    HousingOpening,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
    Transponder,
)
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.records import service_record_close, service_record_save
from tests.builders import pressure_test

pytestmark = pytest.mark.django_db

ON = dt.date(2026, 11, 30)
AT = dt.datetime(2026, 11, 30, 12, 0, tzinfo=dt.UTC)


def t(*args: int) -> dt.datetime:
    return dt.datetime(*args, tzinfo=dt.UTC)


def visit(unit, by, when, *entries, close=True):
    """A bench visit; closed twelve hours after it opened when it has entries (one open visit
    per unit at a time), left open when it has none or ``close`` is False."""
    record = ServiceRecord(unit=unit, opened_at=when, technician=by, place=unit.place)
    record = service_record_save(record=record, entries=list(entries), by=by)
    if close and entries:
        service_record_close(record=record, by=by, at=when + dt.timedelta(hours=12))
    return record


def deploy(unit, site, by, start, end=None, *, per_day=500, replies=None):
    d = deployment_start(
        deployment=Deployment(
            unit=unit,
            site=site,
            over_side_at=start,
            planned_days=100,
            planned_interrogations_per_day=per_day,
            transmit_power_step=1,
        ),
        by=by,
        check_readiness=False,  # a built history: readiness is tested on its own
    )
    if end is not None:
        deployment_recover(
            deployment=d, recovered_at=end, replies_counted=replies, place=None, by=by
        )
    return d


def evaluate(unit):
    fresh = fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get()
    return evaluate_unit(fresh, on=ON)


def item(ev, label):
    return next(i for i in ev.items if i.item == label)


def test_a_unit_with_no_records_has_no_data_for_anything(unit):
    ev = evaluate(unit)
    assert {i.state for i in ev.items} == {DueState.NO_DATA}
    assert item(ev, "Anode: Anode 1").basis == "no reading recorded"


def test_one_reading_without_a_design_current_cannot_be_projected(unit, technician):
    position = unit.variant.anode_positions.get(name="Anode 1")
    position.design_current_a = None
    position.save()
    visit(unit, technician, t(2026, 1, 5), AnodeReading(position=position, mass_g=380))
    anode = item(evaluate(unit), "Anode: Anode 1")
    assert anode.state == DueState.NO_DATA
    assert "second reading" in anode.basis


def test_one_reading_projects_at_the_design_rate(unit, site, technician):
    position = unit.variant.anode_positions.get(name="Anode 1")
    deploy(unit, site, technician, t(2025, 1, 1), t(2025, 12, 1))
    visit(unit, technician, t(2025, 12, 2), AnodeReading(position=position, mass_g=380))
    ev = evaluate(unit)
    anode = item(ev, "Anode: Anode 1")
    projection = ev.anodes[0]
    # Design rate: 5 mA on Al-Zn-In, 2000 Ah/kg -> 0.005*24/2000 kg/day = 0.06 g/day.
    # DNV-RP-B401 (2010) Sec. 7, m = I t / eps
    assert projection.fit.rate_source == "design"
    assert projection.fit.rate_kg_per_day == pytest.approx(0.005 * 24 / 2000)
    assert "design rate" in anode.basis
    assert anode.due_on is not None


def test_two_readings_fit_the_wear_against_immersed_days(unit, site, technician):
    position = unit.variant.anode_positions.get(name="Anode 1")
    deploy(unit, site, technician, t(2025, 1, 1), t(2025, 4, 11))  # 100 days in the water
    visit(unit, technician, t(2025, 4, 12), AnodeReading(position=position, mass_g=390))
    deploy(unit, site, technician, t(2025, 5, 1), t(2025, 8, 9))  # 100 more
    visit(unit, technician, t(2025, 8, 10), AnodeReading(position=position, mass_g=370))
    ev = evaluate(unit)
    p = ev.anodes[0]
    # 20 g over 100 immersed days (the dry weeks between do not count).
    assert p.fit.rate_kg_per_day == pytest.approx(0.0002)
    assert p.fit.rate_source == "fit"
    # Threshold 50 % of 400 g = 200 g; at 370 g on immersed day 200 -> 850 more immersed days.
    assert p.remaining_immersed_days == pytest.approx(850.0, rel=1e-6)
    # Projected from the last event, the visit of 10 August: 200 immersed days of the 221
    # calendar days since the first deployment, so 850 immersed days are 850 × 221 / 200
    # calendar days from then, whatever day it is computed on.
    anode = item(ev, "Anode: Anode 1")
    assert ev.duty.fraction == pytest.approx(200 / 221, rel=1e-3)
    assert anode.due_on == (t(2025, 8, 10) + dt.timedelta(days=850.0 * 221 / 200)).date()
    # design 0.06 g/day vs fitted 0.2 g/day: more than 1.5x -> flagged
    assert any("design rate" in f for f in anode.flags)


def test_a_replaced_anode_starts_a_new_wear_line(unit, site, technician):
    position = unit.variant.anode_positions.get(name="Anode 1")
    deploy(unit, site, technician, t(2025, 1, 1), t(2025, 4, 11))
    visit(
        unit, technician, t(2025, 4, 12), AnodeReading(position=position, mass_g=210, replaced=True)
    )
    deploy(unit, site, technician, t(2025, 5, 1), t(2025, 8, 9))
    visit(unit, technician, t(2025, 8, 10), AnodeReading(position=position, mass_g=390))
    p = evaluate(unit).anodes[0]
    # New anode 400 g at immersed day 0 of its life, 390 g 100 immersed days later.
    assert p.fit.n_points == 2
    assert p.fit.rate_kg_per_day == pytest.approx(0.0001)
    assert p.immersed_days_since_fit == pytest.approx(100.0)


def test_high_bond_resistance_makes_the_anode_overdue(unit, technician):
    position = unit.variant.anode_positions.get(name="Anode 1")
    visit(
        unit,
        technician,
        t(2026, 1, 5),
        AnodeReading(position=position, mass_g=390, bond_resistance_ohm=0.8),
    )
    anode = item(evaluate(unit), "Anode: Anode 1")
    assert anode.state == DueState.OVERDUE
    assert any("bond resistance 0.8 Ω" in f for f in anode.flags)


def test_a_seal_is_due_after_its_calendar_interval(unit, technician):
    seal = unit.variant.seal_positions.get(name="Seal 1")
    visit(
        unit,
        technician,
        t(2025, 10, 20),
        SealChange(position=seal, material="NBR", cure_date=dt.date(2025, 1, 1), reason="interval"),
    )
    item_ = item(evaluate(unit), "Seal: Seal 1 (AS568-240)")
    assert item_.due_on == dt.date(2026, 10, 20)  # 12 months, common practice
    assert item_.state == DueState.OVERDUE


def test_a_seal_is_due_when_its_openings_are_used_up(unit, technician):
    seal = unit.variant.seal_positions.get(name="Seal 1")
    visit(
        unit,
        technician,
        t(2026, 6, 1),
        SealChange(position=seal, material="FKM", cure_date=dt.date(2026, 1, 1), reason="interval"),
    )
    for day in range(2, 8):  # six later openings; the limit is 6
        visit(
            unit,
            technician,
            t(2026, 6, day),
            HousingOpening(
                opened_at=t(2026, 6, day, 10),
                closed_at=t(2026, 6, day, 11),
                vented_before_opening=True,
                reason="check",
            ),
        )
    item_ = item(evaluate(unit), "Seal: Seal 1 (AS568-240)")
    assert item_.state == DueState.OVERDUE
    assert "6 of 6 since fit" in item_.basis


def test_a_pressure_test_is_valid_for_twelve_months(unit, technician):
    visit(unit, technician, t(2026, 2, 1), pressure_test(dt.date(2026, 2, 1)))
    test = item(evaluate(unit), "Pressure test")
    assert test.due_on == dt.date(2027, 2, 1)
    assert test.state == DueState.CURRENT
    # 1.25 x gsw pressure at 1500 m, 45 deg N: gsw 3.6.23 p_from_z(-1500, 45) = 1517.4 dbar
    assert "needs 1,897 dbar" in test.basis


def test_a_housing_opening_voids_thepressure_test(unit, technician):
    visit(unit, technician, t(2026, 2, 1), pressure_test(dt.date(2026, 2, 1)))
    visit(
        unit,
        technician,
        t(2026, 3, 1),
        HousingOpening(
            opened_at=t(2026, 3, 1, 9),
            closed_at=t(2026, 3, 1, 10),
            vented_before_opening=True,
            reason="swap board",
        ),
    )
    test = item(evaluate(unit), "Pressure test")
    assert test.state == DueState.OVERDUE
    assert "void" in test.basis


def test_an_opening_before_the_test_in_the_same_visit_does_not_void_it(unit, technician):
    visit(
        unit,
        technician,
        t(2026, 2, 1),
        HousingOpening(
            opened_at=t(2026, 2, 1, 9),
            closed_at=t(2026, 2, 1, 10),
            vented_before_opening=True,
            reason="seals",
        ),
        pressure_test(dt.date(2026, 2, 1)),
    )
    assert item(evaluate(unit), "Pressure test").state == DueState.CURRENT


def test_an_opening_after_the_test_in_the_same_visit_voids_it(unit, technician):
    visit(
        unit,
        technician,
        t(2026, 2, 1),
        pressure_test(dt.date(2026, 2, 1), hold_ended_at=dt.time(11, 0)),
        HousingOpening(
            opened_at=t(2026, 2, 1, 15),
            closed_at=t(2026, 2, 1, 16),
            vented_before_opening=True,
            reason="check",
        ),
    )
    test = item(evaluate(unit), "Pressure test")
    assert test.state == DueState.OVERDUE
    assert test.failed
    assert "void: the housing was opened on 2026-02-01" in test.basis


def test_a_test_with_no_time_of_day_is_voided_by_an_opening_that_day(unit, technician):
    # Without the hold's end time the order is unknown: the safe side is to void it.
    visit(
        unit,
        technician,
        t(2026, 2, 1),
        HousingOpening(
            opened_at=t(2026, 2, 1, 9),
            closed_at=t(2026, 2, 1, 10),
            vented_before_opening=True,
            reason="seals",
        ),
        pressure_test(dt.date(2026, 2, 1), hold_ended_at=None),
    )
    assert item(evaluate(unit), "Pressure test").state == DueState.OVERDUE


def test_a_test_below_the_rating_pressure_is_not_accepted(unit, technician):
    visit(
        unit,
        technician,
        t(2026, 2, 1),
        pressure_test(
            dt.date(2026, 2, 1),
            start_pressure_dbar=1000,
            end_pressure_dbar=999,
            test_pressure_dbar=1000,
        ),
    )
    test = item(evaluate(unit), "Pressure test")
    assert test.state == DueState.OVERDUE
    assert "below the required" in test.basis


def test_a_failed_release_test_is_overdue_at_once(unit, technician):
    visit(
        unit,
        technician,
        t(2026, 11, 1),
        ReleaseTest(
            tested_on=dt.date(2026, 11, 1),
            kind="bench",
            seconds_to_release=5,
            motor_current_a=1.0,
            limit_switch_ok=False,
            acoustic_command_ok=True,
        ),
    )
    test = item(evaluate(unit), "Release test")
    assert test.state == DueState.OVERDUE
    assert "limit switch not confirmed" in test.basis


def test_a_temperature_sensor_is_checked_against_its_pt100_element(unit, technician):
    # IEC 60751: 108.5 ohm is 21.82 degC; the reference says 21.0 -> outside class B (0.405).
    visit(
        unit,
        technician,
        t(2026, 11, 1),
        SensorCheck(
            checked_on=dt.date(2026, 11, 1),
            sensor="temperature",
            reference_value=21.0,
            unit_reading=21.05,
            raw_resistance_ohm=108.5,
        ),
    )
    check = item(evaluate(unit), "Sensor check: Temperature (°C)")
    assert check.state == DueState.OVERDUE
    assert "IEC 60751 class B" in check.basis


def test_the_battery_runs_down_with_replies_and_listening(unit, site, technician):
    visit(
        unit,
        technician,
        t(2025, 1, 2),
        BatteryInstall(
            pack_serial="P1",
            chemistry="alkaline",
            nominal_voltage_v=31.5,
            capacity_ah=17.0,
            made_on=dt.date(2024, 12, 1),
            installed_on=dt.date(2025, 1, 2),
            ocv_install_v=32.5,
        ),
    )
    deploy(unit, site, technician, t(2025, 2, 1), t(2025, 5, 12), replies=50_000)  # 100 days
    ev = evaluate(unit)
    b = ev.battery
    # 100 days x 24 h x 200 uA = 0.48 Ah; 50,000 replies x 0.005 A.s = 250 A.s = 0.0694 Ah;
    # one release at 0 A.s. Arithmetic of charge = I t (no published source needed).
    assert b.used_ah == pytest.approx(0.48 + 250 / 3600, rel=1e-6)
    # Alkaline at 4 degC: Linden's Handbook ch. 11 curve (from memory) 0.65 + 4/5 x 0.10 = 0.73
    assert b.usable_ah == pytest.approx(17.0 * 0.73 * (1 - 0.03 * b.age_years), rel=1e-6)
    battery = item(ev, "Battery")
    assert battery.state in (DueState.CURRENT, DueState.DUE_SOON, DueState.OVERDUE)
    assert "Ah usable left" in battery.basis


def test_the_engine_reads_a_fleet_in_a_constant_number_of_queries(
    variant, workshop, site, technician, django_assert_max_num_queries
):
    from tests.builders import make_unit

    def build(n, start):
        for i in range(start, start + n):
            u = make_unit(
                serial=f"Q-{i:04d}", acoustic_address=str(i), variant=variant, place=workshop
            )
            visit(
                u,
                technician,
                t(2026, 1, 5),
                AnodeReading(position=variant.anode_positions.first(), mass_g=380),
            )

    build(10, 0)
    # Expect 6 queries: units joined with variant, place and state rows; anode states;
    # seal states; the variants' anode positions, seal positions and reply charge steps.
    with django_assert_max_num_queries(6):
        small = evaluate_fleet(on=ON)
    build(190, 10)
    with django_assert_max_num_queries(6):
        large = evaluate_fleet(on=ON)
    assert len(small) == 10
    assert len(large) == 200


def test_a_test_set_to_the_proof_pressure_on_the_gauge_is_accepted(unit, technician):
    # 1.25 x gsw p at 1500 m, 45 deg = 1896.7 dbar; a gauge set to 1895 is within 0.5 %.
    visit(
        unit,
        technician,
        t(2026, 2, 1),
        pressure_test(dt.date(2026, 2, 1), start_pressure_dbar=1895, end_pressure_dbar=1894),
    )
    assert item(evaluate(unit), "Pressure test").state == DueState.CURRENT


def test_an_entry_cannot_be_moved_to_another_record(unit, technician):
    from django.core.exceptions import ValidationError

    position = unit.variant.anode_positions.first()
    first = visit(unit, technician, t(2026, 2, 1), AnodeReading(position=position, mass_g=390))
    reading = first.anode_readings.get()
    with pytest.raises(ValidationError, match="within its own record"):
        visit(unit, technician, t(2026, 3, 1), reading)
    reading.refresh_from_db()
    assert reading.record_id == first.pk
