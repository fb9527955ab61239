"""Cautions that fit the unit and the work: one function, used by the bench-visit page, the
record page, the service report, the release certificate and the pre-deployment checklist.

``cautions_for`` picks, for one unit and the tasks a page or document asks for:

- the battery caution of the chemistry actually fitted (or, with no pack fitted, of every
  chemistry the variant allows): lithium packs' venting and transport rules, alkaline packs'
  hydrogen in a sealed housing; never the lithium text on an alkaline unit;
- the release caution only when the variant has a release and the work runs it;
- the pressure-test caution only when a pressure test is part of the work, with the proof
  pressure for this unit's rating;
- trapped pressure when a housing is opened; the transducer drive when the board is exposed
  or the unit is handled on deck; heavy lifts when the unit is heavy or goes over the side;
- always last: the cautions defer to local codes, company procedures and licensed practice.

The hazards themselves are common practice, no published source; the texts are our own words.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from enum import StrEnum

from fleet.formatting import quantity
from fleet.models import BatteryInstall, Chemistry, ServiceRecord, Transponder, Variant


class Task(StrEnum):
    """What a page or document asks someone to do."""

    OPEN_HOUSING = "open_housing"
    PRESSURE_TEST = "pressure_test"
    RELEASE_TEST = "release_test"
    BATTERY = "battery"
    DEPLOY = "deploy"


@dataclass(frozen=True, slots=True)
class Caution:
    key: str
    title: str
    text: str

    def __str__(self) -> str:
        return f"{self.title}: {self.text}"


# Our own words for each hazard (DESIGN.md, "Cautions").
TEXTS: dict[str, tuple[str, str]] = {
    "lithium": (
        "Lithium pack",
        "lithium primary cells can vent toxic, corrosive gas or burn if shorted, crushed, "
        "heated, wetted or charged: keep terminals covered, never charge them, store and ship "
        "them under the transport rules that apply.",
    ),
    "alkaline": (
        "Alkaline pack",
        "alkaline cells can give off hydrogen inside a sealed housing: open it away from "
        "sparks and flames, and keep terminals covered against shorts.",
    ),
    "pressure": (
        "Trapped pressure",
        "a housing that has been at depth, or in the test vessel, may hold pressure or gas: "
        "vent it from behind a shield before loosening an end cap, and never stand in line "
        "with an end cap while opening it.",
    ),
    "pressure_test": (
        "Pressure test",
        "hydrostatic only (never gas), in a rated vessel behind an exclusion zone; keep people "
        "clear while it holds pressure: a housing that fails at pressure releases its stored "
        "energy violently.",
    ),
    "release": (
        "Release mechanism",
        "keep hands and tools clear of the hook and linkage pinch points whenever the motor "
        "can run; latch it only with the unit powered as your procedure says.",
    ),
    "transducer": (
        "Transducer drive",
        "the transducer is driven with kilovolt pulses: isolate the pack and discharge the "
        "drive before touching the board, its terminals or the transducer face.",
    ),
    "lifting": (
        "Heavy lift",
        "lift with rated gear and slings, never by cables, transducer or release linkage.",
    ),
    "defer": (
        "Your rules govern",
        "these notes are reminders, not a procedure. Follow local codes, your company's "
        "procedures and licensed practice; where they differ from this page, they govern.",
    ),
}

LITHIUM = frozenset({Chemistry.LI_SOCL2, Chemistry.LI_MNO2})

# Above this mass in air a unit is a lift for gear or two people (common practice, no
# published source; manual-handling guidance varies by country).
HEAVY_KG = 25.0


def caution(key: str, extra: str = "") -> Caution:
    title, text = TEXTS[key]
    return Caution(key, title, f"{text} {extra}".strip())


def battery_cautions(chemistries: Iterable[str]) -> list[Caution]:
    """The caution of each chemistry present: lithium, alkaline, or both."""
    present = set(chemistries)
    found = []
    if present & LITHIUM:
        found.append(caution("lithium"))
    if Chemistry.ALKALINE in present:
        found.append(caution("alkaline"))
    return found


def unit_chemistries(unit: Transponder) -> tuple[str, ...]:
    """The fitted pack's chemistry; with no pack fitted, every chemistry the variant allows
    (the next pack may be any of them). One query."""
    fitted = (
        BatteryInstall.objects.filter(unit=unit, removal__isnull=True)
        .values_list("chemistry", flat=True)
        .first()
    )
    if fitted:
        return (fitted,)
    return tuple(unit.variant.allowed_chemistries or ())


def _proof_words(variant: Variant) -> str:
    # The proof pressure itself is computed by the due rules; here the rating is enough.
    return f"This unit is rated to {quantity(variant.depth_rating_m, 'm')}."


def _is_heavy(variant: Variant) -> bool:
    return variant.mass_in_air_kg is not None and variant.mass_in_air_kg >= HEAVY_KG


def cautions_for(
    variant: Variant, *, tasks: Iterable[Task], chemistries: Iterable[str] = ()
) -> tuple[Caution, ...]:
    """The cautions for ``tasks`` on a unit of ``variant`` with packs of ``chemistries``, in
    a fixed order, each once, ending with the deferral to local rules."""
    wanted = set(tasks)
    found: list[Caution] = []
    if wanted & {Task.OPEN_HOUSING, Task.DEPLOY}:
        found.append(caution("pressure"))
    if Task.PRESSURE_TEST in wanted:
        found.append(caution("pressure_test", _proof_words(variant)))
    if variant.release_fitted and wanted & {Task.RELEASE_TEST, Task.DEPLOY}:
        found.append(caution("release"))
    if wanted & {Task.BATTERY, Task.OPEN_HOUSING, Task.DEPLOY}:
        found += battery_cautions(chemistries)
    if wanted & {Task.OPEN_HOUSING, Task.DEPLOY}:
        found.append(caution("transducer"))
    if Task.DEPLOY in wanted or (_is_heavy(variant) and Task.PRESSURE_TEST in wanted):
        found.append(caution("lifting"))
    found.append(caution("defer"))
    return tuple(found)


def unit_cautions(unit: Transponder, *, tasks: Iterable[Task]) -> tuple[Caution, ...]:
    """``cautions_for`` with the unit's own pack (one query)."""
    return cautions_for(unit.variant, tasks=tasks, chemistries=unit_chemistries(unit))


def bench_cautions(unit: Transponder) -> dict[str, tuple[Caution, ...]]:
    """Per section of the bench-visit page (by formset prefix), the cautions of the hazard
    that section records. One query."""
    fitted = unit_chemistries(unit)
    possible = {*fitted, *(unit.variant.allowed_chemistries or ())}
    variant = unit.variant
    return {
        "pressure": (caution("pressure_test", _proof_words(variant)),),
        "release": (caution("release"),) if variant.release_fitted else (),
        "battery": tuple(battery_cautions(possible)),
        "packremovals": tuple(battery_cautions(fitted)),
        "openings": (caution("pressure"), caution("transducer")),
    }


def record_tasks(record: ServiceRecord) -> tuple[Task, ...]:
    """The work a bench visit's entries show was done (one query per kind asked)."""
    tasks = [Task.OPEN_HOUSING] if record.housing_openings.exists() else []
    if record.pressure_tests.exists():
        tasks.append(Task.PRESSURE_TEST)
    if record.release_tests.exists():
        tasks.append(Task.RELEASE_TEST)
    if record.battery_installs.exists() or record.pack_removals.exists():
        tasks.append(Task.BATTERY)
    return tuple(tasks)


def record_chemistries(record: ServiceRecord) -> tuple[str, ...]:
    """The chemistries of the packs the visit handled (fitted or taken out), else the unit's."""
    handled = {
        *record.battery_installs.values_list("chemistry", flat=True),
        *record.pack_removals.values_list("install__chemistry", flat=True),
    }
    return tuple(sorted(handled)) or unit_chemistries(record.unit)


def record_cautions(record: ServiceRecord) -> tuple[Caution, ...]:
    """The cautions for the work a bench visit records, on its unit, with its packs."""
    return cautions_for(
        record.unit.variant, tasks=record_tasks(record), chemistries=record_chemistries(record)
    )
