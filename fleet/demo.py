"""The invented demo fleet that ``manage.py seed_demo`` loads.

Every name here is made up: the operator's workshop and store, the two vessels, the five
sites, the three variants, the thirty units and the people's user names.

How the history is made
-----------------------
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
4. Loading (``load_demo``) writes the plan through the services (``service_record_save``,
   ``service_record_close``, ``deployment_start``, ``deployment_recover``) so that whatever
   those keep up to date stays consistent, and sets each unit's hold and final place; its
   condition (in the water, on the bench, needs work, ready) follows from the records.

All dates are anchored on ``today`` and end before it, so nothing is ever in the future.
"""

from __future__ import annotations

import datetime as dt
import math
import random
from collections import Counter
from dataclasses import dataclass, field
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import AbstractUser, Group
from django.db import transaction
from django.db.models import ProtectedError
from django.utils import timezone

from fleet import roles
from fleet.calc import anodes as anode_calc
from fleet.calc import rtd, seawater
from fleet.calc.seals import add_months
from fleet.due.condition import annotate_condition
from fleet.models import (
    Amendment,
    AnodePosition,
    AnodeReading,
    BatteryInstall,
    Deployment,
    HousingOpening,
    Place,
    PressureTest,
    ReleaseCertificate,
    ReleaseTest,
    ReplyChargeStep,
    SealChange,
    SealPosition,
    SensorCheck,
    ServiceRecord,
    Site,
    Transponder,
    UnitHold,
    Variant,
)
from fleet.services.deployments import deployment_recover, deployment_start
from fleet.services.records import service_record_close, service_record_save

SEED = 7193  # any fixed number; change it and the whole fleet changes
DEMO_PASSWORD = "holdfast-demo"

# (user name, group, is_staff): the three logins the README lists.
LOGINS: tuple[tuple[str, str, bool], ...] = (
    ("technician", roles.TECHNICIAN, False),
    ("supervisor", roles.SUPERVISOR, True),
    ("viewer", roles.VIEWER, False),
)
# More bench hands, for realism in the records; they have no usable password.
EXTRA_TECHNICIANS: tuple[str, ...] = ("tech.orvell", "tech.ysolde", "tech.brannoch")
DEMO_USERNAMES: tuple[str, ...] = tuple(name for name, _, _ in LOGINS) + EXTRA_TECHNICIANS
_BENCH_HANDS: tuple[str, ...] = ("technician", *EXTRA_TECHNICIANS)

WORKSHOP = "Bench Hall workshop"
STORE = "Cage store 2"
VESSELS: tuple[str, ...] = ("MV Patient Gannet", "RV Slow Lantern")
PLACES: tuple[tuple[str, str], ...] = (
    (WORKSHOP, Place.Kind.WORKSHOP),
    (STORE, Place.Kind.STORE),
    (VESSELS[0], Place.Kind.VESSEL),
    (VESSELS[1], Place.Kind.VESSEL),
)
PRESSURE_FACILITY = "Bench Hall pressure vessel PV-2"


@dataclass(frozen=True, slots=True)
class SiteSpec:
    name: str
    latitude_deg: float
    longitude_deg: float
    water_depth_m: float
    bottom_temperature_c: float
    practical_salinity: float
    notes: str = ""


# Invented sites in open ocean; the coordinates are not meant to match any real seabed.
SITES: tuple[SiteSpec, ...] = (
    SiteSpec("Grey Shoal Array", -38.412, -21.806, 62.0, 11.4, 35.08, "Shallow survey box."),
    SiteSpec("Lanternfish Terrace", -37.951, -23.142, 420.0, 8.1, 34.93),
    SiteSpec("Tallowmere Slope", -39.274, -24.661, 880.0, 4.9, 34.62),
    SiteSpec("Cold Ledger Basin", -40.118, -25.307, 1350.0, 3.6, 34.71),
    SiteSpec("Brinefold Deep", -41.560, -26.934, 2800.0, 1.9, 34.87, "Long-baseline array."),
)


@dataclass(frozen=True, slots=True)
class AnodeSpec:
    name: str
    alloy: str  # fleet.models.AnodeAlloy value
    new_net_mass_g: float
    design_current_a: float
    replace_at_percent: float


@dataclass(frozen=True, slots=True)
class SealSpec:
    name: str
    as568_dash: str
    material: str
    count: int
    interval_months: int
    max_openings: int


@dataclass(frozen=True, slots=True)
class VariantSpec:
    key: str
    name: str
    description: str
    depth_rating_m: float
    housing_alloy: str
    release_fitted: bool
    has_tilt_sensor: bool
    allowed_chemistries: tuple[str, ...]
    cells_in_series: int
    parallel_strings: int
    listen_current_a: float
    release_charge_as: float
    mass_in_air_kg: float | None
    displaced_volume_m3: float | None
    reply_steps: tuple[tuple[int, float, float], ...]  # (step, A·s per reply, dB re 1 µPa at 1 m)
    anodes: tuple[AnodeSpec, ...]
    seals: tuple[SealSpec, ...]
    sites: tuple[str, ...]
    interrogations_per_day: tuple[int, int]
    power_steps: tuple[int, ...]
    sensor_check_pressure_dbar: float
    serial_prefix: str
    address_band: str


# Buoyancy check for the collar units, seawater 1025 kg/m³: Release 1500 displaces
# 0.0440 m³ -> 45.1 kg against 38.0 kg in air, +19 %; Deep 3000 displaces 0.0570 m³ ->
# 58.4 kg against 52.0 kg, +12 %. The mid-water unit rides in a frame and is heavy in water.
VARIANTS: tuple[VariantSpec, ...] = (
    VariantSpec(
        key="mw",
        name="Mid-water 500 m",
        description=(
            "Shallow mid-water unit in a clamp frame, hard-anodised aluminium housing, no "
            "release; recovered with its mooring. Alkaline pack of 21 D cells in one string."
        ),
        depth_rating_m=500.0,
        housing_alloy="al6061",
        release_fitted=False,
        has_tilt_sensor=False,
        allowed_chemistries=("alkaline",),
        cells_in_series=21,
        parallel_strings=1,
        listen_current_a=0.00018,
        release_charge_as=0.0,
        mass_in_air_kg=16.5,
        displaced_volume_m3=0.0095,
        reply_steps=((1, 0.003, 183.0), (2, 0.006, 187.0), (3, 0.011, 190.0)),
        anodes=(
            AnodeSpec("Upper end cap", "zn", 180.0, 0.0035, 45.0),
            AnodeSpec("Lower end cap", "zn", 220.0, 0.0040, 45.0),
        ),
        seals=(
            SealSpec("Upper end-cap face", "240", "NBR", 1, 24, 6),
            SealSpec("Lower end-cap face", "242", "NBR", 1, 24, 6),
            SealSpec("Transducer connector port", "117", "NBR", 1, 24, 8),
        ),
        sites=("Grey Shoal Array", "Lanternfish Terrace"),
        interrogations_per_day=(5000, 20000),
        power_steps=(1, 2),
        sensor_check_pressure_dbar=300.0,
        serial_prefix="HF1",
        address_band="A",
    ),
    VariantSpec(
        key="rl",
        name="Release 1500 m",
        description=(
            "1,500 m unit in a duplex housing with a motorised release and a syntactic "
            "flotation collar. Li/SOCl2 or alkaline pack, 10 D cells × 2 strings."
        ),
        depth_rating_m=1500.0,
        housing_alloy="duplex",
        release_fitted=True,
        has_tilt_sensor=True,
        allowed_chemistries=("li_socl2", "alkaline"),
        cells_in_series=10,
        parallel_strings=2,
        listen_current_a=0.00025,
        release_charge_as=25.0,
        mass_in_air_kg=38.0,
        displaced_volume_m3=0.0440,
        reply_steps=((1, 0.004, 184.0), (2, 0.008, 188.0), (3, 0.015, 192.0)),
        anodes=(
            AnodeSpec("Housing bracelet", "al_zn_in", 600.0, 0.0090, 40.0),
            AnodeSpec("Release mechanism", "zn", 150.0, 0.0025, 50.0),
            AnodeSpec("Collar frame", "zn", 320.0, 0.0050, 45.0),
        ),
        seals=(
            SealSpec("Upper end-cap face", "250", "HNBR", 1, 18, 6),
            SealSpec("Lower end-cap bore", "254", "HNBR", 2, 18, 6),
            SealSpec("Release shaft", "012", "FKM", 2, 12, 4),
            SealSpec("Pressure sensor port", "214", "FKM", 1, 18, 6),
        ),
        sites=("Lanternfish Terrace", "Tallowmere Slope", "Cold Ledger Basin"),
        interrogations_per_day=(3000, 16000),
        power_steps=(2,),
        sensor_check_pressure_dbar=1000.0,
        serial_prefix="HF2",
        address_band="B",
    ),
    VariantSpec(
        key="dp",
        name="Deep 3000 m",
        description=(
            "3,000 m unit in a titanium housing on a stainless frame, recovered by ROV; a "
            "small collar eases the lift. Li/SOCl2 pack, 8 D cells × 3 strings."
        ),
        depth_rating_m=3000.0,
        housing_alloy="ti_gr5",
        release_fitted=False,
        has_tilt_sensor=True,
        allowed_chemistries=("li_socl2",),
        cells_in_series=8,
        parallel_strings=3,
        listen_current_a=0.00030,
        release_charge_as=0.0,
        mass_in_air_kg=52.0,
        displaced_volume_m3=0.0570,
        reply_steps=((1, 0.005, 186.0), (2, 0.010, 190.0), (3, 0.019, 194.0)),
        anodes=(
            AnodeSpec("Mounting frame", "al_zn_in", 900.0, 0.0120, 40.0),
            AnodeSpec("Transducer guard", "al_zn_in", 250.0, 0.0040, 50.0),
        ),
        seals=(
            SealSpec("Upper end-cap bore", "350", "HNBR", 2, 24, 6),
            SealSpec("Lower end-cap bore", "350", "HNBR", 2, 24, 6),
            SealSpec("Transducer port", "230", "HNBR", 1, 24, 8),
        ),
        sites=("Cold Ledger Basin", "Brinefold Deep"),
        interrogations_per_day=(1000, 6000),
        power_steps=(2, 3),
        sensor_check_pressure_dbar=2000.0,
        serial_prefix="HF3",
        address_band="C",
    ),
)
DEMO_VARIANT_NAMES: tuple[str, ...] = tuple(v.name for v in VARIANTS)
_VARIANTS_BY_KEY: dict[str, VariantSpec] = {v.key: v for v in VARIANTS}

# Same for every variant; the operator's workshop rules.
PRESSURE_TEST_VALID_MONTHS = 12  # common practice, no published source
PROOF_FACTOR = 1.25  # common practice, no published source
RELEASE_TEST_VALID_DAYS = 180  # common practice, no published source
SENSOR_CHECK_INTERVAL_MONTHS = 12  # common practice, no published source
BOND_RESISTANCE_LIMIT_OHM = 0.1  # common practice, no published source

NOMINAL_CELL_V = {"alkaline": 1.5, "li_socl2": 3.6, "li_mno2": 3.0}
FRESH_CELL_OCV_V = {"alkaline": (1.59, 1.63), "li_socl2": (3.66, 3.69), "li_mno2": (3.1, 3.3)}
STRING_CAPACITY_AH = {"alkaline": 15.0, "li_socl2": 19.0, "li_mno2": 12.0}  # D-size cells
PACK_CODE = {"alkaline": "AK", "li_socl2": "LT", "li_mno2": "LM"}
# A pack comes out at the first full service after this age, whatever its charge.
PACK_AGE_LIMIT_MONTHS = {
    "alkaline": 12,
    "li_socl2": 30,
    "li_mno2": 24,
}  # common practice, no published source
_ALLOY_FOR_CALC = {"al_zn_in": "Al-Zn-In", "zn": "Zn", "mg": "Mg"}


@dataclass(frozen=True, slots=True)
class UnitSpec:
    serial: str
    variant: str
    role: str
    commissioned_days_ago: int
    wear_factor: float | None = None  # None: a normal unit (0.6-0.95 × design)
    calibrate_wear: bool = False  # pick the factor that leaves the worst anode near threshold
    chemistry: str | None = None  # None: the variant's first allowed chemistry
    tail_site: str | None = None
    notes: str = ""


_CLASH_NOTE = (
    "Answers to the same address as {other} since a board swap; re-address one of them "
    "before both go to one site."
)

# Roles: where each unit stands today (see _tail for what each one means).
ROSTER: tuple[UnitSpec, ...] = (
    UnitSpec("HF1-0101", "mw", "deployed", 1090),
    UnitSpec("HF1-0102", "mw", "deployed", 1060),
    UnitSpec("HF1-0103", "mw", "ready", 1075),
    UnitSpec("HF1-0104", "mw", "store", 1040),
    UnitSpec("HF1-0105", "mw", "store_idle", 1085, notes="Spare; idle in the store."),
    UnitSpec(
        "HF1-0106",
        "mw",
        "store_anode_low",
        1020,
        calibrate_wear=True,
        notes="Upper end-cap anode near its threshold; replacement anode on order.",
    ),
    UnitSpec(
        "HF1-0107",
        "mw",
        "workshop_open",
        1050,
        wear_factor=2.6,
        notes="Anodes wear about 2.5× design; suspect a bonding fault at the lower end cap.",
    ),
    UnitSpec("HF1-0108", "mw", "retired", 1095, notes="Retired: pitting on the upper face."),
    UnitSpec("HF1-0109", "mw", "ready", 700),
    UnitSpec("HF1-0110", "mw", "deployed", 365),
    UnitSpec(
        "HF2-0201",
        "rl",
        "deployed",
        1080,
        tail_site="Cold Ledger Basin",
        notes=_CLASH_NOTE.format(other="HF2-0202"),
    ),
    UnitSpec("HF2-0202", "rl", "ready", 1070, notes=_CLASH_NOTE.format(other="HF2-0201")),
    UnitSpec("HF2-0203", "rl", "deployed", 1055),
    UnitSpec("HF2-0204", "rl", "store_seals", 1090),
    UnitSpec("HF2-0205", "rl", "quarantined", 1030, notes="Quarantined after ingress."),
    UnitSpec("HF2-0206", "rl", "lost", 1000, tail_site="Tallowmere Slope"),
    UnitSpec("HF2-0207", "rl", "workshop_open", 1065),
    UnitSpec("HF2-0208", "rl", "ready", 990, chemistry="alkaline"),
    UnitSpec("HF2-0209", "rl", "deployed", 960),
    UnitSpec("HF2-0210", "rl", "store", 1045, chemistry="alkaline"),
    UnitSpec(
        "HF2-0211",
        "rl",
        "workshop_fault",
        1010,
        wear_factor=2.3,
        notes="Fast anode wear traced to a bare stainless bracket; watch the next readings.",
    ),
    UnitSpec("HF2-0212", "rl", "deployed", 240),
    UnitSpec("HF3-0301", "dp", "deployed", 1085),
    UnitSpec("HF3-0302", "dp", "deployed", 1040),
    UnitSpec("HF3-0303", "dp", "ready", 1060),
    UnitSpec("HF3-0304", "dp", "store", 1020),
    UnitSpec("HF3-0305", "dp", "workshop_open", 1075),
    UnitSpec("HF3-0306", "dp", "ready", 980),
    UnitSpec("HF3-0307", "dp", "store", 600),
    UnitSpec("HF3-0308", "dp", "store", 1050),
)

FINAL_HOLD: dict[str, tuple[str, str | None]] = {
    "deployed": (UnitHold.NONE, None),
    "ready": (UnitHold.NONE, STORE),
    "store": (UnitHold.NONE, STORE),
    "store_idle": (UnitHold.NONE, STORE),
    "store_seals": (UnitHold.NONE, STORE),
    "store_anode_low": (UnitHold.NONE, STORE),
    "workshop_open": (UnitHold.NONE, WORKSHOP),
    "workshop_fault": (UnitHold.NONE, WORKSHOP),
    "quarantined": (UnitHold.QUARANTINED, WORKSHOP),
    "retired": (UnitHold.RETIRED, STORE),
    "lost": (UnitHold.LOST, None),
}
HOLD_REASON = {
    UnitHold.QUARANTINED: "Proof test lost pressure; water behind the lower end cap.",
    UnitHold.RETIRED: "Pitting on the upper end-cap sealing face beyond the repair limit.",
    UnitHold.LOST: "No reply and nothing surfaced on the planned recovery; declared lost.",
}


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


def _tail(spec: UnitSpec, today: dt.date, rng: random.Random) -> list[_Tail]:
    role, ago = spec.role, (lambda days: _days_ago(today, days))
    site = spec.tail_site
    if role == "deployed":
        down = rng.randint(12, 110)
        planned = rng.randint(min(200, down + 15), 200)
        return [_Tail(ago(down), None, planned_days=planned, site=site)]
    if role == "lost":
        over = ago(262)
        silent = over + dt.timedelta(days=41)
        notes = (
            f"No reply to interrogation since {silent:%d %b %Y}. Release commanded twice from "
            f"{VESSELS[0]} on the planned recovery; no acknowledgement, nothing surfaced. "
            "Declared lost."
        )
        return [_Tail(over, None, planned_days=150, site=site, notes=notes)]
    if role == "ready":
        recovered = rng.randint(8, 28)
        return [_Tail(ago(recovered + rng.randint(40, 160)), ago(recovered), "full_ready")]
    if role == "store":
        recovered = rng.randint(45, 200)
        return [_Tail(ago(recovered + rng.randint(40, 160)), ago(recovered), "auto")]
    if role == "store_idle":
        return [_Tail(ago(492 + 120), ago(492), "full")]
    if role == "store_seals":
        return [
            _Tail(ago(430 + 110), ago(430), "full_all"),
            _Tail(ago(405), ago(260), "vessel", place=VESSELS[1]),
            _Tail(ago(255), ago(95), "workshop"),
        ]
    if role == "store_anode_low":
        return [_Tail(ago(70 + 130), ago(70), "workshop_hold_anodes")]
    if role == "workshop_open":
        recovered = rng.randint(2, 5)
        return [_Tail(ago(recovered + rng.randint(60, 150)), ago(recovered), "open")]
    if role == "workshop_fault":
        return [_Tail(ago(16 + 120), ago(16), "full_fault")]
    if role == "quarantined":
        return [_Tail(ago(26 + 140), ago(26), "ingress")]
    if role == "retired":
        return [_Tail(ago(430 + 110), ago(430), "retire")]
    raise ValueError(f"unknown role {role!r}")


class _UnitSim:
    """Walks one unit through its history, deciding each visit from the simulated state."""

    def __init__(self, spec: UnitSpec, today: dt.date, wear_factor: float) -> None:
        self.spec = spec
        self.variant = _VARIANTS_BY_KEY[spec.variant]
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
        return self.rng.choice(_BENCH_HANDS)

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
        last_place = WORKSHOP
        tail = _tail(self.spec, self.today, self.rng)
        end_free = tail[0].over - dt.timedelta(days=6)
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
        for part in tail:
            vessel = part.place if part.place in VESSELS else self.rng.choice(VESSELS)
            self.deploy(
                part.over,
                part.recovered,
                vessel,
                site=part.site,
                planned_days=part.planned_days,
                notes=part.notes,
            )
            if part.recovered is not None:
                mode = part.mode
                if mode == "auto":
                    # The unit ends ashore, so its last visit is on the bench, not on deck.
                    mode = self.decide(part.recovered)
                    mode = "workshop" if mode == "vessel" else mode
                self.visit(part.recovered, mode, part.place)
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
        # Wear and drain while down.
        for spec in self.variant.anodes:
            rate_g_day = (
                1000.0
                * anode_calc.design_wear_rate_kg_per_day(
                    spec.design_current_a,
                    anode_calc.alloy(_ALLOY_FOR_CALC[spec.alloy]).capacity_ah_per_kg,
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
        rng = self.rng
        entries: list[EntryPlan] = []
        summary: list[str] = []
        tech = "technician" if mode == "open" else self.tech()
        if mode not in ("vessel", "commission"):
            # Ashore a day or three after recovery, never later than yesterday.
            day = min(day + dt.timedelta(days=rng.randint(1, 3)), self.today - dt.timedelta(1))
        if mode == "vessel":
            opened = self.at(day, rng.randint(12, 14), rng.choice((0, 30)))
            closed: dt.datetime | None = opened + dt.timedelta(hours=rng.randint(2, 4))
            finished = day
            summary.append(f"Deck check aboard {place} after recovery from {self.last_site}.")
        else:
            opened = self.at(day, rng.randint(8, 9), rng.choice((0, 15, 30, 45)))
            span = 1 if mode.startswith("full") or mode in ("commission", "ingress") else 0
            lag = span + rng.randint(0, 1)
            closed = self.at(day + dt.timedelta(days=lag), rng.randint(15, 17), rng.choice((0, 30)))
            finished = day + dt.timedelta(days=lag)
            if mode == "commission":
                summary.append("First fit and acceptance tests.")
            else:
                summary.append(f"Bench visit after recovery from {self.last_site}.")

        full = mode in ("commission", "full", "full_ready", "full_all", "full_fault", "ingress")
        entries.extend(self._anodes(day, mode, summary))
        if full:
            entries.extend(self._full_service(day, mode, summary))
        if mode in ("workshop", "workshop_hold_anodes") or full:
            entries.extend(self._bench_tests(day, mode, summary))
        if mode == "retire":
            entries.append(
                EntryPlan(
                    "opening",
                    {
                        "opened_at": self.at(day, 10, 15),
                        "closed_at": self.at(day, 12, 40),
                        "vented_before_opening": True,
                        "internal_pressure_found": False,
                        "reason": "Inspection of the upper sealing face after pitting was seen.",
                    },
                )
            )
            summary.append(
                "Pitting on the upper end-cap sealing face is deeper than the repair limit. "
                "Unit retired; pack left fitted for disposal with the housing."
            )
        if mode == "open":
            closed = None
            finished = day
            entries.extend(self._open_visit(day, summary))
        if mode == "ingress":
            summary.append(
                "Quarantined: proof test lost pressure and water was found behind the lower "
                "end cap. Sealing bore to be inspected before the unit is used again."
            )
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

    def _anodes(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        drng = self.drng
        out: list[EntryPlan] = []
        replaced_names = []
        for spec in self.variant.anodes:
            new = spec.new_net_mass_g
            true = self.anode_mass[spec.name]
            percent = 100.0 * true / new
            values: dict[str, Any] = {
                "bond_resistance_ohm": round(drng.uniform(0.004, 0.035), 3),
            }
            if mode == "commission":
                values["mass_g"] = new
                values["note"] = "New anode, as fitted."
            elif mode == "vessel":
                # Judged against a gauge on deck: whole percent, a point or so either way.
                estimate = round(percent + drng.uniform(-1.0, 1.0))
                values["remaining_percent"] = float(max(0, min(100, estimate)))
                values["note"] = "Estimated on deck against the wear gauge."
            else:
                reading = min(
                    round(true + drng.uniform(-0.3, 0.3), 1), self.anode_last_reading[spec.name]
                )
                values["mass_g"] = reading
                self.anode_last_reading[spec.name] = reading
            # Replace an anode with less than a deployment's wear left above its threshold
            # (spares aboard allow a closer margin on deck).  # common practice, no published source
            allow = mode not in ("commission", "workshop_hold_anodes", "retire")
            margin = 5.0 if mode == "vessel" else 12.0
            if (
                allow
                and not self.spec.calibrate_wear
                and percent < spec.replace_at_percent + margin
            ):
                values["replaced"] = True
                values["note"] = (values.get("note", "") + " Replaced with a new anode.").strip()
                self.anode_mass[spec.name] = new
                self.anode_last_reading[spec.name] = new
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

    def _full_service(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        drng = self.drng
        out: list[EntryPlan] = []
        # Open the housing: every opening counts against every seal position.
        for name in self.seal_openings:
            self.seal_openings[name] += 1
        opened_at = self.at(day, 9, 30 + drng.randint(0, 25))
        vented = mode == "commission" or drng.random() > 0.04
        gas = self.variant.key == "dp" and vented and drng.random() < 0.06
        if mode == "commission":
            reason = "First assembly: battery, seals and electronics fitted."
        elif mode == "ingress":
            reason = "Water seen in the lower end cap on recovery."
        else:
            reason = "Service: battery and seals, internal inspection."
        out.append(
            EntryPlan(
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
        )
        # Seals.
        margin = 8 if mode == "full_ready" else 5
        changed = []
        for seal in self.variant.seals:
            reason_code = None
            if mode in ("commission",):
                reason_code = SealChange.Reason.FIRST_FIT
            elif mode == "full_all":
                reason_code = SealChange.Reason.INTERVAL
            elif mode == "ingress" and seal.name.startswith("Lower"):
                reason_code = SealChange.Reason.LEAK
            elif self.seal_expiry(seal.name, seal.interval_months, margin) <= day:
                reason_code = SealChange.Reason.INTERVAL
            elif self.seal_openings[seal.name] >= seal.max_openings - 1:
                reason_code = SealChange.Reason.OPENING
            elif drng.random() < 0.06:
                reason_code = SealChange.Reason.DAMAGE
            if reason_code is None:
                continue
            cure = day - dt.timedelta(days=drng.randint(100, 700))
            cure = dt.date(cure.year, 3 * ((cure.month - 1) // 3) + 1, 1)
            out.append(
                EntryPlan(
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
            )
            self.seal_fitted[seal.name] = day
            self.seal_openings[seal.name] = 0
            changed.append(seal.name.lower())
        if changed and mode != "commission":
            summary.append(f"Seals renewed: {', '.join(changed)}.")
        # Battery.
        fresh = mode in ("commission", "full_all") or (
            mode == "full_ready" and self.pack_due(day, horizon_days=240, spare=0.7)
        )
        if mode not in ("ingress",) and (fresh or self.pack_due(day)):
            chem = self.chemistry
            cells = self.variant.cells_in_series
            made = day - dt.timedelta(days=drng.randint(30, 300 if chem != "alkaline" else 150))
            capacity = STRING_CAPACITY_AH[chem] * self.variant.parallel_strings
            lo, hi = FRESH_CELL_OCV_V[chem]
            out.append(
                EntryPlan(
                    "battery",
                    {
                        "pack_serial": f"{PACK_CODE[chem]}{cells}-{made:%y%m}-"
                        f"{drng.randint(1000, 9999)}",
                        "chemistry": chem,
                        "nominal_voltage_v": round(cells * NOMINAL_CELL_V[chem], 2),
                        "capacity_ah": capacity,
                        "made_on": made,
                        "installed_on": day,
                        "ocv_install_v": round(cells * drng.uniform(lo, hi), 2),
                    },
                )
            )
            self.pack = {"installed": day, "capacity": capacity, "used_ah": 0.0}
            if mode != "commission":
                summary.append("New battery pack fitted.")
        # Proof test the day after the housing was closed.
        tested = day + dt.timedelta(days=1)
        start = self.rated_test_dbar + round(drng.uniform(0.5, 4.0), 1)
        if mode == "ingress":
            drop = start * drng.uniform(0.03, 0.05)
        else:
            drop = start * drng.uniform(0.0005, 0.003)
        water = round(drng.uniform(12.0, 19.0), 1)
        out.append(
            EntryPlan(
                "pressure",
                {
                    "tested_on": tested,
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
        )
        self.last_pressure = tested
        if mode != "ingress":
            summary.append(f"Proof test to {self.rated_test_dbar:g} dbar held.")
        return out

    def _bench_tests(self, day: dt.date, mode: str, summary: list[str]) -> list[EntryPlan]:
        drng = self.drng
        out: list[EntryPlan] = []
        full = mode not in ("workshop", "workshop_hold_anodes")
        test_day = day + dt.timedelta(days=1) if full else day
        if self.variant.release_fitted and mode != "ingress":
            kinds = [ReleaseTest.Kind.BENCH]
            if full:
                kinds.append(ReleaseTest.Kind.WET)
                due_load = (
                    self.last_load_test is None or (test_day - self.last_load_test).days >= 330
                )
                if due_load or mode in ("commission", "full_ready"):
                    kinds.append(ReleaseTest.Kind.LOAD)
                    self.last_load_test = test_day
            for kind in kinds:
                out.append(
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
                )
            self.last_release = test_day
        sensors_due = self.last_sensor is None or (day - self.last_sensor).days >= 240
        if mode in ("commission", "full_ready") or (sensors_due and mode != "ingress"):
            out.extend(self._sensor_checks(test_day))
            self.last_sensor = test_day
            if mode != "commission":
                summary.append("Sensor checks against the reference instruments.")
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
            for a in _VARIANTS_BY_KEY[spec.variant].anodes
        )
        worst = min(a.replace_at_percent for a in _VARIANTS_BY_KEY[spec.variant].anodes)
        factor = (1.0 - (worst + 1.5) / 100.0) / max(consumed, 1e-6)
    elif spec.wear_factor is None:
        factor = random.Random(f"{SEED}:{spec.serial}:wear").uniform(0.6, 0.95)
    else:
        factor = spec.wear_factor
    return _UnitSim(spec, today, factor).run()


def plan_fleet(today: dt.date) -> list[UnitPlan]:
    plans = [plan_unit(spec, today) for spec in ROSTER]
    # Acoustic addresses: unique within a band, except one clash kept on purpose.
    pool = random.Random(f"{SEED}:addresses").sample(range(100, 900), len(plans))
    by_serial = {}
    for plan, number in zip(plans, pool, strict=True):
        plan.acoustic_address = f"{_VARIANTS_BY_KEY[plan.spec.variant].address_band}{number}"
        by_serial[plan.spec.serial] = plan
    by_serial["HF2-0202"].acoustic_address = by_serial["HF2-0201"].acoustic_address
    return plans


# --- Loading: through the services ----------------------------------------------------------


def demo_loaded() -> bool:
    return Variant.objects.filter(name__in=DEMO_VARIANT_NAMES).exists()


def ensure_logins() -> dict[str, AbstractUser]:
    """The demo users, in their groups, with the demo password (set only when it differs)."""
    roles.ensure_groups()
    user_model = get_user_model()
    groups = {g.name: g for g in Group.objects.filter(name__in=roles.ROLES)}
    users: dict[str, AbstractUser] = {}
    wanted = [*LOGINS, *((name, roles.TECHNICIAN, False) for name in EXTRA_TECHNICIANS)]
    for username, group, staff in wanted:
        user, created = user_model.objects.get_or_create(username=username)
        changed = user.is_staff != staff or user.is_superuser or not user.is_active
        user.is_staff, user.is_superuser, user.is_active = staff, False, True
        if username in EXTRA_TECHNICIANS:
            if user.has_usable_password():
                user.set_unusable_password()
                changed = True
        # Hashing is slow on purpose: check an existing password only, set a new one once.
        elif created or not user.check_password(DEMO_PASSWORD):
            user.set_password(DEMO_PASSWORD)
            changed = True
        if changed:
            user.save()
        if list(user.groups.values_list("name", flat=True)) != [group]:
            user.groups.set([groups[group]])
        users[username] = user
    return users


def _create_reference() -> tuple[dict[str, Place], dict[str, Site], dict[str, Variant]]:
    # A place or site kept by an earlier reset (other data used it) is reused as it is.
    existing_places = {p.name: p for p in Place.objects.filter(name__in=[n for n, _ in PLACES])}
    existing_sites = {s.name: s for s in Site.objects.filter(name__in=[s.name for s in SITES])}
    places = {}
    for name, kind in PLACES:
        place = existing_places.get(name) or Place(name=name, kind=kind)
        if place.pk is None:
            place.full_clean()
            place.save()
        places[name] = place
    sites = {}
    for spec in SITES:
        if spec.name in existing_sites:
            sites[spec.name] = existing_sites[spec.name]
            continue
        site = Site(
            name=spec.name,
            latitude_deg=spec.latitude_deg,
            longitude_deg=spec.longitude_deg,
            water_depth_m=spec.water_depth_m,
            bottom_temperature_c=spec.bottom_temperature_c,
            practical_salinity=spec.practical_salinity,
            notes=spec.notes,
        )
        site.full_clean()
        site.save()
        sites[spec.name] = site
    variants = {}
    for spec in VARIANTS:
        variant = Variant(
            name=spec.name,
            description=spec.description,
            depth_rating_m=spec.depth_rating_m,
            housing_alloy=spec.housing_alloy,
            release_fitted=spec.release_fitted,
            has_temperature_sensor=True,
            has_pressure_sensor=True,
            has_tilt_sensor=spec.has_tilt_sensor,
            allowed_chemistries=list(spec.allowed_chemistries),
            cells_in_series=spec.cells_in_series,
            parallel_strings=spec.parallel_strings,
            listen_current_a=spec.listen_current_a,
            release_charge_as=spec.release_charge_as,
            mass_in_air_kg=spec.mass_in_air_kg,
            displaced_volume_m3=spec.displaced_volume_m3,
            pressure_test_valid_months=PRESSURE_TEST_VALID_MONTHS,
            proof_factor=PROOF_FACTOR,
            release_test_valid_days=RELEASE_TEST_VALID_DAYS if spec.release_fitted else None,
            sensor_check_interval_months=SENSOR_CHECK_INTERVAL_MONTHS,
            bond_resistance_limit_ohm=BOND_RESISTANCE_LIMIT_OHM,
        )
        variant.full_clean()
        variant.save()
        children: list[Any] = [
            ReplyChargeStep(variant=variant, step=s, charge_per_reply_as=c, source_level_db=sl)
            for s, c, sl in spec.reply_steps
        ]
        children += [
            AnodePosition(
                variant=variant,
                name=a.name,
                alloy=a.alloy,
                new_net_mass_g=a.new_net_mass_g,
                utilisation_factor=0.80,  # DNV-RP-B401 (2010) Table 10-8, bracelet/flush anodes
                replace_at_remaining_percent=a.replace_at_percent,
                design_current_a=a.design_current_a,
            )
            for a in spec.anodes
        ]
        children += [
            SealPosition(
                variant=variant,
                name=s.name,
                as568_dash=s.as568_dash,
                material=s.material,
                count=s.count,
                interval_months=s.interval_months,
                max_openings=s.max_openings,
            )
            for s in spec.seals
        ]
        for child in children:
            child.full_clean()
            child.save()
        variants[spec.key] = variant
    return places, sites, variants


_ENTRY_MODELS: dict[str, type[Any]] = {
    "anode": AnodeReading,
    "seal": SealChange,
    "battery": BatteryInstall,
    "pressure": PressureTest,
    "release": ReleaseTest,
    "sensor": SensorCheck,
    "opening": HousingOpening,
}


@dataclass(frozen=True, slots=True)
class LoadSummary:
    units: int
    variants: int
    sites: int
    places: int
    deployments: int
    open_deployments: int
    records: int
    open_records: int
    entries: int
    conditions: dict[str, int]


@transaction.atomic
def load_demo(*, today: dt.date) -> LoadSummary:
    """Create the demo fleet. The caller checks ``demo_loaded()`` first."""
    users = ensure_logins()
    supervisor = users["supervisor"]
    places, sites, variants = _create_reference()
    anode_positions = {
        (p.variant_id, p.name): p
        for p in AnodePosition.objects.filter(variant__in=variants.values())
    }
    seal_positions = {
        (p.variant_id, p.name): p
        for p in SealPosition.objects.filter(variant__in=variants.values())
    }
    entries = 0
    for plan in plan_fleet(today):
        variant = variants[plan.spec.variant]
        unit = Transponder(
            serial=plan.spec.serial,
            variant=variant,
            place=places[WORKSHOP],
            acoustic_address=plan.acoustic_address,
            turnaround_delay_ms=plan.turnaround_delay_ms,
            transmit_power_step=plan.transmit_power_step,
            notes=plan.spec.notes,
        )
        unit.full_clean()
        unit.save()
        for event in plan.events:
            if isinstance(event, DeploymentPlan):
                by = users[event.by]
                deployment = Deployment(
                    unit=unit,
                    site=sites[event.site],
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
                        place=places[event.recovered_to] if event.recovered_to else None,
                        by=by,
                    )
                continue
            technician = users[event.technician]
            record = ServiceRecord(
                unit=unit,
                opened_at=event.opened_at,
                technician=technician,
                place=places[event.place],
                summary=event.summary,
            )
            built = []
            for item in event.entries:
                model = _ENTRY_MODELS[item.kind]
                values = dict(item.values)
                if item.kind == "anode":
                    values["position"] = anode_positions[(variant.pk, item.position)]
                elif item.kind == "seal":
                    values["position"] = seal_positions[(variant.pk, item.position)]
                built.append(model(**values))
            service_record_save(record=record, entries=built, by=technician)
            entries += len(built)
            if event.closed_at is not None:
                service_record_close(record=record, by=supervisor, at=event.closed_at)
        unit = Transponder.objects.get(pk=unit.pk)
        if plan.hold != UnitHold.NONE:
            unit.hold = plan.hold
            unit.hold_reason = HOLD_REASON[UnitHold(plan.hold)]
            unit.hold_set_by = supervisor
            unit.hold_set_at = timezone.now()
        unit.place = places[plan.place] if plan.place else None
        unit.version += 1
        unit.full_clean()
        unit.save()
    units = Transponder.objects.filter(variant__in=variants.values())
    deployments = Deployment.objects.filter(unit__in=units)
    records = ServiceRecord.objects.filter(unit__in=units)
    conditions = Counter(
        annotate_condition(units.order_by(), today).values_list("condition", flat=True)
    )
    return LoadSummary(
        units=units.count(),
        variants=len(variants),
        sites=len(sites),
        places=len(places),
        deployments=deployments.count(),
        open_deployments=deployments.filter(recovered_at__isnull=True).count(),
        records=records.count(),
        open_records=records.filter(closed_at__isnull=True).count(),
        entries=entries,
        conditions=dict(sorted(conditions.items())),
    )


@transaction.atomic
def delete_demo() -> list[str]:
    """Delete the demo fleet in the order the PROTECT keys allow; returns what was kept."""
    kept: list[str] = []
    units = Transponder.objects.filter(variant__name__in=DEMO_VARIANT_NAMES)
    # Certificates issued on demo release tests go first, oldest first: a superseded one
    # points (PROTECT) at the certificate that replaced it.
    for certificate in ReleaseCertificate.objects.filter(
        release_test__record__unit__in=units
    ).order_by("issued_at", "pk"):
        certificate.delete()
    Amendment.objects.filter(record__unit__in=units).delete()
    ServiceRecord.objects.filter(unit__in=units).delete()  # entries cascade with their record
    Deployment.objects.filter(unit__in=units).delete()
    units.delete()
    Variant.objects.filter(name__in=DEMO_VARIANT_NAMES).delete()
    # Shared rows may be in use by data someone added by hand; keep those and say so.
    leftovers: list[Any] = [
        *Site.objects.filter(name__in=[s.name for s in SITES]),
        *Place.objects.filter(name__in=[name for name, _ in PLACES]),
        *get_user_model().objects.filter(username__in=DEMO_USERNAMES),
    ]
    for obj in leftovers:
        try:
            with transaction.atomic():
                obj.delete()
        except ProtectedError:
            kept.append(str(obj))
    return kept


def fleet_fingerprint() -> dict[str, tuple[int, tuple[float | None, ...]]]:
    """serial -> (record count, anode reading masses in visit order): a cheap identity check."""
    out: dict[str, tuple[int, tuple[float | None, ...]]] = {}
    counts = Counter(
        ServiceRecord.objects.filter(unit__variant__name__in=DEMO_VARIANT_NAMES).values_list(
            "unit__serial", flat=True
        )
    )
    masses: dict[str, list[float | None]] = {serial: [] for serial in counts}
    readings = (
        AnodeReading.objects.filter(record__unit__variant__name__in=DEMO_VARIANT_NAMES)
        .order_by("record__unit__serial", "record__opened_at", "position__name")
        .values_list("record__unit__serial", "mass_g")
    )
    for serial, mass in readings:
        masses[serial].append(mass)
    for serial in sorted(counts):
        out[serial] = (counts[serial], tuple(masses[serial]))
    return out


__all__ = [
    "DEMO_PASSWORD",
    "LOGINS",
    "ROSTER",
    "delete_demo",
    "demo_loaded",
    "ensure_logins",
    "fleet_fingerprint",
    "load_demo",
    "plan_fleet",
]
