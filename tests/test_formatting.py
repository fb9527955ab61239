"""One way of writing numbers, units and recorded values on pages and in PDFs."""

import datetime as dt

import pytest

from fleet.formatting import clauses, field_value, number, percent, quantity, signed
from fleet.models import BatteryInstall, ReleaseTest, SensorCheck


# The house convention (DESIGN.md, "Words"), worked by hand: thousands grouped with a comma,
# a space before every unit including %, each unit's decimals with trailing zeros dropped.
@pytest.mark.parametrize(
    ("value", "unit", "expected"),
    [
        (1902.0, "dbar", "1,902 dbar"),
        (1903.46, "dbar", "1,903.5 dbar"),
        (0.35, "A", "0.35 A"),
        (12.5, "s", "12.5 s"),
        (21.1234, "°C", "21.123 °C"),
        (12000.0, "m", "12,000 m"),
        (79.0, "%", "79 %"),
        (None, "V", "—"),
        (float("nan"), "V", "—"),
    ],
)
def test_it_writes_a_quantity_with_its_unit(value, unit, expected):
    assert quantity(value, unit) == expected


def test_it_writes_fractions_as_percent_with_a_space():
    assert percent(0.79) == "79 %"
    assert percent(-0.76) == "-76 %"


def test_it_signs_a_difference_and_never_writes_minus_zero():
    assert signed(0.023, "°C") == "+0.023 °C"
    assert signed(-6.7049, "kgf") == "-6.7 kgf"
    assert number(-0.0001, 2) == "0"


def test_it_joins_clauses_without_stray_semicolons_or_repeats():
    tested = "tested 2025-07-31 at 641 dbar"
    assert clauses(tested, "", f"{tested};", "void") == f"{tested}; void"
    assert clauses("", " ; ") == ""


def test_it_writes_stored_values_in_words():
    pack = BatteryInstall(chemistry="li_socl2", made_on=dt.date(2025, 1, 5), ocv_install_v=76.5)
    assert field_value(pack, "chemistry") == "Lithium thionyl chloride Li/SOCl₂"
    assert field_value(pack, "made_on") == "2025-01-05"
    assert field_value(pack, "ocv_install_v") == "76.5 V"
    test = ReleaseTest(limit_switch_ok=False, acoustic_command_ok=True, kind="wet")
    assert (field_value(test, "limit_switch_ok"), field_value(test, "acoustic_command_ok")) == (
        "No",
        "Yes",
    )
    assert field_value(test, "kind") == "Wet (in tank or alongside)"
    # A sensor check's readings are in its sensor's unit.
    check = SensorCheck(sensor="tilt", reference_value=0.0, unit_reading=1.25)
    assert field_value(check, "unit_reading") == "1.25 °"
