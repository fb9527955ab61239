"""The words of every check: each built by one function, each number said once, each source
cited for its own quantity, nothing recalled printed as a source, shortfalls in their units."""

import re

import pytest

from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import Verdict, readiness_for, sensor_source
from fleet.models import HousingOpening, SensorCheck
from tests.builders import make_site
from tests.due.test_engine import ON, t, visit
from tests.due.test_readiness import serviced

pytestmark = pytest.mark.django_db


def checks(result):
    return {c.name: c for c in result.checks}


def clauses_of(text: str) -> list[str]:
    return [part.strip() for part in text.split(";")]


def test_no_check_repeats_a_clause_or_leaves_a_stray_semicolon(unit, site, technician):
    serviced(unit, technician)
    # An opening after the test voids it: the pressure check names the test once, and the
    # day of the opening.
    visit(
        unit,
        technician,
        t(2026, 11, 26),
        HousingOpening(
            opened_at=t(2026, 11, 26, 9),
            closed_at=t(2026, 11, 26, 10),
            vented_before_opening=True,
            reason="swap board",
        ),
    )
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    for check in result.checks:
        parts = clauses_of(check.numbers)
        assert len(parts) == len(set(parts)), check
        assert "" not in parts, check
        assert not check.numbers.rstrip().endswith(";"), check
    pressure = checks(result)["Pressure test"]
    assert pressure.verdict == Verdict.FAIL
    assert pressure.numbers.count("tested 2026-11-20 at 1,900 dbar") == 1
    assert "void: the housing was opened on 2026-11-26" in pressure.numbers


def test_a_site_deeper_than_the_rating_says_by_how_much(unit, technician):
    serviced(unit, technician)
    trench = make_site(name="Trench", water_depth_m=2800.0)
    depth = checks(readiness_for(unit, PlannedDeployment(trench, ON, 30), on=ON))["Depth rating"]
    assert depth.verdict == Verdict.FAIL
    # 2800 m against the test variant's 1500 m rating: 1300 m too deep (arithmetic).
    assert depth.numbers == "site 2,800 m is 1,300 m deeper than the 1,500 m rating"
    assert "%" not in depth.numbers


def test_a_sunk_unit_gives_its_net_buoyancy_once(unit, site, technician):
    serviced(unit, technician)
    unit.variant.displaced_volume_m3 = 0.030  # 0.030 m³ of seawater (~31 kg) lifts less than 45 kg
    unit.variant.save()
    buoyancy = checks(readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON))[
        "Recovery buoyancy"
    ]
    assert buoyancy.verdict == Verdict.FAIL
    assert buoyancy.numbers.count("kgf net") == 1
    assert "the unit sinks" in buoyancy.numbers


def test_each_sensor_cites_the_source_of_its_own_quantity():
    assert "IEC 60751" in sensor_source(SensorCheck.Sensor.TEMPERATURE)
    assert "IEC 60751" not in sensor_source(SensorCheck.Sensor.PRESSURE)
    assert "TEOS-10" in sensor_source(SensorCheck.Sensor.PRESSURE)
    assert "IEC 60751" not in sensor_source(SensorCheck.Sensor.TILT)
    assert "TEOS-10" not in sensor_source(SensorCheck.Sensor.TILT)


def test_no_check_prints_a_recalled_value_as_its_source(unit, site, technician):
    serviced(unit, technician)
    result = readiness_for(unit, PlannedDeployment(site, ON, 30), on=ON)
    for check in result.checks:
        assert "from memory" not in check.source, check
        assert "from memory" not in check.numbers, check


def test_a_battery_that_runs_out_says_by_how_much(unit, site, technician):
    serviced(unit, technician)
    long_job = PlannedDeployment(site, ON, 3000, interrogations_per_day=5000)
    battery = checks(readiness_for(unit, long_job, on=ON))["Battery"]
    assert battery.verdict == Verdict.FAIL
    # The shortfall is what the job needs less what the pack holds, both stated before it.
    match = re.search(
        r"^([\d.,]+) Ah on .* need ([\d.,]+) Ah; short by ([\d.,]+) Ah: the pack runs out "
        r"before recovery$",
        battery.numbers,
    )
    assert match, battery.numbers
    have, need, short = (float(g.replace(",", "")) for g in match.groups())
    assert short == pytest.approx(need - have, abs=0.011)
