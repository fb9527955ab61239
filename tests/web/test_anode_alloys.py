"""The stored anode alloy codes name the calc core's alloys (one mapping, on the model side)."""

import pytest

from fleet.calc import anodes
from fleet.models import AnodeAlloy, AnodePosition

CAPACITY_AH_PER_KG = [
    ("al_zn_in", 2000.0),  # DNV-RP-B401 (2010) Table 10-6, seawater
    ("zn", 780.0),  # DNV-RP-B401 (2010) Table 10-6, seawater
    ("mg", 1100.0),  # EN 12496 / general CP texts, low end of 1100-1230 Ah/kg; from memory
]


def test_every_alloy_choice_is_listed_here() -> None:
    assert {code for code, _ in CAPACITY_AH_PER_KG} == set(AnodeAlloy.values)


@pytest.mark.parametrize(("code", "capacity"), CAPACITY_AH_PER_KG)
def test_each_alloy_code_finds_its_seawater_capacity(code: str, capacity: float) -> None:
    assert anodes.alloy(AnodeAlloy(code).calc_name).capacity_ah_per_kg == capacity


def test_an_anode_position_names_its_calc_alloy() -> None:
    assert AnodePosition(alloy=AnodeAlloy.AL_ZN_IN).calc_alloy_name == "Al-Zn-In"
    assert AnodePosition(alloy=AnodeAlloy.ZINC).calc_alloy_name == "Zn"
