"""What a due item is: its kind, its state on a day, and the item itself.

The lowest floor of ``fleet.due``: plain types, no database, no clock. A ``DueItem``'s due
date is fixed by the unit's records; its state is the date classified against the day it is
read (``classify``, the same rule the store applies in SQL).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from enum import StrEnum


class DueState(StrEnum):
    OVERDUE = "overdue"
    DUE_SOON = "due_soon"
    CURRENT = "current"
    NO_DATA = "no_data"

    @property
    def label(self) -> str:
        return _STATE_LABEL[self]

    @property
    def icon(self) -> str:
        # Shapes of our own, readable in black and white.
        return _STATE_ICON[self]

    @property
    def rank(self) -> int:
        """Sort order: what needs action first."""
        return _STATE_RANK[self]

    @classmethod
    def from_rank(cls, rank: int) -> DueState:
        return _RANK_STATE[rank]


_STATE_LABEL = {
    DueState.OVERDUE: "Overdue",
    DueState.DUE_SOON: "Due soon",
    DueState.CURRENT: "Current",
    DueState.NO_DATA: "No data",
}
_STATE_ICON = {
    DueState.OVERDUE: "▲",
    DueState.DUE_SOON: "◆",
    DueState.CURRENT: "●",
    DueState.NO_DATA: "○",
}
_STATE_RANK = {
    DueState.OVERDUE: 0,
    DueState.DUE_SOON: 1,
    DueState.NO_DATA: 2,
    DueState.CURRENT: 3,
}
_RANK_STATE = {rank: state for state, rank in _STATE_RANK.items()}


class ItemKind(StrEnum):
    ANODE = "anode"
    SEAL = "seal"
    BATTERY = "battery"
    PRESSURE_TEST = "pressure_test"
    RELEASE_TEST = "release_test"
    SENSOR_CHECK = "sensor_check"

    @property
    def label(self) -> str:
        return self.value.replace("_", " ").capitalize()


@dataclass(frozen=True, slots=True)
class DueItem:
    """One maintenance item of one unit.

    ``key`` names the item within its unit (``anode:<position id>``, ``seal:<position id>``,
    ``battery``, ``pressure_test``, ``release_test``, ``sensor:<sensor>``) so that readiness
    and the pages find an item without parsing its label. ``failed`` is true when the item is
    due because of a fault found (a failed test, a voided test, a bond fault, openings used
    up), not because its time ran out.
    """

    unit_id: int
    serial: str
    variant: str
    place: str
    kind: ItemKind
    key: str
    item: str
    due_on: dt.date | None
    state: DueState
    basis: str
    flags: tuple[str, ...] = ()
    failed: bool = False


def classify(due_on: dt.date | None, on: dt.date, soon_days: int) -> DueState:
    """The state of an item due on ``due_on``, read on ``on``."""
    if due_on is None:
        return DueState.NO_DATA
    # Due today is due now: the unit should not go out until the item is done.
    if due_on <= on:
        return DueState.OVERDUE
    if due_on <= on + dt.timedelta(days=soon_days):
        return DueState.DUE_SOON
    return DueState.CURRENT
