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
}


def _hold(**changes: object) -> pressure.HoldVerdict:
    return pressure.evaluate_hold(**{**GOOD, **changes})  # type: ignore[arg-type]


def test_a_good_hold_passes() -> None:
    # defaults common practice, no published source: 60 min hold, 1 % drop, 1 degC change
    verdict = _hold()
    assert verdict.passed and verdict.reasons == ()
    assert verdict.drop_dbar == pytest.approx(10.0)
    assert verdict.drop_percent == pytest.approx(10.0 / 1710.0 * 100.0)
    assert verdict.temperature_change_c == pytest.approx(0.2)


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
        (lambda: _hold(end_pressure_dbar=20000.0), "end_pressure_dbar"),
        (lambda: _hold(hold_minutes=0.0), "hold_minutes"),
        (lambda: _hold(water_temperature_start_c=45.0), "water_temperature_start_c"),
        (lambda: _hold(water_temperature_end_c=-5.0), "water_temperature_end_c"),
        (lambda: _hold(required_pressure_dbar=0.0), "required_pressure_dbar"),
        (lambda: _hold(min_hold_minutes=-1.0), "min_hold_minutes"),
        (lambda: _hold(allowable_drop_percent=-0.5), "allowable_drop_percent"),
        (lambda: _hold(allowable_drop_percent=101.0), "allowable_drop_percent"),
        (lambda: _hold(max_temperature_change_c=-1.0), "max_temperature_change_c"),
    ],
)
def test_it_rejects_out_of_range_arguments_by_name(call: Callable[[], object], name: str) -> None:
    with pytest.raises(ValueError, match=rf"^{name} must"):
        call()


def test_it_wants_a_real_bool_for_ingress() -> None:
    with pytest.raises(TypeError, match="^ingress_found"):
        _hold(ingress_found="no")
