"""fleet.calc.pressure: proof pressure from TEOS-10 and the hold verdict (reference 6)."""

from __future__ import annotations

import math
from collections.abc import Callable

import gsw
import pytest

from fleet.calc import pressure


def test_it_gives_the_proof_pressure_for_a_rated_depth() -> None:
    # gsw 3.6.23 p_from_z(-1350, 45) = 1365.511 dbar (check case 5) x 1.25 (common practice,
    # the factor for manned hulls under classification rules for underwater vehicles)
    result = pressure.required_test_pressure_dbar(1350.0, 45.0)
    assert result == pytest.approx(1.25 * 1365.51109, abs=1e-3)


def test_it_uses_the_proof_factor_given() -> None:
    p = float(gsw.p_from_z(-4000.0, 30.0))  # gsw 3.6.23
    assert pressure.required_test_pressure_dbar(4000.0, 30.0, 1.5) == pytest.approx(1.5 * p)
    assert pressure.required_test_pressure_dbar(4000.0, 30.0, 1.0) == pytest.approx(p)


GOOD = {
    "start_pressure_dbar": 1710.0,
    "end_pressure_dbar": 1700.0,
    "hold_minutes": 60.0,
    "water_temperature_start_c": 4.0,
    "water_temperature_end_c": 4.2,
    "ingress_found": False,
    "required_pressure_dbar": 1706.9,
    "min_hold_minutes": 60.0,  # common practice, no published source; the operator's setting
}


def _hold(**changes: object) -> pressure.HoldVerdict:
    return pressure.evaluate_hold(**{**GOOD, **changes})  # type: ignore[arg-type]


def test_a_good_hold_passes() -> None:
    # defaults common practice, no published source: 1 % drop, 1 degC change
    verdict = _hold()
    assert verdict.passed and verdict.reasons == ()
    assert verdict.drop_dbar == pytest.approx(10.0)
    assert verdict.drop_percent == pytest.approx(10.0 / 1710.0 * 100.0)
    assert verdict.change_dbar == pytest.approx(-10.0)
    assert verdict.change_percent == pytest.approx(-10.0 / 1710.0 * 100.0)
    assert not verdict.rose_beyond_gauge
    assert verdict.temperature_change_c == pytest.approx(0.2)


def test_the_minimum_hold_has_no_default_in_calc() -> None:
    # one number, one place: the operator's setting (common practice, no published source)
    args = {k: v for k, v in GOOD.items() if k != "min_hold_minutes"}
    with pytest.raises(TypeError, match="min_hold_minutes"):
        pressure.evaluate_hold(**args)  # type: ignore[arg-type]
    assert not hasattr(pressure, "DEFAULT_MIN_HOLD_MINUTES")


@pytest.mark.parametrize(
    ("start", "end", "tolerance", "passed", "drop", "change_percent"),
    [
        # arithmetic: change = (end - start) / start; gauge tolerance common practice
        (3810.0, 9500.0, 0.25, False, 0.0, 149.3438),  # a rise is not a small drop
        (1710.0, 1715.0, 0.25, False, 0.0, 0.29240),  # rise beyond a 0.25 % gauge
        (1710.0, 1713.0, 0.25, True, 0.0, 0.17544),  # rise within the gauge: no drop
        (1710.0, 1715.0, 0.5, True, 0.0, 0.29240),  # the same rise, a 0.5 % gauge
        (1710.0, 1710.0, 0.0, True, 0.0, 0.0),  # no change with a perfect gauge
        (1710.0, 1693.0, 0.25, True, 17.0, -0.99415),  # a fall is judged as a drop
    ],
)
def test_it_judges_the_signed_change(
    start: float, end: float, tolerance: float, passed: bool, drop: float, change_percent: float
) -> None:
    verdict = _hold(
        start_pressure_dbar=start,
        end_pressure_dbar=end,
        required_pressure_dbar=min(start, 1706.9),
        gauge_tolerance_percent=tolerance,
    )
    assert verdict.passed is passed
    assert verdict.drop_dbar == pytest.approx(drop)
    assert verdict.change_percent == pytest.approx(change_percent, abs=1e-4)
    assert verdict.rose_beyond_gauge is (not passed)
    assert not any("fell" in r for r in verdict.reasons)
    if not passed:
        assert verdict.reasons == (verdict.reasons[0],)
        assert verdict.reasons[0].startswith("pressure rose")
        assert "repeat the test" in verdict.reasons[0]


def test_a_full_depth_housing_can_be_judged() -> None:
    # gsw 3.6.23: sea pressure at 11000 m x 1.25 (common practice) is above 12000 dbar; a
    # test vessel is not the sea, so the hold is still judged
    required = pressure.required_test_pressure_dbar(11000.0, 0.0)
    assert required == pytest.approx(1.25 * float(gsw.p_from_z(-11000.0, 0.0)))
    assert required > 12000.0
    verdict = _hold(
        start_pressure_dbar=required + 5.0,
        end_pressure_dbar=required - 20.0,
        required_pressure_dbar=required,
    )
    assert verdict.passed


def test_the_water_temperature_domain_starts_near_the_freezing_point_of_seawater() -> None:
    # TEOS-10 via gsw: freezing point at SA 35.16504 g/kg, 0 dbar, air-free ~ -1.92 degC
    freezing = float(gsw.t_freezing(35.16504, 0.0, 0.0))
    lo, hi = pressure.WATER_TEMPERATURE_RANGE_C
    assert lo <= freezing < lo + 0.1
    assert hi == 40.0
    assert _hold(water_temperature_start_c=lo, water_temperature_end_c=lo).passed
    assert _hold(water_temperature_start_c=hi, water_temperature_end_c=hi).passed
    for name in ("water_temperature_start_c", "water_temperature_end_c"):
        for value in (lo - 0.01, hi + 0.01):
            with pytest.raises(ValueError, match=rf"^{name} must be in \[-2, 40\] degC"):
                _hold(**{name: value})


@pytest.mark.parametrize(
    ("kwargs", "fragments"),
    [
        # arithmetic; thresholds common practice, no published source
        ({}, ()),  # test 1707, start 1710 (+0.18 %), end 1700, 60 min, rated 1365.5
        ({"end_pressure_dbar": 9500.0, "start_pressure_dbar": 1707.0},
         ("end pressure 9500.0 dbar is 456.53 % above",)),
        ({"start_pressure_dbar": 1720.0}, ("start pressure 1720.0 dbar is +0.76 % off",)),
        ({"start_pressure_dbar": 1700.0}, ("start pressure 1700.0 dbar is -0.41 % off",)),
        ({"test_pressure_dbar": 2800.0, "start_pressure_dbar": 2800.0,
          "end_pressure_dbar": 2790.0}, ("test pressure 2800.0 dbar is 2.05 x",)),
        ({"hold_minutes": 0.0}, ("hold of 0 min",)),
        ({"test_pressure_dbar": 0.0, "start_pressure_dbar": 0.0, "end_pressure_dbar": 0.0},
         ("test pressure is zero", "start pressure is zero", "end pressure is zero")),
        ({"rated_pressure_dbar": 0.0}, ("rated pressure is zero",)),
    ],
)  # fmt: skip
def test_it_lists_what_looks_implausible_in_a_test(
    kwargs: dict[str, float], fragments: tuple[str, ...]
) -> None:
    args = {
        "test_pressure_dbar": 1707.0,
        "start_pressure_dbar": 1710.0,
        "end_pressure_dbar": 1700.0,
        "hold_minutes": 60.0,
        "rated_pressure_dbar": 1365.5,
        **kwargs,
    }
    reasons = pressure.pressure_test_plausibility(**args)
    assert len(reasons) == len(fragments)
    for reason, fragment in zip(reasons, fragments, strict=True):
        assert reason.startswith(fragment)


def test_the_plausibility_thresholds_are_arguments() -> None:
    reasons = pressure.pressure_test_plausibility(
        2800.0, 2810.0, 2815.0, 60.0, 1365.5, gauge_tolerance_percent=1.0,
        max_over_rating_factor=2.5,
    )  # fmt: skip
    assert reasons == ()


@pytest.mark.parametrize(
    ("changes", "fragment"),
    [
        # every default below is common practice, no published source (reference 6)
        ({"start_pressure_dbar": 1700.0, "end_pressure_dbar": 1699.0}, "start pressure"),
        ({"hold_minutes": 30.0}, "hold of 30 min"),
        ({"end_pressure_dbar": 1680.0}, "pressure fell"),  # 1.75 % > 1 %
        ({"ingress_found": True}, "water found"),
        ({"water_temperature_end_c": 2.5}, "water temperature fell"),
        ({"water_temperature_end_c": 6.0}, "water temperature changed +2.0"),
    ],
)
def test_it_fails_a_hold_for_each_reason(changes: dict[str, object], fragment: str) -> None:
    verdict = _hold(**changes)
    assert not verdict.passed
    assert len(verdict.reasons) == 1
    assert verdict.reasons[0].startswith(fragment)


def test_it_lists_every_reason_at_once() -> None:
    verdict = _hold(
        start_pressure_dbar=1500.0,
        end_pressure_dbar=1400.0,
        hold_minutes=10.0,
        ingress_found=True,
        water_temperature_end_c=1.0,
    )
    assert len(verdict.reasons) == 5


def test_the_thresholds_are_arguments() -> None:
    verdict = _hold(
        end_pressure_dbar=1680.0,
        hold_minutes=15.0,
        water_temperature_end_c=6.0,
        min_hold_minutes=10.0,  # ASME B31.3 leak test holds >= 10 min (reference 6)
        allowable_drop_percent=2.0,
        max_temperature_change_c=3.0,
    )
    assert verdict.passed


def test_a_drop_exactly_at_the_limit_passes() -> None:
    assert _hold(start_pressure_dbar=2000.0, end_pressure_dbar=1980.0).passed  # 1.00 %


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: pressure.required_test_pressure_dbar(-1.0, 45.0), "depth_m"),
        (lambda: pressure.required_test_pressure_dbar(1000.0, 95.0), "latitude_deg"),
        (lambda: pressure.required_test_pressure_dbar(1000.0, 45.0, 0.9), "proof_factor"),
        (lambda: pressure.required_test_pressure_dbar(1000.0, 45.0, 3.5), "proof_factor"),
        (lambda: _hold(start_pressure_dbar=-1.0), "start_pressure_dbar"),
        (lambda: _hold(start_pressure_dbar=math.nan), "start_pressure_dbar"),
        (lambda: _hold(end_pressure_dbar=20000.1), "end_pressure_dbar"),
        (lambda: _hold(hold_minutes=0.0), "hold_minutes"),
        (lambda: _hold(water_temperature_start_c=45.0), "water_temperature_start_c"),
        (lambda: _hold(water_temperature_end_c=-5.0), "water_temperature_end_c"),
        (lambda: _hold(required_pressure_dbar=0.0), "required_pressure_dbar"),
        (lambda: _hold(min_hold_minutes=-1.0), "min_hold_minutes"),
        (lambda: _hold(allowable_drop_percent=-0.5), "allowable_drop_percent"),
        (lambda: _hold(allowable_drop_percent=101.0), "allowable_drop_percent"),
        (lambda: _hold(max_temperature_change_c=-1.0), "max_temperature_change_c"),
        (lambda: _hold(gauge_tolerance_percent=-0.1), "gauge_tolerance_percent"),
        (lambda: _hold(gauge_tolerance_percent=math.nan), "gauge_tolerance_percent"),
        (lambda: _hold(min_hold_minutes=math.inf), "min_hold_minutes"),
        (lambda: _plaus(test_pressure_dbar=-1.0), "test_pressure_dbar"),
        (lambda: _plaus(start_pressure_dbar=20001.0), "start_pressure_dbar"),
        (lambda: _plaus(end_pressure_dbar=math.nan), "end_pressure_dbar"),
        (lambda: _plaus(hold_minutes=-1.0), "hold_minutes"),
        (lambda: _plaus(rated_pressure_dbar=12001.0), "rated_pressure_dbar"),
        (lambda: _plaus(gauge_tolerance_percent=11.0), "gauge_tolerance_percent"),
        (lambda: _plaus(max_over_rating_factor=0.9), "max_over_rating_factor"),
    ],
)
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()


def _plaus(**changes: float) -> tuple[str, ...]:
    args = {
        "test_pressure_dbar": 1707.0,
        "start_pressure_dbar": 1710.0,
        "end_pressure_dbar": 1700.0,
        "hold_minutes": 60.0,
        "rated_pressure_dbar": 1365.5,
        **changes,
    }
    return pressure.pressure_test_plausibility(**args)  # type: ignore[arg-type]


def test_it_wants_a_real_bool_for_ingress() -> None:
    with pytest.raises(TypeError, match="^ingress_found"):
        _hold(ingress_found="no")
