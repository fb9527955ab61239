"""Domain constants that forms import are the very limits the calc functions enforce."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from fleet.calc import battery, buoyancy, pressure, ranging, rtd, seawater

PACK = battery.PackSpec("li_socl2_bobbin", 1, 1, 19.0)
HOLD = {
    "start_pressure_dbar": 1710.0,
    "end_pressure_dbar": 1705.0,
    "hold_minutes": 60.0,
    "water_temperature_start_c": 4.0,
    "water_temperature_end_c": 4.0,
    "ingress_found": False,
    "required_pressure_dbar": 1.0,
    "min_hold_minutes": 30.0,
}


def _hold_at(name: str) -> Callable[[float], object]:
    def call(value: float) -> object:
        args = {**HOLD, name: value}
        if name == "water_temperature_start_c":
            args["water_temperature_end_c"] = value
        return pressure.evaluate_hold(**args)  # type: ignore[arg-type]

    return call


@pytest.mark.parametrize(
    ("domain", "call", "name", "step"),
    [
        # the ranges come from each module's docstring and source; the edges are arithmetic
        (seawater.DEPTH_RANGE_M, lambda v: seawater.pressure_dbar(v, 45.0), "depth_m", 1.0),
        (seawater.PRESSURE_RANGE_DBAR, lambda v: seawater.depth_m(v, 45.0), "pressure_dbar", 1.0),
        (seawater.TEMPERATURE_RANGE_C, lambda v: seawater.density_kg_m3(v, 35.0, 0.0, 0.0),
         "temperature_c", 0.1),
        (seawater.PRACTICAL_SALINITY_RANGE, lambda v: seawater.density_kg_m3(10.0, v, 0.0, 0.0),
         "practical_salinity", 0.1),
        (seawater.LATITUDE_RANGE_DEG, lambda v: seawater.gravity_m_s2(v), "latitude_deg", 0.1),
        (seawater.LONGITUDE_RANGE_DEG, lambda v: seawater.density_kg_m3(10.0, 35.0, 0.0, 0.0, v),
         "longitude_deg", 0.1),
        (battery.temperature_range_c("li_socl2_bobbin"),
         lambda v: battery.self_discharge_ah_per_day(PACK, v), "temperature_c", 0.1),
        (battery.AGE_RANGE_YEARS, lambda v: battery.usable_capacity_ah(PACK, 20.0, v),
         "age_years", 0.1),
        (pressure.WATER_TEMPERATURE_RANGE_C, _hold_at("water_temperature_start_c"),
         "water_temperature_start_c", 0.01),
        (pressure.TEST_PRESSURE_RANGE_DBAR, _hold_at("end_pressure_dbar"),
         "end_pressure_dbar", 1.0),
        (pressure.PROOF_FACTOR_RANGE,
         lambda v: pressure.required_test_pressure_dbar(1000.0, 45.0, v), "proof_factor", 0.01),
        (pressure.GAUGE_TOLERANCE_PERCENT_RANGE,
         lambda v: pressure.evaluate_hold(**HOLD, gauge_tolerance_percent=v),  # type: ignore[arg-type]
         "gauge_tolerance_percent", 0.01),
        (buoyancy.SEAWATER_DENSITY_RANGE_KG_M3, lambda v: buoyancy.net_buoyancy_kg(45.0, 0.06, v),
         "seawater_density_kg_m3", 0.1),
        (buoyancy.RESERVE_FRACTION_OF_MASS_RANGE,
         lambda v: buoyancy.required_net_buoyancy_kg(
             45.0, min_net_buoyancy_kg=5.0, reserve_fraction_of_mass=v),
         "reserve_fraction_of_mass", 0.01),
        (ranging.SOUND_SPEED_RANGE_M_S, lambda v: ranging.two_way_time_s(100.0, 0.0, v),
         "sound_speed_m_s", 0.1),
        (ranging.TURNAROUND_RANGE_S, lambda v: ranging.two_way_time_s(100.0, v, 1500.0),
         "turnaround_s", 0.001),
        (ranging.RANGE_RANGE_M, lambda v: ranging.two_way_time_s(v, 0.0, 1500.0), "range_m", 1.0),
        (ranging.DEPTH_DIFFERENCE_RANGE_M, lambda v: ranging.slant_range_from_offset_m(v, 0.0),
         "depth_difference_m", 1.0),
        (ranging.REPLY_PULSE_RANGE_S,
         lambda v: ranging.reply_timing(100.0, 1500.0, 0.0, 600.0, 0.0, v), "reply_pulse_s", 0.01),
        (rtd.TEMPERATURE_RANGE_C, lambda v: rtd.resistance_ohm(v), "temperature_c", 0.1),
        (rtd.PT100_RESISTANCE_RANGE_OHM, lambda v: rtd.temperature_c(v), "resistance_ohm", 0.01),
    ],
)  # fmt: skip
def test_each_domain_constant_is_the_enforced_range(
    domain: tuple[float, float], call: Callable[[float], object], name: str, step: float
) -> None:
    lo, hi = domain
    assert lo < hi
    call(lo)
    call(hi)
    for outside in (lo - step, hi + step):
        with pytest.raises(ValueError, match=rf"^{name} must be in"):
            call(outside)


def test_the_pt100_resistance_domain_matches_the_iec_60751_table() -> None:
    # IEC 60751 Table 1: 18.52 ohm at -200 degC, 390.48 ohm at 850 degC (Pt100)
    lo, hi = rtd.PT100_RESISTANCE_RANGE_OHM
    assert lo == pytest.approx(18.5201, abs=1e-4)
    assert hi == pytest.approx(390.4811, abs=1e-4)
    assert rtd.resistance_range_ohm(1000.0) == pytest.approx((185.201, 3904.811), abs=1e-3)


def test_the_battery_domain_covers_every_chemistry() -> None:
    # the ends of each chemistry's derating curve (Linden, from memory)
    los, his = zip(*(battery.temperature_range_c(k) for k in battery.CHEMISTRIES), strict=True)
    assert battery.BATTERY_TEMPERATURE_RANGE_C == (min(los), max(his)) == (-40.0, 85.0)
