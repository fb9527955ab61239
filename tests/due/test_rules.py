import pytest

from fleet.due.rules import rules_for

pytestmark = pytest.mark.django_db


def test_a_variant_value_overrides_the_settings_default(variant, settings):
    # Settings defaults: workshop practice, common practice, no published source.
    assert rules_for(variant).release_max_seconds == settings.HOLDFAST["RELEASE_MAX_SECONDS"]
    variant.release_max_seconds = 12.0
    variant.battery_reserve_fraction = 0.3
    variant.pressure_test_valid_months = 6
    rules = rules_for(variant)
    assert rules.release_max_seconds == 12.0
    assert rules.battery_reserve_fraction == 0.3
    assert rules.pressure_test_valid_months == 6
    assert rules.release_max_motor_current_a == settings.HOLDFAST["RELEASE_MAX_MOTOR_CURRENT_A"]


def test_a_zero_on_the_variant_is_a_value_not_a_gap(variant):
    variant.battery_reserve_fraction = 0.0
    assert rules_for(variant).battery_reserve_fraction == 0.0
