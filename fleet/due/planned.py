"""A planned deployment: where a unit would go, from when, for how long, at what duty.

Built once (by ``forms.PlannedDeploymentForm.planned()`` or a service) and passed down whole
to readiness, the planner and the checklist, so its limits are stated in one place.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from fleet.models import Site
from fleet.models.validators import PLANNING_HORIZON_DAYS

MAX_DAYS = 3650  # ten years: longer than any pack lasts in the water
MAX_INTERROGATIONS_PER_DAY = 1_000_000
POWER_STEPS = (1, 9)
# Inside fleet.calc.ranging's domains (RANGE_RANGE_M, PING_INTERVAL_RANGE_S).
MAX_HORIZONTAL_OFFSET_M = 20_000.0
PING_INTERVAL_S = (0.5, 60.0)


@dataclass(frozen=True, slots=True)
class PlannedDeployment:
    site: Site
    start: dt.date
    days: int
    interrogations_per_day: int | None = None  # None: the unit's own recent duty
    power_step: int | None = None  # None: the unit's own setting
    horizontal_offset_m: float | None = None  # farthest transceiver offset; None: default
    ping_interval_s: float | None = None  # interrogation cycle; None: the default
    # ``end``, worked out on first reading (a whole-fleet plan reads it for every dated item
    # of every unit; computed here it would refuse a start near year 9999 on construction).
    _end: dt.date | None = field(default=None, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        if not 1 <= self.days <= MAX_DAYS:
            raise ValueError(f"days must be between 1 and {MAX_DAYS}, not {self.days}")
        rate = self.interrogations_per_day
        if rate is not None and not 0 <= rate <= MAX_INTERROGATIONS_PER_DAY:
            raise ValueError(
                f"interrogations a day must be between 0 and {MAX_INTERROGATIONS_PER_DAY}, "
                f"not {rate}"
            )
        lo, hi = POWER_STEPS
        if self.power_step is not None and not lo <= self.power_step <= hi:
            raise ValueError(f"power step must be between {lo} and {hi}, not {self.power_step}")
        offset = self.horizontal_offset_m
        if offset is not None and not 0.0 <= offset <= MAX_HORIZONTAL_OFFSET_M:
            raise ValueError(
                f"horizontal offset must be between 0 and {MAX_HORIZONTAL_OFFSET_M:g} m, "
                f"not {offset}"
            )
        interval = self.ping_interval_s
        if interval is not None and not PING_INTERVAL_S[0] <= interval <= PING_INTERVAL_S[1]:
            raise ValueError(
                f"interrogation interval must be between {PING_INTERVAL_S[0]:g} and "
                f"{PING_INTERVAL_S[1]:g} s, not {interval}"
            )

    @property
    def end(self) -> dt.date:
        end = self._end
        if end is None:
            end = self.start + dt.timedelta(days=self.days)
            object.__setattr__(self, "_end", end)
        return end

    def check_start(self, today: dt.date) -> None:
        """Refuse a start in the past or beyond the planning horizon."""
        if self.start < today:
            raise ValueError(f"the start must be today ({today}) or later, not {self.start}")
        latest = today + dt.timedelta(days=PLANNING_HORIZON_DAYS)
        if self.start > latest:
            raise ValueError(f"the start must be on or before {latest}, not {self.start}")
