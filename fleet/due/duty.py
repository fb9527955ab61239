"""The duty model: how a unit works between its events, and what one reply costs.

Every projection runs from the unit's **last event** (``UnitState.as_of``: the latest
deployment over the side or recovery, or bench visit opened), never from the moment it
happens to be computed. So a stored due date is the same on every later day until the next
event, and the overview, the calendar and the unit page agree without a daily rebuild.

From that moment the unit is assumed to keep working as it has:

- deployed: in the water all the time, at the open deployment's site, reply rate and power
  step;
- otherwise: in the water for the share of calendar time it has spent there since its first
  deployment (at least ``MIN_DUTY_FRACTION``), at its last deployment's site and duty; in
  store the rest of the time, at the store temperature;
- never deployed: no wear and no replies, only the pack's self-discharge in store.
"""

from __future__ import annotations

import datetime as dt
from typing import NamedTuple

from fleet.formatting import percent
from fleet.models import Deployment, Transponder, UnitState

from .days import days_between
from .facts import StateFacts, UnitFacts
from .rules import Rules

# A unit that has hardly been in the water would otherwise project its wear decades out.
MIN_DUTY_FRACTION = 0.05


class Duty(NamedTuple):
    """How the unit works from ``as_of`` on."""

    as_of: dt.datetime | None  # the last event; None: nothing recorded yet
    immersed_days: float  # in the water up to ``as_of``
    fraction: float | None  # share of time in the water from here on; None: never deployed
    deployed: bool
    replies_per_day: float
    power_step: int
    temperature_c: float  # where it works: the duty site's bottom water
    store_temperature_c: float  # where it waits
    latitude_deg: float
    site_name: str | None

    def words(self) -> str:
        if self.deployed:
            return "in the water now"
        if self.fraction is None:
            return "never deployed"
        return f"in the water {percent(self.fraction)} of the time so far"


def duty_of(
    unit: Transponder | UnitFacts, state: UnitState | StateFacts | None, rules: Rules
) -> Duty:
    store_t = rules.battery_default_temperature_c
    if state is None or state.as_of is None:
        return Duty(
            None,
            0.0,
            None,
            False,
            0.0,
            unit.transmit_power_step,
            store_t,
            store_t,
            rules.default_latitude_deg,
            None,
        )
    at = state.as_of
    immersed = state.immersed_days_closed
    open_d = state.open_deployment
    if open_d is not None:
        immersed += max(0.0, days_between(open_d.over_side_at, at))
    fraction: float | None
    if open_d is not None:
        fraction = 1.0
    elif state.first_over_side_at is None:
        fraction = None
    else:
        span = days_between(state.first_over_side_at, at)
        fraction = 1.0 if span <= 0 else min(1.0, max(MIN_DUTY_FRACTION, immersed / span))
    duty_d = state.duty_deployment
    site = state.duty_site
    if open_d is not None:
        replies = float(open_d.planned_interrogations_per_day)
        step = open_d.transmit_power_step
    elif duty_d is not None:
        replies = state.duty_replies_per_day or 0.0
        step = duty_d.transmit_power_step
    else:
        replies, step = 0.0, unit.transmit_power_step
    return Duty(
        as_of=at,
        immersed_days=immersed,
        fraction=fraction,
        deployed=open_d is not None,
        replies_per_day=replies,
        power_step=step,
        temperature_c=site.bottom_temperature_c if site else store_t,
        store_temperature_c=store_t,
        latitude_deg=site.latitude_deg if site else rules.default_latitude_deg,
        site_name=site.name if site else None,
    )


def charge_per_reply_as(steps: dict[int, float], step: int) -> float:
    """Charge per reply at ``step``; a step the variant does not list takes the next one up
    (the conservative side), else the highest listed; 0 when none is listed."""
    if not steps:
        return 0.0
    if step in steps:
        return steps[step]
    higher = [s for s in steps if s > step]
    return steps[min(higher)] if higher else steps[max(steps)]


def replies_in(deployment: Deployment, days_in_window: float) -> int:
    """Replies made during ``days_in_window`` days of a deployment: the count made on
    recovery spread evenly, else the planned rate."""
    if deployment.recovered_at is not None and deployment.replies_counted is not None:
        total_days = days_between(deployment.over_side_at, deployment.recovered_at)
        if total_days <= 0:
            return 0
        return round(deployment.replies_counted * min(1.0, days_in_window / total_days))
    return round(deployment.planned_interrogations_per_day * days_in_window)


def replies_per_day(deployment: Deployment) -> float:
    if deployment.recovered_at is not None and deployment.replies_counted is not None:
        days = days_between(deployment.over_side_at, deployment.recovered_at)
        if days > 0:
            return deployment.replies_counted / days
    return float(deployment.planned_interrogations_per_day)
