"""Verdicts that gate: a failed test fails on any start date, a new anode brings no old bond
reading, recovery buoyancy keeps a reserve even for a unit that floats, judged where the water
is least dense, one minimum hold, self-discharge by its own temperature law, reply timing."""

import datetime as dt
import math

import gsw
import pytest
from django.conf import settings

from fleet.calc import battery as calc_battery
from fleet.calc import pressure as calc_pressure
from fleet.due.engine import evaluate_unit, fleet_queryset
from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import Verdict, plan_campaign, readiness_for
from fleet.due.rules import rules_for
from fleet.formatting import quantity, signed
from fleet.models import AnodeReading, AnodeState, PressureTest, ReleaseTest, Transponder
from tests.due.test_engine import ON, t, visit
from tests.due.test_readiness import serviced, verdicts

pytestmark = pytest.mark.django_db


def checks(result):
    return {c.name: c for c in result.checks}


def _failed_hold(day: dt.date) -> PressureTest:
    # 1900 -> 1860 dbar over the hold: 2.1 % against the 1 % allowed (common practice).
    return PressureTest(
        tested_on=day,
        hold_ended_at=dt.time(16, 0),
        test_pressure_dbar=1900,
        hold_minutes=60,
        start_pressure_dbar=1900,
        end_pressure_dbar=1860,
        water_temperature_start_c=12,
        water_temperature_end_c=12.1,
        facility="Tank",
    )


def test_a_failed_hold_fails_readiness_for_a_start_today_and_the_planner_leaves_it_out(
    unit, site, technician
):
    serviced(unit, technician)
    visit(unit, technician, t(2026, 11, 25), _failed_hold(dt.date(2026, 11, 25)))
    for start in (ON, ON + dt.timedelta(days=1)):
        result = readiness_for(unit, PlannedDeployment(site, start, 30), on=ON)
        pressure = checks(result)["Pressure test"]
        assert pressure.verdict == Verdict.FAIL, (start, pressure)
        assert "pressure fell 40.0 dbar (2.11 %)" in pressure.numbers
    plan = plan_campaign(PlannedDeployment(site, ON, 30), wanted=1, on=ON)
    assert unit.serial not in {r.unit.serial for r in plan.ready}


def test_a_release_test_failed_under_load_fails_readiness_today(unit, site, technician):
    serviced(unit, technician)
    failed = ReleaseTest(
        tested_on=dt.date(2026, 11, 25),
        kind="load",
        load_kg=200,
        seconds_to_release=75,  # limit 60 s (common practice)
        motor_current_a=1.1,
        limit_switch_ok=True,
        acoustic_command_ok=True,
    )
    visit(unit, technician, t(2026, 11, 25), failed)
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    release = checks(result)["Release test"]
    assert release.verdict == Verdict.FAIL
    assert "took 75 s, limit 60 s" in release.numbers


def test_a_replacement_anode_starts_with_no_bond_reading_of_its_own(unit, site, technician):
    serviced(unit, technician)
    position = unit.variant.anode_positions.first()
    # The bond was measured on the old anode before it came off: 0.5 ohm, over the limit.
    visit(
        unit,
        technician,
        t(2026, 11, 26),
        AnodeReading(position=position, mass_g=150.0, bond_resistance_ohm=0.5, replaced=True),
    )
    state = AnodeState.objects.get(unit=unit, position=position)
    assert state.last_bond_resistance_ohm is None
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    assert checks(result)[f"Anode: {position.name}"].verdict == Verdict.PASS


def _surface_density(site) -> float:
    # TEOS-10 via gsw: the default 30 degC surface water at the site's salinity, 0 dbar.
    sa = gsw.SA_from_SP(site.practical_salinity, 0.0, site.longitude_deg, site.latitude_deg)
    return float(gsw.rho(sa, gsw.CT_from_t(sa, 30.0, 0.0), 0.0))


def _seabed_density(site) -> float:
    p = float(gsw.p_from_z(-site.water_depth_m, site.latitude_deg))
    sa = gsw.SA_from_SP(site.practical_salinity, p, site.longitude_deg, site.latitude_deg)
    return float(gsw.rho(sa, gsw.CT_from_t(sa, site.bottom_temperature_c, p), p))


def test_a_floating_unit_must_keep_a_reserve_of_its_mass_in_air(unit, site, technician):
    serviced(unit, technician)
    variant = unit.variant
    rho = _surface_density(site)
    # 45 kg in air floating with +3 kgf: above the 2 kgf minimum, below the reserve of
    # 10 % of 45 kg = 4.5 kgf (common practice, no published source).
    variant.mass_in_air_kg = 45.0
    variant.displaced_volume_m3 = 48.0 / rho
    variant.save()
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    buoyancy = checks(result)["Recovery buoyancy"]
    assert buoyancy.verdict == Verdict.FAIL
    assert "+3 kgf net at the surface" in buoyancy.numbers
    assert "needs 4.5 kgf" in buoyancy.numbers
    assert "; 1.5 kgf short" in buoyancy.numbers  # 4.5 - 3.0, said once
    assert buoyancy.numbers.count("kgf net") == 1


def test_buoyancy_is_judged_where_the_water_is_least_dense_on_the_way_up(unit, site, technician):
    serviced(unit, technician)
    variant = unit.variant
    surface, seabed = _surface_density(site), _seabed_density(site)
    assert surface < seabed  # warm surface water is lighter than cold deep water
    # A volume that gives +4.9 kgf at the seabed (passes 4.5) but less at the surface.
    variant.mass_in_air_kg = 45.0
    variant.displaced_volume_m3 = 49.9 / seabed
    variant.save()
    at_surface = variant.displaced_volume_m3 * surface - 45.0
    assert at_surface < 4.5
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    buoyancy = checks(result)["Recovery buoyancy"]
    assert buoyancy.verdict == Verdict.FAIL
    net = signed(at_surface, "kgf")
    assert f"{net} net at the surface ({quantity(surface, 'kg/m³', 1)})" in buoyancy.numbers


def test_the_minimum_hold_is_one_setting_and_calc_has_no_default_of_its_own(unit, site, technician):
    minimum = settings.HOLDFAST["PRESSURE_HOLD_MIN_MINUTES"]
    assert rules_for(unit.variant).hold_min_minutes == minimum
    with pytest.raises(TypeError):
        calc_pressure.evaluate_hold(1900, 1899, 60, 12, 12, False, 1890)  # type: ignore[call-arg]
    serviced(unit, technician)
    short = _failed_hold(dt.date(2026, 11, 25))
    short.end_pressure_dbar, short.hold_minutes = 1899, minimum - 5
    visit(unit, technician, t(2026, 11, 25), short)
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    assert f"shorter than the minimum {minimum:g} min" in checks(result)["Pressure test"].numbers


def test_self_discharge_follows_its_own_temperature_law_where_the_pack_is(unit, site, technician):
    serviced(unit, technician)
    ev = evaluate_unit(fleet_queryset(Transponder.objects.filter(pk=unit.pk)).get(), on=ON)
    b = ev.battery
    assert b is not None
    store_t = settings.HOLDFAST["BATTERY_DEFAULT_TEMPERATURE_C"]
    # Never deployed: it sits in the store, and the store's rate is what the projection uses.
    assert ev.duty.fraction is None and b.temperature_c == store_t
    spec = calc_battery.PackSpec("li_socl2_bobbin", 21, 1, 38.0)
    expected = calc_battery.self_discharge_ah_per_day(spec, store_t)
    assert b.store_self_discharge_daily_ah == pytest.approx(expected)
    # Arrhenius with the rate doubling from 20 to 30 degC (IUPAC Gold Book, "Arrhenius
    # equation"; the doubling per 10 K is common practice): a warm site drains twice as fast.
    assert calc_battery.self_discharge_ah_per_day(spec, 30.0) == pytest.approx(2 * expected)
    # Not the capacity derating factor, which is ~1 at 20 and 30 degC (Linden, from memory).
    assert not math.isclose(
        calc_battery.temperature_factor("li_socl2_bobbin", 30.0)
        / calc_battery.temperature_factor("li_socl2_bobbin", 20.0),
        2.0,
        rel_tol=0.2,
    )


def test_reply_timing_fails_when_the_interrogation_cycle_is_shorter_than_the_echo(
    unit, site, technician
):
    serviced(unit, technician)
    p = float(gsw.p_from_z(-site.water_depth_m, site.latitude_deg))
    sa = gsw.SA_from_SP(site.practical_salinity, p, site.longitude_deg, site.latitude_deg)
    c = float(gsw.sound_speed(sa, gsw.CT_from_t(sa, site.bottom_temperature_c, p), p))
    # Straight below at 1350 m: 2 r / c + 12.5 ms turnaround (TEOS-10 via gsw).
    overhead = 2 * site.water_depth_m / c + unit.turnaround_delay_ms / 1000.0
    assert overhead > 1.0
    short = readiness_for(unit, PlannedDeployment(site, ON, 30, ping_interval_s=1.0), on=ON)
    timing = checks(short)["Reply timing"]
    assert timing.verdict == Verdict.FAIL
    assert f"overhead 1350 m: reply at {overhead:.3f} s" in timing.numbers
    assert (
        verdicts(readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON))["Reply timing"]
        == Verdict.PASS
    )


def test_the_record_page_shows_each_tests_verdict_beside_it(unit, technician, as_viewer):
    passing_release = ReleaseTest(
        tested_on=dt.date(2026, 11, 25),
        kind="bench",
        seconds_to_release=5,
        motor_current_a=1.1,
        limit_switch_ok=True,
        acoustic_command_ok=True,
    )
    record = visit(
        unit, technician, t(2026, 11, 25), _failed_hold(dt.date(2026, 11, 25)), passing_release
    )
    body = as_viewer.get(record.get_absolute_url()).content.decode()
    assert "verdict-fail" in body and "verdict-pass" in body
    assert "pressure fell 40.0 dbar (2.11 %), more than the allowed 1 %" in body


def test_the_planner_reads_a_fleet_in_the_same_number_of_queries_for_more_units(
    variant, workshop, site, technician, django_assert_num_queries
):
    from tests.builders import make_unit

    def plan():
        return plan_campaign(PlannedDeployment(site, ON, 30), wanted=2, on=ON)

    for i in range(3):
        serviced(
            make_unit(serial=f"PQ-{i:04d}", acoustic_address=f"5{i:02d}", place=workshop),
            technician,
        )
    # Expect 8 queries: the site's units in the water (their addresses); the variants and
    # their anode positions, seal positions and reply charge steps (read once each); the
    # units' columns with place, state and condition as plain values in one; their anode
    # state rows; their dated due rows.
    with django_assert_num_queries(8):
        small = plan()
    for i in range(3, 12):
        serviced(
            make_unit(serial=f"PQ-{i:04d}", acoustic_address=f"5{i:02d}", place=workshop),
            technician,
        )
    with django_assert_num_queries(8):
        large = plan()
    assert len(small.ready) + len(small.rejected) == 3
    assert len(large.ready) + len(large.rejected) == 12
