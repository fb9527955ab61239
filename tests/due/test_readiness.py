"""Readiness checks and the campaign planner on hand-built histories."""

import datetime as dt

import gsw
import pytest

from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import Verdict, plan_campaign, readiness_for
from fleet.formatting import quantity, signed
from fleet.models import (
    AnodeReading,
    BatteryInstall,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
)
from tests.builders import make_site, make_unit
from tests.due.test_engine import ON, deploy, t, visit

pytestmark = pytest.mark.django_db

START = ON + dt.timedelta(days=7)


def serviced(unit, by, when=None):
    """A full bench visit: every check the readiness page looks at, recent and good."""
    when = when or t(2026, 11, 20)
    variant = unit.variant
    day = when.date()
    entries = [
        AnodeReading(position=p, mass_g=p.new_net_mass_g * 0.9)
        for p in variant.anode_positions.all()
    ]
    entries += [
        SealChange(position=s, material="NBR", cure_date=dt.date(2026, 1, 1), reason="interval")
        for s in variant.seal_positions.all()
    ]
    entries += [
        BatteryInstall(
            pack_serial=f"P-{unit.serial}",
            chemistry="li_socl2",
            nominal_voltage_v=75.6,
            capacity_ah=38.0,
            made_on=dt.date(2025, 12, 1),
            installed_on=day,
            ocv_install_v=76.5,
        ),
        PressureTest(
            tested_on=day,
            test_pressure_dbar=1900,
            hold_minutes=60,
            start_pressure_dbar=1900,
            end_pressure_dbar=1899,
            water_temperature_start_c=12,
            water_temperature_end_c=12.1,
            facility="Tank",
        ),
        ReleaseTest(
            tested_on=day,
            kind="load",
            load_kg=200,
            seconds_to_release=5,
            motor_current_a=1.1,
            limit_switch_ok=True,
            acoustic_command_ok=True,
        ),
        SensorCheck(
            checked_on=day,
            sensor="temperature",
            reference_value=10.0,
            unit_reading=10.02,
            raw_resistance_ohm=103.903,
        ),
        SensorCheck(checked_on=day, sensor="pressure", reference_value=1000.0, unit_reading=1000.3),
    ]
    visit(unit, by, when, *entries)
    return unit


def verdicts(result):
    return {c.name: c.verdict for c in result.checks}


def test_a_freshly_serviced_unit_passes_every_check(unit, site, technician):
    serviced(unit, technician)
    result = readiness_for(
        unit, PlannedDeployment(site, START, 60, interrogations_per_day=2000), on=ON
    )
    failing = {
        n: c.numbers for n, c in ((c.name, c) for c in result.checks) if c.verdict != Verdict.PASS
    }
    # Anodes have one reading each: the projection runs at the design rate, which passes.
    assert failing == {}, failing
    assert result.verdict == Verdict.PASS
    assert result.end == START + dt.timedelta(days=60)


def test_every_check_states_its_numbers_and_source(unit, site, technician):
    serviced(unit, technician)
    result = readiness_for(unit, PlannedDeployment(site, START, 60), on=ON)
    names = [c.name for c in result.checks]
    for expected in (
        "Depth rating",
        "Pressure test",
        "Battery",
        "Anode: Anode 1",
        "Seal: Seal 1",
        "Release test",
        "Recovery buoyancy",
        "Acoustic address",
    ):
        assert expected in names
    pressure = next(c for c in result.checks if c.name == "Pressure test")
    # Site 1350 m at 45 deg N: gsw 3.6.23 p_from_z(-1350, 45) = 1365.51 dbar; x 1.25 = 1706.9
    assert "this site needs 1,707 dbar (1,366 dbar × 1.25)" in pressure.numbers
    assert "TEOS-10" in pressure.source
    buoyancy = next(c for c in result.checks if c.name == "Recovery buoyancy")
    # Least favourable: the surface at the default 30 degC, SP 35, 0 dbar (TEOS-10 via gsw),
    # lighter than the seabed at 4 degC and 1365.5 dbar. Archimedes: 0.060 m3 x rho - 45 kg.
    sa = gsw.SA_from_SP(35.0, 0.0, site.longitude_deg, site.latitude_deg)
    rho = float(gsw.rho(sa, gsw.CT_from_t(sa, 30.0, 0.0), 0.0))
    assert buoyancy.verdict == Verdict.PASS
    # Printed with the house convention (fleet.formatting): a sign, thousands grouped,
    # one decimal at most.
    net = signed(0.060 * rho - 45.0, "kgf")
    assert f"{net} net at the surface ({quantity(rho, 'kg/m³', 1)})" in buoyancy.numbers
    # Reserve 10 % of 45 kg in air = 4.5 kgf, above the 2 kgf minimum (common practice).
    assert "needs 4.5 kgf" in buoyancy.numbers


def test_a_site_deeper_than_the_rating_fails(unit, technician):
    serviced(unit, technician)
    deep = make_site(name="Deep hole", water_depth_m=2500.0)
    result = readiness_for(unit, PlannedDeployment(deep, START, 30), on=ON)
    assert verdicts(result)["Depth rating"] == Verdict.FAIL
    # The test at 1900 dbar does not cover 2500 m x 1.25 either.
    assert verdicts(result)["Pressure test"] == Verdict.FAIL


def test_a_long_job_at_a_high_reply_rate_runs_the_battery_flat(unit, site, technician):
    serviced(unit, technician)
    result = readiness_for(
        unit, PlannedDeployment(site, START, 365, interrogations_per_day=100_000), on=ON
    )
    battery = next(c for c in result.checks if c.name == "Battery")
    assert battery.verdict == Verdict.FAIL
    # 200 uA x 24 h + 100,000 x 5 mA.s / 3600 = 0.0048 + 0.1389 Ah a day -> ~52 Ah a year
    assert "need 5" in battery.numbers


def test_seals_that_fall_due_during_the_job_fail(unit, site, technician):
    serviced(unit, technician, when=t(2026, 1, 10))  # 12-month seals lapse 2027-01-10
    result = readiness_for(unit, PlannedDeployment(site, START, 90), on=ON)
    assert verdicts(result)["Seal: Seal 1"] == Verdict.FAIL


def test_an_address_already_in_use_at_the_site_fails(unit, site, technician, variant, workshop):
    serviced(unit, technician)
    other = make_unit(
        serial="TX-0002", acoustic_address=unit.acoustic_address, variant=variant, place=workshop
    )
    deploy(other, site, technician, t(2026, 11, 1))
    result = readiness_for(unit, PlannedDeployment(site, START, 30), on=ON)
    address = next(c for c in result.checks if c.name == "Acoustic address")
    assert address.verdict == Verdict.FAIL
    assert "TX-0002" in address.numbers


def test_a_start_beyond_the_planning_horizon_is_refused_not_overflowed(site):
    with pytest.raises(ValueError, match="on or before"):
        PlannedDeployment(site, dt.date(9999, 12, 31), 3650).check_start(ON)


def test_a_start_in_the_past_is_refused(unit, site):
    with pytest.raises(ValueError, match="start must be today"):
        PlannedDeployment(site, ON - dt.timedelta(days=1), 30).check_start(ON)


def test_the_planner_ranks_by_margin_and_explains_rejects(variant, workshop, site, technician):
    a = serviced(
        make_unit(serial="TX-A", acoustic_address="1", variant=variant, place=workshop), technician
    )
    b = make_unit(serial="TX-B", acoustic_address="2", variant=variant, place=workshop)
    serviced(b, technician)
    # B's anodes are more worn: less margin.
    visit(
        b,
        technician,
        t(2026, 11, 25),
        *[
            AnodeReading(position=p, mass_g=p.new_net_mass_g * 0.6)
            for p in variant.anode_positions.all()
        ],
    )
    c = make_unit(
        serial="TX-C", acoustic_address="3", variant=variant, place=workshop
    )  # nothing recorded
    plan = plan_campaign(PlannedDeployment(site, START, 60), wanted=3, on=ON)
    assert [r.unit.serial for r in plan.ready] == [a.serial, b.serial]
    assert [r.unit.serial for r in plan.rejected] == [c.serial]
    assert plan.rejected[0].first_failure.name == "Pressure test"
    assert plan.shortfall == 1


def test_the_planner_never_sends_two_units_with_one_address(variant, workshop, site, technician):
    first = serviced(
        make_unit(serial="TX-A", acoustic_address="7", variant=variant, place=workshop), technician
    )
    second = serviced(
        make_unit(serial="TX-B", acoustic_address="7", variant=variant, place=workshop), technician
    )
    plan = plan_campaign(PlannedDeployment(site, START, 30), wanted=2, on=ON)
    assert [r.unit.serial for r in plan.ready] == [first.serial]
    assert [r.unit.serial for r in plan.rejected] == [second.serial]
    reason = plan.rejected[0].first_failure
    assert reason.name == "Acoustic address"
    assert "TX-A" in reason.numbers


def test_the_plan_counts_what_keeps_units_back(variant, workshop, site, technician):
    make_unit(serial="TX-X", acoustic_address="11", variant=variant, place=workshop)
    make_unit(serial="TX-Y", acoustic_address="12", variant=variant, place=workshop)
    plan = plan_campaign(PlannedDeployment(site, START, 30), wanted=1, on=ON)
    blockers = dict(plan.blockers)
    # Nothing recorded on either: no pressure test, no pack, no release test, for both.
    assert blockers["Pressure test"] == 2
    assert blockers["Battery"] == 2
    assert blockers["Release test"] == 2
