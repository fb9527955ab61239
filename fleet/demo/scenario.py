"""The invented demo scenario: people, places, sites, variants and the thirty units.

Data only: frozen dataclasses, tuples and read-only mappings. Every name here is made up:
the operator's workshop and store, the two vessels, the five sites, the three variants, the
thirty units and the people's user names. ``simulation.py`` turns the roster into a history;
``loading.py`` writes it.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType

from fleet import roles
from fleet.models import Place, UnitHold

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
BENCH_HANDS: tuple[str, ...] = ("technician", *EXTRA_TECHNICIANS)

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
PRESSURE_HOLD_ENDED_AT = dt.time(15, 30)


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
    address_channel: int  # acoustic addresses "C<channel>-<number>", e.g. C3-17


# Buoyancy of the invented designs at 1021.7 kg/m³ (30 °C surface water, the least dense a
# rising unit meets): Release 1500 displaces 0.0440 m³ -> 45.0 kg against 38.0 kg in air;
# Deep 3000 0.0570 m³ -> 58.2 kg against 52.0 kg; the mid-water unit's foam collar brings
# it to 0.0215 m³ -> 22.0 kg against 16.5 kg, so it floats free if its mooring parts. Each
# keeps more than the 10 % of its mass in air the recovery rule asks for.
VARIANTS: tuple[VariantSpec, ...] = (
    VariantSpec(
        key="mw",
        name="Mid-water 500 m",
        description=(
            "Shallow mid-water unit in a clamp frame with a foam collar, hard-anodised "
            "aluminium housing, no release; recovered with its mooring. Alkaline pack of 21 D "
            "cells in one string."
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
        displaced_volume_m3=0.0215,
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
        address_channel=1,
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
        address_channel=2,
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
        address_channel=3,
    ),
)
DEMO_VARIANT_NAMES: tuple[str, ...] = tuple(v.name for v in VARIANTS)
VARIANTS_BY_KEY: Mapping[str, VariantSpec] = MappingProxyType({v.key: v for v in VARIANTS})

# Same for every variant; the operator's workshop rules.
PRESSURE_TEST_VALID_MONTHS = 12  # common practice, no published source
PROOF_FACTOR = 1.25  # common practice, no published source
RELEASE_TEST_VALID_DAYS = 180  # common practice, no published source
SENSOR_CHECK_INTERVAL_MONTHS = 12  # common practice, no published source
BOND_RESISTANCE_LIMIT_OHM = 0.1  # common practice, no published source

NOMINAL_CELL_V: Mapping[str, float] = MappingProxyType(
    {"alkaline": 1.5, "li_socl2": 3.6, "li_mno2": 3.0}
)
FRESH_CELL_OCV_V: Mapping[str, tuple[float, float]] = MappingProxyType(
    {"alkaline": (1.59, 1.63), "li_socl2": (3.66, 3.69), "li_mno2": (3.1, 3.3)}
)
STRING_CAPACITY_AH: Mapping[str, float] = MappingProxyType(
    {"alkaline": 15.0, "li_socl2": 19.0, "li_mno2": 12.0}  # D-size cells
)
PACK_CODE: Mapping[str, str] = MappingProxyType(
    {"alkaline": "AK", "li_socl2": "LT", "li_mno2": "LM"}
)
# A pack comes out at the first full service after this age, whatever its charge.
PACK_AGE_LIMIT_MONTHS: Mapping[str, int] = MappingProxyType(
    {
        "alkaline": 12,
        "li_socl2": 30,
        "li_mno2": 24,
    }
)  # common practice, no published source


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

# Roles: where each unit stands today (simulation._tail says what each one means).
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

FINAL_HOLD: Mapping[str, tuple[str, str | None]] = MappingProxyType(
    {
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
)
HOLD_REASON: Mapping[str, str] = MappingProxyType(
    {
        UnitHold.QUARANTINED: "Proof test lost pressure; water behind the lower end cap.",
        UnitHold.RETIRED: "Pitting on the upper end-cap sealing face beyond the repair limit.",
        UnitHold.LOST: "No reply and nothing surfaced on the planned recovery; declared lost.",
    }
)
