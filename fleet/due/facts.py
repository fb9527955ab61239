"""A unit's stored state as plain values: what the projections and the readiness checks read.

The planner reads these for the whole fleet with ``values_list`` (no model per row); a single
unit's readiness turns its loaded models into the same values (``*_of`` below). They are named
tuples: immutable, and made several times faster than frozen dataclasses (which set each
field through ``object.__setattr__``), a cost the whole-fleet planner pays ten times a unit. The
projections (``duty.duty_of``, ``engine.anode_projection``, ``engine.battery_projection``)
and every readiness check then run the same code on either, so there is one derivation.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from typing import NamedTuple

from fleet.models import (
    AnodePosition,
    BatteryInstall,
    Deployment,
    PressureTest,
    Site,
    Transponder,
    UnitState,
    Variant,
)


class DeploymentFacts(NamedTuple):
    over_side_at: dt.datetime
    planned_interrogations_per_day: int
    transmit_power_step: int


class SiteFacts(NamedTuple):
    name: str
    bottom_temperature_c: float
    latitude_deg: float


class PackFacts(NamedTuple):
    pack_serial: str
    chemistry: str
    capacity_ah: float
    made_on: dt.date
    installed_on: dt.date


class PressureTestFacts(NamedTuple):
    tested_on: dt.date
    start_pressure_dbar: float


class StateFacts(NamedTuple):
    as_of: dt.datetime | None
    immersed_days_closed: float
    first_over_side_at: dt.datetime | None
    duty_replies_per_day: float | None
    pack_charge_used_ah: float
    open_deployment: DeploymentFacts | None
    duty_deployment: DeploymentFacts | None
    duty_site: SiteFacts | None
    pack: PackFacts | None
    last_pressure_test: PressureTestFacts | None


class AnodeRowFacts(NamedTuple):
    position: AnodePosition  # the variant's, read once per variant
    immersed_days_at_fit: float = 0.0
    n: int = 0
    sum_x: float = 0.0
    sum_y: float = 0.0
    sum_xx: float = 0.0
    sum_xy: float = 0.0
    sum_yy: float = 0.0
    last_read_at: dt.datetime | None = None
    last_mass_kg: float | None = None
    last_bond_resistance_ohm: float | None = None


class UnitFacts(NamedTuple):
    """The unit's own columns the checks read, its variant (one shared object per variant,
    with its positions), its condition today and its state."""

    pk: int
    serial: str
    acoustic_address: str
    variant: Variant
    transmit_power_step: int
    turnaround_delay_ms: float
    hold_reason: str
    condition: str
    place_name: str
    state: StateFacts | None
    anode_rows: tuple[AnodeRowFacts, ...]

    @property
    def variant_id(self) -> int:
        return self.variant.id  # the column itself (``pk`` resolves its name on every read)


# The columns of one unit's row, in order (``unit_facts_from_values``), read by the planner
# with ``values_list`` beside the unit's ``condition`` annotation.
UNIT_COLUMNS = (
    "pk",
    "serial",
    "acoustic_address",
    "variant_id",
    "transmit_power_step",
    "turnaround_delay_ms",
    "hold_reason",
    "condition",
    "place__name",
    "state__unit_id",
    "state__as_of",
    "state__immersed_days_closed",
    "state__first_over_side_at",
    "state__duty_replies_per_day",
    "state__pack_charge_used_ah",
    "state__open_deployment_id",
    "state__open_deployment__over_side_at",
    "state__open_deployment__planned_interrogations_per_day",
    "state__open_deployment__transmit_power_step",
    "state__duty_deployment_id",
    "state__duty_deployment__over_side_at",
    "state__duty_deployment__planned_interrogations_per_day",
    "state__duty_deployment__transmit_power_step",
    "state__duty_site_id",
    "state__duty_site__name",
    "state__duty_site__bottom_temperature_c",
    "state__duty_site__latitude_deg",
    "state__pack_id",
    "state__pack__pack_serial",
    "state__pack__chemistry",
    "state__pack__capacity_ah",
    "state__pack__made_on",
    "state__pack__installed_on",
    "state__last_pressure_test_id",
    "state__last_pressure_test__tested_on",
    "state__last_pressure_test__start_pressure_dbar",
)
ANODE_COLUMNS = (
    "unit_id",
    "position_id",
    "immersed_days_at_fit",
    "n",
    "sum_x",
    "sum_y",
    "sum_xx",
    "sum_xy",
    "sum_yy",
    "last_read_at",
    "last_mass_kg",
    "last_bond_resistance_ohm",
)
# immersed_days_at_fit, n, the five sums, last_read_at, last_mass_kg, last_bond_resistance_ohm
AnodeValues = tuple[
    float, int, float, float, float, float, float, dt.datetime | None, float | None, float | None
]


def anode_rows(
    positions: Sequence[AnodePosition], by_position: dict[int, AnodeValues]
) -> tuple[AnodeRowFacts, ...]:
    """One row per position of the variant (``positions``, in its order); a position with no
    stored row yet has no data (the defaults)."""
    # ``id``, the column itself: ``pk`` resolves the key's name on every read.
    return tuple(
        AnodeRowFacts(p, *by_position[p.id]) if p.id in by_position else AnodeRowFacts(p)
        for p in positions
    )


def unit_facts_from_values(
    row: tuple[object, ...],
    variant: Variant,
    positions: Sequence[AnodePosition],
    anodes: dict[int, AnodeValues],
) -> UnitFacts:
    """A row of ``UNIT_COLUMNS`` as ``UnitFacts``; ``positions``: the variant's anode
    positions, read once for all its units."""
    (pk, serial, address, _variant_id, step, delay, hold_reason, condition, place,
     state_id, as_of, immersed, first_over, duty_replies, used,
     open_id, open_at, open_rate, open_step,
     duty_id, duty_at, duty_rate, duty_step,
     site_id, site_name, site_t, site_lat,
     pack_id, pack_serial, chemistry, capacity, made_on, installed_on,
     test_id, tested_on, test_dbar) = row  # fmt: skip
    state = None
    if state_id is not None:
        state = StateFacts(
            as_of,  # type: ignore[arg-type]
            immersed,  # type: ignore[arg-type]
            first_over,  # type: ignore[arg-type]
            duty_replies,  # type: ignore[arg-type]
            used,  # type: ignore[arg-type]
            DeploymentFacts(open_at, open_rate, open_step) if open_id else None,  # type: ignore[arg-type]
            DeploymentFacts(duty_at, duty_rate, duty_step) if duty_id else None,  # type: ignore[arg-type]
            SiteFacts(site_name, site_t, site_lat) if site_id else None,  # type: ignore[arg-type]
            PackFacts(pack_serial, chemistry, capacity, made_on, installed_on)  # type: ignore[arg-type]
            if pack_id
            else None,
            PressureTestFacts(tested_on, test_dbar) if test_id else None,  # type: ignore[arg-type]
        )
    return UnitFacts(
        pk,  # type: ignore[arg-type]
        serial,  # type: ignore[arg-type]
        address,  # type: ignore[arg-type]
        variant,
        step,  # type: ignore[arg-type]
        delay,  # type: ignore[arg-type]
        hold_reason,  # type: ignore[arg-type]
        condition,  # type: ignore[arg-type]
        place or "",  # type: ignore[arg-type]
        state,
        anode_rows(positions, anodes),
    )


def _deployment(d: Deployment | None) -> DeploymentFacts | None:
    if d is None:
        return None
    return DeploymentFacts(d.over_side_at, d.planned_interrogations_per_day, d.transmit_power_step)


def _site(s: Site | None) -> SiteFacts | None:
    return None if s is None else SiteFacts(s.name, s.bottom_temperature_c, s.latitude_deg)


def _pack(p: BatteryInstall | None) -> PackFacts | None:
    if p is None:
        return None
    return PackFacts(p.pack_serial, p.chemistry, p.capacity_ah, p.made_on, p.installed_on)


def _test(t: PressureTest | None) -> PressureTestFacts | None:
    return None if t is None else PressureTestFacts(t.tested_on, t.start_pressure_dbar)


def state_facts_of(state: UnitState | None) -> StateFacts | None:
    """A loaded state row (with its related rows) as ``StateFacts``."""
    if state is None:
        return None
    return StateFacts(
        state.as_of,
        state.immersed_days_closed,
        state.first_over_side_at,
        state.duty_replies_per_day,
        state.pack_charge_used_ah,
        _deployment(state.open_deployment),
        _deployment(state.duty_deployment),
        _site(state.duty_site),
        _pack(state.pack),
        _test(state.last_pressure_test),
    )


def unit_facts_of(unit: Transponder, state: UnitState | None, condition: str) -> UnitFacts:
    """A unit loaded with ``engine.fleet_queryset`` as ``UnitFacts``."""
    stored = {
        r.position_id: (
            r.immersed_days_at_fit, r.n, r.sum_x, r.sum_y, r.sum_xx, r.sum_xy, r.sum_yy,
            r.last_read_at, r.last_mass_kg, r.last_bond_resistance_ohm,
        )
        for r in unit.anode_states.all()
    }  # fmt: skip
    return UnitFacts(
        unit.pk,
        unit.serial,
        unit.acoustic_address,
        unit.variant,
        unit.transmit_power_step,
        unit.turnaround_delay_ms,
        unit.hold_reason,
        condition,
        unit.place.name if unit.place else "",
        state_facts_of(state),
        anode_rows(list(unit.variant.anode_positions.all()), stored),
    )
