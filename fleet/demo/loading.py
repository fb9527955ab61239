"""Loading the demo fleet: logins and groups, reference rows, the fleet, and taking it away.

``seed_demo`` asks ``demo_loaded()`` first (a second run only refreshes the logins) and calls
``delete_demo()`` for ``--reset``. ``load_demo`` creates the logins, places, sites and
variants, plans the fleet (``simulation.plan_fleet``) and writes each unit's history
(``simulation.write_unit``) inside one transaction.
"""

from __future__ import annotations

import datetime as dt
from collections import Counter
from dataclasses import dataclass
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group, User
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import ProtectedError

from fleet import roles
from fleet.demo.scenario import (
    BOND_RESISTANCE_LIMIT_OHM,
    DEMO_PASSWORD,
    DEMO_USERNAMES,
    DEMO_VARIANT_NAMES,
    EXTRA_TECHNICIANS,
    LOGINS,
    PLACES,
    PRESSURE_TEST_VALID_MONTHS,
    PROOF_FACTOR,
    RELEASE_TEST_VALID_DAYS,
    SENSOR_CHECK_INTERVAL_MONTHS,
    SITES,
    VARIANTS,
    VariantSpec,
)
from fleet.demo.simulation import FleetRows, plan_fleet, write_unit
from fleet.due.condition import annotate_condition
from fleet.integrity import purging
from fleet.models import (
    Amendment,
    AnodePosition,
    AnodeReading,
    Deployment,
    Place,
    ReleaseCertificate,
    ReleaseTest,
    ReplyChargeStep,
    SealPosition,
    ServiceRecord,
    Site,
    Transponder,
    Variant,
)
from fleet.services.certificates import certificate_issue, certificate_withdraw

# --- Idempotency and logins -------------------------------------------------------------------


def demo_loaded() -> bool:
    return Variant.objects.filter(name__in=DEMO_VARIANT_NAMES).exists()


@dataclass(frozen=True, slots=True)
class DemoLogins:
    """The demo users, which of them this run created, and which keep a password of their own."""

    users: dict[str, User]
    created: tuple[str, ...]
    own_password: tuple[str, ...]


def ensure_logins() -> DemoLogins:
    """The demo users in their groups. Only a user created here gets a password.

    A missing sign-in user is created with the published demo password, a missing extra
    technician with none (it appears in records only). An existing user's password is never
    touched: one that no longer matches what the demo would give it is listed in
    ``own_password`` so that the command can say so.
    """
    roles.ensure_groups()
    user_model = get_user_model()
    groups = {g.name: g for g in Group.objects.filter(name__in=roles.ROLES)}
    users: dict[str, User] = {}
    created_names: list[str] = []
    own_password: list[str] = []
    wanted = [*LOGINS, *((name, roles.TECHNICIAN, False) for name in EXTRA_TECHNICIANS)]
    for username, group, staff in wanted:
        user, created = user_model.objects.get_or_create(username=username)
        if created:
            created_names.append(username)
        elif _has_own_password(user):
            own_password.append(username)
        _sync_login(user, staff=staff, created=created)
        if list(user.groups.values_list("name", flat=True)) != [group]:
            user.groups.set([groups[group]])
        users[username] = user
    return DemoLogins(users=users, created=tuple(created_names), own_password=tuple(own_password))


def _has_own_password(user: User) -> bool:
    # Hashing is slow on purpose: one check per existing sign-in user.
    if user.username in EXTRA_TECHNICIANS:
        return bool(user.has_usable_password())
    return not user.check_password(DEMO_PASSWORD)


def _sync_login(user: User, *, staff: bool, created: bool) -> None:
    """Flags as the demo wants them, and a password for a new user only; saves on a change."""
    changed = user.is_staff != staff or user.is_superuser or not user.is_active
    user.is_staff, user.is_superuser, user.is_active = staff, False, True
    if created:
        if user.username in EXTRA_TECHNICIANS:
            user.set_unusable_password()
        else:
            user.set_password(DEMO_PASSWORD)
        changed = True
    if changed:
        user.save()


# --- Reference rows: places, sites, variants ------------------------------------------------


def _create_places() -> dict[str, Place]:
    # A place kept by an earlier reset (other data used it) is reused as it is.
    existing = {p.name: p for p in Place.objects.filter(name__in=[n for n, _ in PLACES])}
    places = {}
    for name, kind in PLACES:
        place = existing.get(name) or Place(name=name, kind=kind)
        if place.pk is None:
            place.full_clean()
            place.save()
        places[name] = place
    return places


def _create_sites() -> dict[str, Site]:
    # A site kept by an earlier reset (other data used it) is reused as it is.
    existing = {s.name: s for s in Site.objects.filter(name__in=[s.name for s in SITES])}
    sites = {}
    for spec in SITES:
        if spec.name in existing:
            sites[spec.name] = existing[spec.name]
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
    return sites


def _create_variant(spec: VariantSpec) -> Variant:
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
    for child in _variant_children(variant, spec):
        child.full_clean()
        child.save()
    return variant


def _variant_children(variant: Variant, spec: VariantSpec) -> list[Any]:
    """Reply charge steps, anode positions and seal positions, in that order."""
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
    return children


def _fleet_rows(users: dict[str, User]) -> FleetRows:
    places = _create_places()
    sites = _create_sites()
    variants = {spec.key: _create_variant(spec) for spec in VARIANTS}
    anodes = AnodePosition.objects.filter(variant__in=variants.values())
    seals = SealPosition.objects.filter(variant__in=variants.values())
    return FleetRows(
        users=users,
        places=places,
        sites=sites,
        variants=variants,
        anode_positions={(p.variant_id, p.name): p for p in anodes},
        seal_positions={(p.variant_id, p.name): p for p in seals},
    )


# --- Loading and deleting the fleet ---------------------------------------------------------


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
    own_password: tuple[str, ...]


@transaction.atomic
def load_demo(*, today: dt.date) -> LoadSummary:
    """Create the demo fleet. The caller checks ``demo_loaded()`` first."""
    logins = ensure_logins()
    rows = _fleet_rows(logins.users)
    entries = 0
    for plan in plan_fleet(today):
        entries += write_unit(plan, rows)
    units = Transponder.objects.filter(variant__in=rows.variants.values())
    _issue_certificates(units, by=logins.users["supervisor"])
    deployments = Deployment.objects.filter(unit__in=units)
    records = ServiceRecord.objects.filter(unit__in=units)
    conditions = Counter(
        annotate_condition(units.order_by(), today).values_list("condition", flat=True)
    )
    return LoadSummary(
        units=units.count(),
        variants=len(rows.variants),
        sites=len(rows.sites),
        places=len(rows.places),
        deployments=deployments.count(),
        open_deployments=deployments.filter(recovered_at__isnull=True).count(),
        records=records.count(),
        open_records=records.filter(closed_at__isnull=True).count(),
        entries=entries,
        conditions=dict(sorted(conditions.items())),
        own_password=logins.own_password,
    )


# What the demo does with the latest passing release test of three units (the earliest
# closed visits first, so the numbers run with the dates), so that a newcomer sees a
# certificate in each state: issued; issued, then issued again (the first superseded);
# issued, then withdrawn. Dated half an hour after the visit closed.
CERTIFICATE_STORIES = ("issued", "superseded", "withdrawn")
WITHDRAWN_REASON = "Issued against the wrong test sheet; the unit is retested before it goes out."


def _issue_certificates(units: Any, *, by: User) -> dict[str, str]:
    """Certificates through the service (``fleet.services.certificates``). Returns
    {serial: story}."""
    tests = (
        ReleaseTest.objects.filter(
            record__unit__in=units,
            record__closed_at__isnull=False,
            pk__in=units.values("state__last_release_test"),
        )
        .select_related("record__unit")
        .order_by("record__closed_at", "pk")
    )
    stories: dict[str, str] = {}
    for test in tests:
        if len(stories) == len(CERTIFICATE_STORIES):
            break
        closed_at = test.record.closed_at
        if closed_at is None:  # filtered out above; never certify an open visit
            continue
        at = closed_at + dt.timedelta(minutes=30)
        try:
            certificate = certificate_issue(release_test=test, by=by, at=at)
        except ValidationError:  # a failed test gets no certificate: try the next unit
            continue
        story = CERTIFICATE_STORIES[len(stories)]
        if story == "superseded":
            certificate_issue(release_test=test, by=by, at=at + dt.timedelta(minutes=20))
        elif story == "withdrawn":
            certificate_withdraw(
                certificate=certificate,
                reason=WITHDRAWN_REASON,
                by=by,
                at=at + dt.timedelta(minutes=40),
            )
        stories[test.record.unit.serial] = story
    return stories


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
    # Closed records are guarded in the database; removing the demo's own is the one purge.
    with purging():
        ServiceRecord.objects.filter(unit__in=units).delete()  # entries cascade with the record
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
