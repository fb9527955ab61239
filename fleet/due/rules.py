"""Intervals and thresholds: the variant's value where it sets one, else the settings default.

None of these numbers comes from a published standard; they are workshop practice and the
operator's to set (common practice, no published source). This module is the only place
that knows them.
"""

from dataclasses import dataclass
from typing import TypeVar

from django.conf import settings

from fleet.models import Variant


@dataclass(frozen=True, slots=True)
class Rules:
    due_soon_days: int
    pressure_test_valid_months: int
    proof_factor: float
    hold_min_minutes: float
    allowable_drop_percent: float
    gauge_tolerance_percent: float
    release_test_valid_days: int
    release_max_seconds: float
    release_max_motor_current_a: float
    sensor_check_interval_months: int
    temperature_tolerance_c: float
    pressure_tolerance_fraction_of_rating: float
    tilt_tolerance_deg: float
    pt100_class: str
    bond_resistance_limit_ohm: float
    wear_flag_factor: float
    battery_reserve_fraction: float
    battery_default_temperature_c: float
    seal_shelf_standard: str
    depth_margin_fraction: float
    recovery_reserve_fraction_of_mass: float
    recovery_min_net_buoyancy_kg: float
    surface_temperature_c: float
    ranging_horizontal_offset_m: float
    ranging_ping_interval_s: float
    ranging_blanking_s: float
    ranging_reply_pulse_s: float
    default_latitude_deg: float


_T = TypeVar("_T")


def _pick(value: _T | None, default: _T) -> _T:
    return default if value is None else value


def rules_for(variant: Variant) -> Rules:
    d = settings.HOLDFAST
    tol = d["SENSOR_TOLERANCE"]
    return Rules(
        due_soon_days=d["DUE_SOON_DAYS"],
        pressure_test_valid_months=_pick(
            variant.pressure_test_valid_months, d["PRESSURE_TEST_VALID_MONTHS"]
        ),
        proof_factor=_pick(variant.proof_factor, d["PROOF_FACTOR"]),
        hold_min_minutes=d["PRESSURE_HOLD_MIN_MINUTES"],
        allowable_drop_percent=d["PRESSURE_ALLOWABLE_DROP_PERCENT"],
        gauge_tolerance_percent=d["PRESSURE_GAUGE_TOLERANCE_PERCENT"],
        release_test_valid_days=_pick(
            variant.release_test_valid_days, d["RELEASE_TEST_VALID_DAYS"]
        ),
        release_max_seconds=_pick(variant.release_max_seconds, d["RELEASE_MAX_SECONDS"]),
        release_max_motor_current_a=_pick(
            variant.release_max_motor_current_a, d["RELEASE_MAX_MOTOR_CURRENT_A"]
        ),
        sensor_check_interval_months=_pick(
            variant.sensor_check_interval_months, d["SENSOR_CHECK_INTERVAL_MONTHS"]
        ),
        temperature_tolerance_c=tol["temperature"],
        pressure_tolerance_fraction_of_rating=tol["pressure_fraction_of_rating"],
        tilt_tolerance_deg=tol["tilt"],
        pt100_class=d["PT100_CLASS"],
        bond_resistance_limit_ohm=_pick(
            variant.bond_resistance_limit_ohm, d["BOND_RESISTANCE_LIMIT_OHM"]
        ),
        wear_flag_factor=d["WEAR_FLAG_FACTOR"],
        battery_reserve_fraction=_pick(
            variant.battery_reserve_fraction, d["BATTERY_RESERVE_FRACTION"]
        ),
        battery_default_temperature_c=d["BATTERY_DEFAULT_TEMPERATURE_C"],
        seal_shelf_standard=d["SEAL_SHELF_STANDARD"],
        depth_margin_fraction=d["DEPTH_MARGIN_FRACTION"],
        recovery_reserve_fraction_of_mass=d["RECOVERY_RESERVE_FRACTION_OF_MASS"],
        recovery_min_net_buoyancy_kg=d["RECOVERY_MIN_NET_BUOYANCY_KG"],
        surface_temperature_c=d["SURFACE_TEMPERATURE_C"],
        ranging_horizontal_offset_m=d["RANGING"]["HORIZONTAL_OFFSET_M"],
        ranging_ping_interval_s=d["RANGING"]["PING_INTERVAL_S"],
        ranging_blanking_s=d["RANGING"]["BLANKING_S"],
        ranging_reply_pulse_s=d["RANGING"]["REPLY_PULSE_S"],
        default_latitude_deg=d["DEFAULT_LATITUDE_DEG"],
    )


def default_rules() -> Rules:
    """The settings' values alone, as for a variant that sets none of its own (the help page
    quotes these)."""
    return rules_for(Variant())
