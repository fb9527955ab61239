"""The history simulator: each unit's deployments and bench visits, then written to the database.

1. Planning is pure Python: ``plan_fleet(today)`` walks each unit from its first fit to
   ``today`` and returns plain dataclasses (deployments and bench visits with their
   entries). It reads no clock and no database; ``random.Random`` with a fixed seed per unit
   makes the same day give the same fleet.
2. Each unit's history is a run of cycles (store, over the side for 30 to 200 days, recovery,
   bench visit) and ends with a *tail* that sets where the unit stands today: in the water,
   ready after a recent full service, overdue in the store, open on the bench, quarantined,
   retired or lost.
3. At every visit the simulated state decides what the technician does: anodes are read
   (estimated on deck, weighed on the bench) and replaced near their threshold; the housing
   is opened for a full service when the pack, a seal or the pressure test would run out;
   openings count against seals; each opening is followed by a proof test the next day.
4. ``write_unit`` writes one unit's plan through the services (``service_record_save``,
   ``service_record_close``, ``deployment_start``, ``deployment_recover``) so that whatever
   those keep up to date stays consistent, and sets the unit's hold and final place; its
   condition (in the water, on the bench, needs work, ready) follows from the records.

Every random draw happens in a fixed order, so the same ``today`` always gives the same fleet.
All dates are anchored on ``today`` and end before it, so nothing is ever in the future.
"""

from __future__ import annotations

import datetime as dt
import math
import random
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

from django.contrib.auth.models import User
from django.utils import timezone

from fleet.calc import anodes as anode_calc
from fleet.calc import rtd, seawater
from fleet.calc.seals import add_months
from fleet.demo.scenario import (
    BENCH_HANDS,
    FINAL_HOLD,
    FRESH_CELL_OCV_V,
    HOLD_REASON,
    NOMINAL_CELL_V,
    PACK_AGE_LIMIT_MONTHS,
    PACK_CODE,
    PRESSURE_FACILITY,
    PRESSURE_HOLD_ENDED_AT,
    PROOF_FACTOR,
    ROSTER,
    SEED,
    STRING_CAPACITY_AH,
    VARIANTS_BY_KEY,
    VESSELS,
    WORKSHOP,
    AnodeSpec,
    SealSpec,
    UnitSpec,
)
from fleet.models import (
    AnodeAlloy,
    AnodePosition,
    Deployment,
    Place,
    ReleaseTest,
    SealChange,
    SealPosition,
    SensorCheck,
    ServiceRecord,
    Site,
    Transponder,
    UnitHold,
    Variant,
)
from fleet.models.records import entry_kinds
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.records import service_record_close, service_record_save

# --- The plan: plain data, no database -----------------------------------------------------


@dataclass(slots=True)
class EntryPlan:
    kind: str  # anode, seal, battery, pressure, release, sensor, opening
    values: dict[str, Any]
    position: str | None = None  # anode or seal position name


@dataclass(slots=True)
class VisitPlan:
    opened_at: dt.datetime
    closed_at: dt.datetime | None
    technician: str
    place: str
    summary: str
    entries: list[EntryPlan] = field(default_factory=list)


@dataclass(slots=True)
class DeploymentPlan:
    site: str
    over_side_at: dt.datetime
    planned_days: int
    interrogations_per_day: int
    power_step: int
    recovered_at: dt.datetime | None = None
    replies_counted: int | None = None
    recovered_to: str | None = None
    notes: str = ""
    by: str = "technician"


@dataclass(slots=True)
class UnitPlan:
    spec: UnitSpec
    acoustic_address: str
    turnaround_delay_ms: float
    transmit_power_step: int
    hold: str
    place: str | None
    events: list[VisitPlan | DeploymentPlan] = field(default_factory=list)
    immersed_days: float = 0.0


@dataclass(frozen=True, slots=True)
class _Tail:
    """A cycle the unit's role fixes: over the side, recovery (None: still down), visit mode."""

    over: dt.date
    recovered: dt.date | None
    mode: str = "auto"
    place: str = WORKSHOP
    planned_days: int | None = None
    site: str | None = None
    notes: str = ""


def _days_ago(today: dt.date, days: int) -> dt.date:
    return today - dt.timedelta(days=days)


# Tails with nothing left to chance: (over the side, recovered) in days before today, the
# visit mode and where the visit happens.
_FIXED_TAILS: Mapping[str, tuple[tuple[int, int, str, str], ...]] = MappingProxyType(
    {
        "store_idle": ((492 + 120, 492, "full", WORKSHOP),),
        "store_seals": (
            (430 + 110, 430, "full_all", WORKSHOP),
            (405, 260, "vessel", VESSELS[1]),
            (255, 95, "workshop", WORKSHOP),
        ),
        "store_anode_low": ((70 + 130, 70, "workshop_hold_anodes", WORKSHOP),),
        "workshop_fault": ((16 + 120, 16, "full_fault", WORKSHOP),),
        "quarantined": ((26 + 140, 26, "ingress", WORKSHOP),),
        "retired": ((430 + 110, 430, "retire", WORKSHOP),),
    }
)
# Tails recovered a random while ago: (days since recovery), (days down), visit mode.
_RECOVERED_TAILS: Mapping[str, tuple[tuple[int, int], tuple[int, int], str]] = MappingProxyType(
    {
        "ready": ((8, 28), (40, 160), "full_ready"),
        "store": ((45, 200), (40, 160), "auto"),
        "workshop_open": ((2, 5), (60, 150), "open"),
    }
)


def _tail(spec: UnitSpec, today: dt.date, rng: random.Random) -> list[_Tail]:
    """The last cycles of a unit, fixed by its role (where it stands today)."""
    role = spec.role
    if role in ("deployed", "lost"):
        return [_tail_in_water(spec, today, rng)]
    if role in _RECOVERED_TAILS:
        since, down, mode = _RECOVERED_TAILS[role]
        recovered = rng.randint(*since)
        over = recovered + rng.randint(*down)
        return [_Tail(_days_ago(today, over), _days_ago(today, recovered), mode)]
    if role in _FIXED_TAILS:
        return [
            _Tail(_days_ago(today, over), _days_ago(today, recovered), mode, place=place)
            for over, recovered, mode, place in _FIXED_TAILS[role]
        ]
    raise ValueError(f"unknown role {role!r}")


def _tail_in_water(spec: UnitSpec, today: dt.date, rng: random.Random) -> _Tail:
    """Still down today: deployed on plan, or lost on its last deployment."""
    if spec.role == "deployed":
        down = rng.randint(12, 110)
        planned = rng.randint(min(200, down + 15), 200)
        return _Tail(_days_ago(today, down), None, planned_days=planned, site=spec.tail_site)
    over = _days_ago(today, 262)
    silent = over + dt.timedelta(days=41)
    notes = (
        f"No reply to interrogation since {silent:%d %b %Y}. Release commanded twice from "
        f"{VESSELS[0]} on the planned recovery; no acknowledgement, nothing surfaced. "
        "Declared lost."
    )
    return _Tail(over, None, planned_days=150, site=spec.tail_site, notes=notes)


# Visit modes that open the housing for a full service.
_FULL_MODES = ("commission", "full", "full_ready", "full_all", "full_fault", "ingress")


class _UnitSim:
    """Walks one unit through its history, deciding each visit from the simulated state."""

    def __init__(self, spec: UnitSpec, today: dt.date, wear_factor: float) -> None:
        self.spec = spec
        self.variant = VARIANTS_BY_KEY[spec.variant]
        self.today = today
        self.tz = timezone.get_current_timezone()
        # Two streams: the timeline never depends on the details, so the anode calibration
        # can replay a unit and get the same deployments.
        self.rng = random.Random(f"{SEED}:{spec.serial}:timeline")
        self.drng = random.Random(f"{SEED}:{spec.serial}:details")
        self.chemistry = spec.chemistry or self.variant.allowed_chemistries[0]
        self.wear_factor = wear_factor
        self.step = self.rng.choice(self.variant.power_steps)
        self.charge_per_reply = {s: c for s, c, _ in self.variant.reply_steps}
        self.position_jitter = {a.name: self.drng.uniform(0.9, 1.1) for a in self.variant.anodes}
        self.anode_mass = {a.name: a.new_net_mass_g for a in self.variant.anodes}
        self.anode_last_reading = {a.name: a.new_net_mass_g for a in self.variant.anodes}
        self.seal_fitted: dict[str, dt.date] = {}
        self.seal_openings: dict[str, int] = {}
        self.pack: dict[str, Any] | None = None
        self.last_pressure: dt.date | None = None
        self.last_release: dt.date | None = None
        self.last_load_test: dt.date | None = None
        self.last_sensor: dt.date | None = None
        self.immersed_days = 0.0
        self.events: list[VisitPlan | DeploymentPlan] = []
        self.last_site = ""
        # Proof pressure for the rating, rounded up to 10 dbar at the poles' gravity so it
        # covers the rating at any site's latitude.
        self.rated_test_dbar = 10.0 * math.ceil(
            seawater.pressure_dbar(self.variant.depth_rating_m * PROOF_FACTOR, 90.0) / 10.0
        )

    # -- clock helpers --

    def at(self, day: dt.date, hour: int, minute: int = 0) -> dt.datetime:
        return dt.datetime.combine(day, dt.time(hour, minute), tzinfo=self.tz)

    def tech(self) -> str:
        return self.rng.choice(BENCH_HANDS)

    # -- state questions --

    def daily_ah(self) -> float:
        lo, hi = self.variant.interrogations_per_day
        replies = (lo + hi) / 2 * 0.85
        return (
            self.variant.listen_current_a * 24.0
            + replies * self.charge_per_reply[self.step] / 3600.0
        )

    def pack_due(self, day: dt.date, horizon_days: int = 200, spare: float = 0.85) -> bool:
        if self.pack is None:
            return True
        # Change the pack if another long deployment would take it past ``spare`` of its
        # rating, or it would pass its age limit while down.  # common practice, no published source
        projected = self.pack["used_ah"] + self.daily_ah() * horizon_days
        drained = projected > spare * self.pack["capacity"]
        limit = add_months(self.pack["installed"], PACK_AGE_LIMIT_MONTHS[self.chemistry])
        aged = limit <= day + dt.timedelta(days=horizon_days)
        return drained or aged

    def seal_expiry(self, name: str, interval: int, margin_months: int = 0) -> dt.date:
        return add_months(self.seal_fitted[name], interval - margin_months)

    def needs_full(self, day: dt.date) -> bool:
        """Open the housing now if a seal runs out within 120 days, a ring is one opening
        short of its limit, the proof test is 10 months old or the pack is due.

        # common practice, no published source
        """
        horizon = day + dt.timedelta(days=120)
        seals = any(
            self.seal_expiry(s.name, s.interval_months) <= horizon for s in self.variant.seals
        )
        openings = any(self.seal_openings[s.name] >= s.max_openings - 1 for s in self.variant.seals)
        pressure = self.last_pressure is None or (day - self.last_pressure).days >= 300
        return seals or openings or pressure or self.pack_due(day)

    def needs_bench(self, day: dt.date) -> bool:
        # A unit with a release comes ashore after every recovery for a release test: the
        # test must cover the whole next deployment.  # common practice, no published source
        release = self.variant.release_fitted
        sensors = self.last_sensor is None or (day - self.last_sensor).days >= 300
        return release or sensors

    def decide(self, day: dt.date) -> str:
        if self.needs_full(day):
            return "full"
        if self.needs_bench(day):
            return "full" if self.rng.random() < 0.3 else "workshop"
        roll = self.rng.random()
        if roll < 0.4:
            return "vessel"
        return "workshop" if roll < 0.75 else "full"

    # -- history --

    def run(self) -> UnitPlan:
        commissioned = _days_ago(self.today, self.spec.commissioned_days_ago)
        last_day = self.visit(commissioned, "commission", WORKSHOP)
        tail = _tail(self.spec, self.today, self.rng)
        self._free_cycles(last_day, end_free=tail[0].over - dt.timedelta(days=6))
        for part in tail:
            self._tail_cycle(part)
        hold, place = FINAL_HOLD[self.spec.role]
        plan = UnitPlan(
            spec=self.spec,
            acoustic_address="",
            turnaround_delay_ms=round(self.rng.uniform(10.0, 50.0), 1),
            transmit_power_step=self.step,
            hold=hold,
            place=place,
            events=self.events,
            immersed_days=self.immersed_days,
        )
        self._check_not_future()
        return plan

    def _free_cycles(self, last_day: dt.date, *, end_free: dt.date) -> None:
        """Cycles chosen by the simulated state, from the first fit until the tail begins."""
        last_place = WORKSHOP
        while True:
            gap = self.rng.randint(2, 5) if last_place in VESSELS else self.rng.randint(8, 45)
            over = last_day + dt.timedelta(days=gap)
            window = (end_free - over).days - 6
            if window < 30:
                break
            days = self.rng.choice((self.rng.randint(30, 200), self.rng.randint(90, 180)))
            recovered = over + dt.timedelta(days=min(days, window))
            vessel = self.rng.choice(VESSELS)
            self.deploy(over, recovered, vessel, site=None, planned_days=None)
            mode = self.decide(recovered)
            last_place = vessel if mode == "vessel" else WORKSHOP
            last_day = self.visit(recovered, mode, last_place)

    def _tail_cycle(self, part: _Tail) -> None:
        vessel = part.place if part.place in VESSELS else self.rng.choice(VESSELS)
        self.deploy(
            part.over,
            part.recovered,
            vessel,
            site=part.site,
            planned_days=part.planned_days,
            notes=part.notes,
        )
        if part.recovered is None:
            return
        mode = part.mode
        if mode == "auto":
            # The unit ends ashore, so its last visit is on the bench, not on deck.
            mode = self.decide(part.recovered)
            mode = "workshop" if mode == "vessel" else mode
        self.visit(part.recovered, mode, part.place)

    def _check_not_future(self) -> None:
        midnight = self.at(self.today, 0)
        for event in self.events:
            stamps: list[Any] = []
            if isinstance(event, VisitPlan):
                stamps = [event.opened_at, event.closed_at]
                for entry in event.entries:
                    stamps.extend(entry.values.values())
            else:
                stamps = [event.over_side_at, event.recovered_at]
            for stamp in stamps:
                if isinstance(stamp, dt.datetime):
                    assert stamp < midnight, (self.spec.serial, stamp)
                elif isinstance(stamp, dt.date):
                    assert stamp < self.today, (self.spec.serial, stamp)

    def deploy(
        self,
        over: dt.date,
        recovered: dt.date | None,
        vessel: str,
        *,
        site: str | None,
        planned_days: int | None,
        notes: str = "",
    ) -> None:
        rng = self.rng
        site = site or rng.choice(self.variant.sites)
        lo, hi = self.variant.interrogations_per_day
        per_day = 100 * round(rng.randint(lo, hi) / 100)
        days = (recovered - over).days if recovered else None
        if planned_days is None:
            planned_days = max(30, min(200, (days or 90) + rng.randint(-10, 10)))
        if not notes and rng.random() < 0.3:
            notes = f"Array station {rng.randint(1, 6)}; laid from {vessel}."
        plan = DeploymentPlan(
            site=site,
            over_side_at=self.at(over, rng.randint(6, 15), rng.choice((0, 15, 30, 45))),
            planned_days=planned_days,
            interrogations_per_day=per_day,
            power_step=self.step,
            notes=notes,
            by=self.tech(),
        )
        self.last_site = site
        self.events.append(plan)
        if recovered is None or days is None:
            return
        replies = round(per_day * days * rng.uniform(0.7, 1.02))
        plan.recovered_at = self.at(recovered, rng.randint(7, 11), rng.choice((0, 20, 40)))
        plan.replies_counted = replies
        plan.recovered_to = vessel
        self.immersed_days += days
        self._wear_and_drain(days, replies)

    def _wear_and_drain(self, days: int, replies: int) -> None:
        """Anode wear and pack drain over ``days`` in the water."""
        for spec in self.variant.anodes:
            rate_g_day = (
                1000.0
                * anode_calc.design_wear_rate_kg_per_day(
                    spec.design_current_a,
                    anode_calc.alloy(AnodeAlloy(spec.alloy).calc_name).capacity_ah_per_kg,
                )
                * self.wear_factor
                * self.position_jitter[spec.name]
                * self.drng.uniform(0.9, 1.1)
            )
            self.anode_mass[spec.name] = max(
                0.02 * spec.new_net_mass_g, self.anode_mass[spec.name] - rate_g_day * days
            )
        if self.pack is not None:
            self.pack["used_ah"] += (
                self.variant.listen_current_a * 24.0 * days
                + replies * self.charge_per_reply[self.step] / 3600.0
                + self.variant.release_charge_as / 3600.0
            )

    # -- one bench visit --

    def visit(self, day: dt.date, mode: str, place: str) -> dt.date:
        """Plan the visit after a recovery on ``day`` (or the first fit on ``day``).

        Returns the day the unit is free again."""
        summary: list[str] = []
        tech = "technician" if mode == "open" else self.tech()
        if mode not in ("vessel", "commission"):
            # Ashore a day or three after recovery, never later than yesterday.
            day = min(day + dt.timedelta(days=self.rng.randint(1, 3)), self.today - dt.timedelta(1))
        opened, closed, finished = self._visit_times(day, mode, place, summary)
        entries = self._visit_entries(day, mode, summary)
        if mode == "open":
            closed, finished = None, day
        self.events.append(
            VisitPlan(
                opened_at=opened,
                closed_at=closed,
                technician=tech,
                place=place,
                summary=" ".join(summary),
                entries=entries,
            )
        )
        return finished

    def _visit_times(
        self, day: dt.date, mode: str, place: str, summary: list[str]
    ) -> tuple[dt.datetime, dt.datetime | None, dt.date]:
        """When the visit opens and closes, and the day the unit is free again."""
        rng = self.rng
        if mode == "vessel":
            opened = self.at(day, rng.randint(12, 14), rng.choice((0, 30)))
            closed = opened + dt.timedelta(hours=rng.randint(2, 4))
            summary.append(f"Deck check aboard {place} after recovery from {self.last_site}.")
            return opened, closed, day
        opened = self.at(day, rng.randint(8, 9), rng.choice((0, 15, 30, 45)))
        span = 1 if mode.startswith("full") or mode in ("commission", "ingress") else 0
        lag = span + rng.randint(0, 1)
        closed = self.at(day + dt.timedelta(days=lag), rng.randint(15, 17), rng.choice((0, 30)))
        if mode == "commission":
            summary.append("First fit and acceptance tests.")
        else:
            summary.append(f"Bench visit after recovery from {self.last_site}.")
        return opened, closed, day + dt.timedelta(days=lag)

    def _visit_entries(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        """What the visit does, in the order the work is done."""
        full = mode in _FULL_MODES
        entries = self._anodes(day, mode, summary)
        if full:
            entries.extend(self._full_service(day, mode, summary))
        if mode in ("workshop", "workshop_hold_anodes") or full:
            entries.extend(self._bench_tests(day, mode, summary))
        if mode == "retire":
            entries.append(self._retirement_opening(day, summary))
        if mode == "open":
            entries.extend(self._open_visit(day, summary))
        if mode == "ingress":
            summary.append(
                "Quarantined: proof test lost pressure and water was found behind the lower "
                "end cap. Sealing bore to be inspected before the unit is used again."
            )
        return entries

    def _retirement_opening(self, day: dt.date, summary: list[str]) -> EntryPlan:
        summary.append(
            "Pitting on the upper end-cap sealing face is deeper than the repair limit. "
            "Unit retired; pack left fitted for disposal with the housing."
        )
        return EntryPlan(
            "opening",
            {
                "opened_at": self.at(day, 10, 15),
                "closed_at": self.at(day, 12, 40),
                "vented_before_opening": True,
                "internal_pressure_found": False,
                "reason": "Inspection of the upper sealing face after pitting was seen.",
            },
        )

    # -- anodes --

    def _anodes(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        out: list[EntryPlan] = []
        replaced_names = []
        for spec in self.variant.anodes:
            values = self._read_anode(spec, mode)
            if self._replace_anode(spec, mode, values):
                replaced_names.append(spec.name.lower())
            if mode == "full_fault" and spec.name == "Release mechanism":
                values["note"] = (
                    "Wear about 2.3× design since fitting: a bare stainless bracket bridged the "
                    "release frame to the collar. Bracket recoated and isolated. "
                    + values.get("note", "")
                ).strip()
            out.append(EntryPlan("anode", values, spec.name))
        if replaced_names:
            summary.append(f"Anode replaced: {', '.join(replaced_names)}.")
        if mode == "workshop_hold_anodes":
            summary.append("Upper end-cap anode close to its replacement mass; new anode ordered.")
        return out

    def _read_anode(self, spec: AnodeSpec, mode: str) -> dict[str, Any]:
        """The reading: as fitted, estimated on deck, or weighed on the bench."""
        drng = self.drng
        new = spec.new_net_mass_g
        true = self.anode_mass[spec.name]
        values: dict[str, Any] = {
            "bond_resistance_ohm": round(drng.uniform(0.004, 0.035), 3),
        }
        if mode == "commission":
            values["mass_g"] = new
            values["note"] = "New anode, as fitted."
        elif mode == "vessel":
            # Judged against a gauge on deck: whole percent, a point or so either way.
            estimate = round(100.0 * true / new + drng.uniform(-1.0, 1.0))
            values["remaining_percent"] = float(max(0, min(100, estimate)))
            values["note"] = "Estimated on deck against the wear gauge."
        else:
            reading = min(
                round(true + drng.uniform(-0.3, 0.3), 1), self.anode_last_reading[spec.name]
            )
            values["mass_g"] = reading
            self.anode_last_reading[spec.name] = reading
        return values

    def _replace_anode(self, spec: AnodeSpec, mode: str, values: dict[str, Any]) -> bool:
        # Replace an anode with less than a deployment's wear left above its threshold
        # (spares aboard allow a closer margin on deck).  # common practice, no published source
        percent = 100.0 * self.anode_mass[spec.name] / spec.new_net_mass_g
        allow = mode not in ("commission", "workshop_hold_anodes", "retire")
        margin = 5.0 if mode == "vessel" else 12.0
        if not (
            allow and not self.spec.calibrate_wear and percent < spec.replace_at_percent + margin
        ):
            return False
        values["replaced"] = True
        values["note"] = (values.get("note", "") + " Replaced with a new anode.").strip()
        self.anode_mass[spec.name] = spec.new_net_mass_g
        self.anode_last_reading[spec.name] = spec.new_net_mass_g
        return True

    # -- full service: housing opening, seals, pack, proof test --

    def _full_service(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        # Open the housing: every opening counts against every seal position.
        for name in self.seal_openings:
            self.seal_openings[name] += 1
        out = [self._housing_opening(day, mode)]
        out.extend(self._renew_seals(day, mode, summary))
        pack = self._fit_pack(day, mode, summary)
        if pack is not None:
            out.append(pack)
        out.append(self._proof_test(day, mode, summary))
        return out

    def _housing_opening(self, day: dt.date, mode: str) -> EntryPlan:
        drng = self.drng
        opened_at = self.at(day, 9, 30 + drng.randint(0, 25))
        vented = mode == "commission" or drng.random() > 0.04
        gas = self.variant.key == "dp" and vented and drng.random() < 0.06
        if mode == "commission":
            reason = "First assembly: battery, seals and electronics fitted."
        elif mode == "ingress":
            reason = "Water seen in the lower end cap on recovery."
        else:
            reason = "Service: battery and seals, internal inspection."
        return EntryPlan(
            "opening",
            {
                "opened_at": opened_at,
                "closed_at": opened_at + dt.timedelta(hours=4, minutes=drng.randint(0, 50)),
                "vented_before_opening": vented,
                "internal_pressure_found": gas,
                "reason": reason
                + (" Gas let off through the vent before the cap came off." if gas else "")
                + ("" if vented else " Vent screw seized; cap eased off behind the shield."),
            },
        )

    def _renew_seals(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        margin = 8 if mode == "full_ready" else 5
        out: list[EntryPlan] = []
        changed = []
        for seal in self.variant.seals:
            reason_code = self._seal_change_reason(seal, day, mode, margin)
            if reason_code is None:
                continue
            out.append(self._new_seal(seal, day, reason_code))
            self.seal_fitted[seal.name] = day
            self.seal_openings[seal.name] = 0
            changed.append(seal.name.lower())
        if changed and mode != "commission":
            summary.append(f"Seals renewed: {', '.join(changed)}.")
        return out

    def _seal_change_reason(
        self, seal: SealSpec, day: dt.date, mode: str, margin: int
    ) -> str | None:
        """Why this ring is renewed at this opening, or None to leave it fitted."""
        if mode == "commission":
            return SealChange.Reason.FIRST_FIT
        if mode == "full_all":
            return SealChange.Reason.INTERVAL
        if mode == "ingress" and seal.name.startswith("Lower"):
            return SealChange.Reason.LEAK
        if self.seal_expiry(seal.name, seal.interval_months, margin) <= day:
            return SealChange.Reason.INTERVAL
        if self.seal_openings[seal.name] >= seal.max_openings - 1:
            return SealChange.Reason.OPENING
        if self.drng.random() < 0.06:
            return SealChange.Reason.DAMAGE
        return None

    def _new_seal(self, seal: SealSpec, day: dt.date, reason_code: str) -> EntryPlan:
        drng = self.drng
        cure = day - dt.timedelta(days=drng.randint(100, 700))
        cure = dt.date(cure.year, 3 * ((cure.month - 1) // 3) + 1, 1)
        return EntryPlan(
            "seal",
            {
                "material": seal.material,
                "cure_date": cure,
                "lot": f"{seal.material}-{cure:%y}Q{(cure.month - 1) // 3 + 1}-"
                f"{drng.randint(100, 999)}",
                "reason": reason_code,
            },
            seal.name,
        )

    def _fit_pack(self, day: dt.date, mode: str, summary: list[str]) -> EntryPlan | None:
        """A new battery pack when this service calls for one, else None."""
        fresh = mode in ("commission", "full_all") or (
            mode == "full_ready" and self.pack_due(day, horizon_days=240, spare=0.7)
        )
        if mode == "ingress" or not (fresh or self.pack_due(day)):
            return None
        drng = self.drng
        chem = self.chemistry
        cells = self.variant.cells_in_series
        made = day - dt.timedelta(days=drng.randint(30, 300 if chem != "alkaline" else 150))
        capacity = STRING_CAPACITY_AH[chem] * self.variant.parallel_strings
        lo, hi = FRESH_CELL_OCV_V[chem]
        entry = EntryPlan(
            "battery",
            {
                "pack_serial": f"{PACK_CODE[chem]}{cells}-{made:%y%m}-{drng.randint(1000, 9999)}",
                "chemistry": chem,
                "nominal_voltage_v": round(cells * NOMINAL_CELL_V[chem], 2),
                "capacity_ah": capacity,
                "made_on": made,
                "installed_on": day,
                "ocv_install_v": round(cells * drng.uniform(lo, hi), 2),
            },
        )
        self.pack = {"installed": day, "capacity": capacity, "used_ah": 0.0}
        if mode != "commission":
            summary.append("New battery pack fitted.")
        return entry

    def _proof_test(self, day: dt.date, mode: str, summary: list[str]) -> EntryPlan:
        """Proof test the day after the housing was closed."""
        drng = self.drng
        tested = day + dt.timedelta(days=1)
        # Within the gauge tolerance (0.5 %) of the smallest unit's 640 dbar test.
        start = self.rated_test_dbar + round(drng.uniform(0.5, 3.0), 1)
        if mode == "ingress":
            drop = start * drng.uniform(0.03, 0.05)
        else:
            drop = start * drng.uniform(0.0005, 0.003)
        water = round(drng.uniform(12.0, 19.0), 1)
        entry = EntryPlan(
            "pressure",
            {
                "tested_on": tested,
                "hold_ended_at": PRESSURE_HOLD_ENDED_AT,
                "test_pressure_dbar": self.rated_test_dbar,
                "hold_minutes": float(drng.choice((30, 45, 60))),
                "start_pressure_dbar": start,
                "end_pressure_dbar": round(start - drop, 1),
                "water_temperature_start_c": water,
                "water_temperature_end_c": round(water + drng.uniform(-0.4, 0.2), 1),
                "ingress_found": mode == "ingress",
                "facility": PRESSURE_FACILITY,
            },
        )
        self.last_pressure = tested
        if mode != "ingress":
            summary.append(f"Proof test to {self.rated_test_dbar:g} dbar held.")
        return entry

    # -- bench tests: release and sensors --

    def _bench_tests(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        out: list[EntryPlan] = []
        full = mode not in ("workshop", "workshop_hold_anodes")
        test_day = day + dt.timedelta(days=1) if full else day
        if self.variant.release_fitted and mode != "ingress":
            out.extend(self._release_tests(test_day, mode, full))
        sensors_due = self.last_sensor is None or (day - self.last_sensor).days >= 240
        if mode in ("commission", "full_ready") or (sensors_due and mode != "ingress"):
            out.extend(self._sensor_checks(test_day))
            self.last_sensor = test_day
            if mode != "commission":
                summary.append("Sensor checks against the reference instruments.")
        return out

    def _release_tests(self, test_day: dt.date, mode: str, full: bool) -> list[EntryPlan]:
        drng = self.drng
        kinds = [ReleaseTest.Kind.BENCH]
        if full:
            kinds.append(ReleaseTest.Kind.WET)
            due_load = self.last_load_test is None or (test_day - self.last_load_test).days >= 330
            if due_load or mode in ("commission", "full_ready"):
                kinds.append(ReleaseTest.Kind.LOAD)
                self.last_load_test = test_day
        out = [
            EntryPlan(
                "release",
                {
                    "tested_on": test_day,
                    "kind": kind,
                    "load_kg": 250.0 if kind == ReleaseTest.Kind.LOAD else None,
                    "seconds_to_release": round(drng.uniform(3.5, 8.5), 1),
                    "motor_current_a": round(drng.uniform(0.7, 1.3), 2),
                    "limit_switch_ok": True,
                    "acoustic_command_ok": True,
                },
            )
            for kind in kinds
        ]
        self.last_release = test_day
        return out

    def _sensor_checks(self, day: dt.date) -> list[EntryPlan]:
        drng = self.drng
        bath = round(drng.uniform(4.0, 22.0), 3)
        element = bath + drng.uniform(-0.03, 0.03)  # the element's own error
        out = [
            EntryPlan(
                "sensor",
                {
                    "checked_on": day,
                    "sensor": SensorCheck.Sensor.TEMPERATURE,
                    "reference_value": bath,
                    "unit_reading": round(element + drng.uniform(-0.01, 0.01), 3),
                    "raw_resistance_ohm": round(rtd.resistance_ohm(element), 3),
                },
            ),
            EntryPlan(
                "sensor",
                {
                    "checked_on": day,
                    "sensor": SensorCheck.Sensor.PRESSURE,
                    "reference_value": self.variant.sensor_check_pressure_dbar,
                    "unit_reading": round(
                        self.variant.sensor_check_pressure_dbar
                        * (1 + drng.uniform(-0.0006, 0.0006)),
                        1,
                    ),
                    "raw_resistance_ohm": None,
                },
            ),
        ]
        if self.variant.has_tilt_sensor:
            out.append(
                EntryPlan(
                    "sensor",
                    {
                        "checked_on": day,
                        "sensor": SensorCheck.Sensor.TILT,
                        "reference_value": 15.0,
                        "unit_reading": round(15.0 + drng.uniform(-0.3, 0.3), 2),
                        "raw_resistance_ohm": None,
                    },
                )
            )
        return out

    def _open_visit(self, day: dt.date, summary: list[str]) -> list[EntryPlan]:
        """A visit still on the bench: what has been done so far differs by variant."""
        summary.append("In progress.")
        if self.variant.key == "rl":
            for name in self.seal_openings:
                self.seal_openings[name] += 1
            summary.append("Housing open for the battery change; proof test to follow.")
            return [
                EntryPlan(
                    "opening",
                    {
                        "opened_at": self.at(day, 10, 5),
                        "closed_at": None,
                        "vented_before_opening": True,
                        "internal_pressure_found": False,
                        "reason": "Battery change and seal renewal.",
                    },
                )
            ]
        if self.variant.key == "dp":
            summary.append("Anodes weighed; sensor checks done; awaiting battery delivery.")
            self.last_sensor = day
            return self._sensor_checks(day)
        summary.append("Lower end-cap bond to be re-made and re-measured.")
        return []


def plan_unit(spec: UnitSpec, today: dt.date) -> UnitPlan:
    if spec.calibrate_wear:
        # Replay once at design wear (wear is linear in the factor and this unit never has an
        # anode replaced), then pick the factor that leaves the worst anode at the target.
        probe = _UnitSim(spec, today, 1.0)
        probe.run()
        consumed = max(
            1.0 - probe.anode_mass[a.name] / a.new_net_mass_g
            for a in VARIANTS_BY_KEY[spec.variant].anodes
        )
        worst = min(a.replace_at_percent for a in VARIANTS_BY_KEY[spec.variant].anodes)
        factor = (1.0 - (worst + 1.5) / 100.0) / max(consumed, 1e-6)
    elif spec.wear_factor is None:
        factor = random.Random(f"{SEED}:{spec.serial}:wear").uniform(0.6, 0.95)
    else:
        factor = spec.wear_factor
    return _UnitSim(spec, today, factor).run()


def plan_fleet(today: dt.date) -> list[UnitPlan]:
    plans = [plan_unit(spec, today) for spec in ROSTER]
    # Acoustic addresses, our own plain scheme: a channel (one per variant) and a number,
    # "C3-17"; unique in the fleet, except one clash kept on purpose.
    pool = random.Random(f"{SEED}:addresses").sample(range(1, 100), len(plans))
    by_serial = {}
    for plan, number in zip(plans, pool, strict=True):
        channel = VARIANTS_BY_KEY[plan.spec.variant].address_channel
        plan.acoustic_address = f"C{channel}-{number:02d}"
        by_serial[plan.spec.serial] = plan
    by_serial["HF2-0202"].acoustic_address = by_serial["HF2-0201"].acoustic_address
    return plans


# --- Writing a plan: through the services ---------------------------------------------------


# Entry kind -> model: the one list of entry models the demo writes.
def _entry_models() -> dict[str, type[Any]]:
    """A plan names an entry kind by its bench-form prefix in the singular ("anode")."""
    return {kind.bench_prefix.removesuffix("s"): kind for kind in entry_kinds()}


@dataclass(frozen=True, slots=True)
class FleetRows:
    """The rows every unit's history points at, looked up once for the whole fleet."""

    users: Mapping[str, User]
    places: Mapping[str, Place]
    sites: Mapping[str, Site]
    variants: Mapping[str, Variant]  # by VariantSpec.key
    anode_positions: Mapping[tuple[int, str | None], AnodePosition]  # (variant pk, name)
    seal_positions: Mapping[tuple[int, str | None], SealPosition]  # (variant pk, name)


def write_unit(plan: UnitPlan, rows: FleetRows) -> int:
    """Create the unit, write its history through the services and set where it stands
    today. Returns the number of entries written."""
    unit = Transponder(
        serial=plan.spec.serial,
        variant=rows.variants[plan.spec.variant],
        place=rows.places[WORKSHOP],
        acoustic_address=plan.acoustic_address,
        turnaround_delay_ms=plan.turnaround_delay_ms,
        transmit_power_step=plan.transmit_power_step,
        notes=plan.spec.notes,
    )
    unit.full_clean()
    unit.save()
    entries = 0
    for event in plan.events:
        if isinstance(event, DeploymentPlan):
            _write_deployment(unit, event, rows)
        else:
            entries += _write_visit(unit, event, rows)
    _set_final_state(unit.pk, plan, rows)
    return entries


def _write_deployment(unit: Transponder, event: DeploymentPlan, rows: FleetRows) -> None:
    by = rows.users[event.by]
    deployment = Deployment(
        unit=unit,
        site=rows.sites[event.site],
        over_side_at=event.over_side_at,
        planned_days=event.planned_days,
        planned_interrogations_per_day=event.interrogations_per_day,
        transmit_power_step=event.power_step,
        notes=event.notes,
    )
    # Past events: readiness is judged when a unit goes out, not from today.
    deployment_start(deployment=deployment, by=by, check_readiness=False)
    if event.recovered_at is not None:
        deployment_recover(
            deployment=deployment,
            recovered_at=event.recovered_at,
            replies_counted=event.replies_counted,
            place=rows.places[event.recovered_to] if event.recovered_to else None,
            by=by,
        )


def _write_visit(unit: Transponder, event: VisitPlan, rows: FleetRows) -> int:
    technician = rows.users[event.technician]
    record = ServiceRecord(
        unit=unit,
        opened_at=event.opened_at,
        technician=technician,
        place=rows.places[event.place],
        summary=event.summary,
    )
    built = [_build_entry(item, unit.variant_id, rows) for item in event.entries]
    service_record_save(record=record, entries=built, by=technician, at=event.opened_at)
    if event.closed_at is not None:
        service_record_close(record=record, by=rows.users["supervisor"], at=event.closed_at)
    return len(built)


def _build_entry(item: EntryPlan, variant_pk: int, rows: FleetRows) -> Any:
    values = dict(item.values)
    if item.kind == "anode":
        values["position"] = rows.anode_positions[(variant_pk, item.position)]
    elif item.kind == "seal":
        values["position"] = rows.seal_positions[(variant_pk, item.position)]
    return _entry_models()[item.kind](**values)


def _set_final_state(unit_pk: int, plan: UnitPlan, rows: FleetRows) -> None:
    unit = Transponder.objects.get(pk=unit_pk)
    if plan.hold != UnitHold.NONE:
        unit.hold = plan.hold
        unit.hold_reason = HOLD_REASON[plan.hold]
        unit.hold_set_by = rows.users["supervisor"]
        unit.hold_set_at = timezone.now()
    unit.place = rows.places[plan.place] if plan.place else None
    unit.version += 1
    unit.full_clean()
    unit.save()
