"""Keep the derived state rows (fleet/models/state.py) in step with the records.

Algorithm for one unit, run inside the transaction of every write that touches the unit:

1. Deployments, in order, give the unit's immersed time: every reading's x is the
   cumulative immersed days at the moment of its bench visit (``calc.exposure``).
2. Anodes: per position, walk the readings oldest first and add (x − x_fit, mass kg) to
   the running sums (``calc.anodes.WearSums``). A reading marked *replaced* ends that anode:
   the sums restart from one point, (0, new net mass), at that visit.
3. Seals: per position, the last seal change is the fitted ring; housing openings in later
   visits count against it.
4. Battery: the fitted pack's charge used over recovered deployments since it went in:
   listening hours × listen current + replies × charge per reply at the deployment's
   transmit power step + release operations (``calc.battery.charge_used_ah``). Replies are
   the count made on recovery where there is one, else the planned rate.
5. Last pressure test, and whether any housing opening since voids it; last release test
   and sensor checks.

Recomputing one unit reads only that unit's records (a handful of queries). A whole-fleet
evaluation then reads one row per item.
"""

import datetime as dt

from django.db import transaction
from django.utils import timezone

from fleet.calc.anodes import WearSums
from fleet.calc.battery import charge_used_ah
from fleet.calc.exposure import immersed_days, overlap_days
from fleet.models import (
    AnodeReading,
    AnodeState,
    BatteryInstall,
    Deployment,
    HousingOpening,
    PressureTest,
    ReleaseTest,
    SealChange,
    SealState,
    SensorCheck,
    Transponder,
    UnitState,
)

_FAR_FUTURE = dt.datetime(9000, 1, 1, tzinfo=dt.UTC)


def start_of(day: dt.date) -> dt.datetime:
    """Midnight at the start of ``day`` in the workshop's time zone (settings.TIME_ZONE)."""
    return timezone.make_aware(dt.datetime.combine(day, dt.time.min))


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
    """Replies made during ``days_in_window`` days of a deployment."""
    if deployment.recovered_at is not None and deployment.replies_counted is not None:
        total_days = (deployment.recovered_at - deployment.over_side_at).total_seconds() / 86400
        if total_days <= 0:
            return 0
        return round(deployment.replies_counted * min(1.0, days_in_window / total_days))
    return round(deployment.planned_interrogations_per_day * days_in_window)


def replies_per_day(deployment: Deployment) -> float:
    if deployment.recovered_at is not None and deployment.replies_counted is not None:
        days = (deployment.recovered_at - deployment.over_side_at).total_seconds() / 86400
        if days > 0:
            return deployment.replies_counted / days
    return float(deployment.planned_interrogations_per_day)


@transaction.atomic
def refresh_unit_state(unit: Transponder, *, at: dt.datetime) -> UnitState:
    variant = unit.variant
    deployments = list(
        Deployment.objects.filter(unit=unit).select_related("site").order_by("over_side_at")
    )
    intervals = [(d.over_side_at, d.recovered_at) for d in deployments]
    closed = [d for d in deployments if d.recovered_at is not None]
    open_deployment = next((d for d in deployments if d.recovered_at is None), None)

    def x_at(moment: dt.datetime) -> float:
        return immersed_days(intervals, moment)

    # Anodes
    positions = {p.pk: p for p in variant.anode_positions.all()}
    readings = (
        AnodeReading.objects.filter(record__unit=unit, position__in=list(positions))
        .select_related("record")
        .order_by("record__opened_at", "pk")
    )
    anode_rows: dict[int, AnodeState] = {
        pk: AnodeState(unit=unit, position_id=pk) for pk in positions
    }
    sums: dict[int, WearSums] = {pk: WearSums.empty() for pk in positions}
    for reading in readings:
        position = positions[reading.position_id]
        row = anode_rows[position.pk]
        new_kg = position.new_net_mass_g / 1000.0
        if reading.mass_g is not None:
            mass_kg = reading.mass_g / 1000.0
        elif reading.remaining_percent is not None:
            mass_kg = new_kg * reading.remaining_percent / 100.0
        else:
            continue
        x = x_at(reading.record.opened_at)
        sums[position.pk] = sums[position.pk].add(max(0.0, x - row.immersed_days_at_fit), mass_kg)
        row.last_read_at = reading.record.opened_at
        row.last_mass_kg = mass_kg
        row.last_bond_resistance_ohm = reading.bond_resistance_ohm
        if reading.replaced:
            row.fitted_at = reading.record.opened_at
            row.immersed_days_at_fit = x
            row.last_mass_kg = new_kg
            sums[position.pk] = WearSums.empty().add(0.0, new_kg)
    for pk, row in anode_rows.items():
        s = sums[pk]
        row.n, row.sum_x, row.sum_y = s.n, s.sum_x, s.sum_y
        row.sum_xx, row.sum_xy, row.sum_yy = s.sum_xx, s.sum_xy, s.sum_yy
    AnodeState.objects.filter(unit=unit).delete()
    AnodeState.objects.bulk_create(anode_rows.values())

    # Seals
    openings = list(
        HousingOpening.objects.filter(record__unit=unit)
        .select_related("record")
        .order_by("opened_at")
    )
    seal_positions = list(variant.seal_positions.all())
    latest_change: dict[int, SealChange] = {}
    for change in (
        SealChange.objects.filter(record__unit=unit)
        .select_related("record")
        .order_by("record__opened_at", "pk")
    ):
        latest_change[change.position_id] = change
    seal_rows = []
    for position in seal_positions:
        change = latest_change.get(position.pk)
        row = SealState(unit=unit, position=position)
        if change is not None:
            fitted = change.record.opened_at
            row.fitted_at = fitted
            row.cure_date = change.cure_date
            row.material = change.material
            # Openings during the fitting visit came before the new ring went in.
            row.openings_since_fit = sum(1 for o in openings if o.record.opened_at > fitted)
        seal_rows.append(row)
    SealState.objects.filter(unit=unit).delete()
    SealState.objects.bulk_create(seal_rows)

    # Battery
    steps = {s.step: s.charge_per_reply_as for s in variant.reply_steps.all()}
    pack = BatteryInstall.objects.filter(unit=unit, removed_on__isnull=True).first()
    pack_charge = 0.0
    pack_releases = 0
    if pack is not None:
        fitted_from = start_of(pack.installed_on)
        hours = 0.0
        replies_charge = 0.0
        for d in closed:
            days = overlap_days(d.over_side_at, d.recovered_at, fitted_from, _FAR_FUTURE)
            if days <= 0:
                continue
            hours += days * 24.0
            n = replies_in(d, days)
            replies_charge += charge_used_ah(
                0.0, 0.0, n, charge_per_reply_as(steps, d.transmit_power_step)
            )
            if variant.release_fitted and d.recovered_at >= fitted_from:
                pack_releases += 1  # the release fired to bring the unit up
        pack_releases += ReleaseTest.objects.filter(
            record__unit=unit, tested_on__gte=pack.installed_on
        ).count()
        pack_charge = (
            charge_used_ah(
                hours, variant.listen_current_a, 0, 0.0, pack_releases, variant.release_charge_as
            )
            + replies_charge
        )

    # Tests and checks
    last_test = (
        PressureTest.objects.filter(record__unit=unit)
        .select_related("record")
        .order_by("-tested_on", "-record__opened_at", "-pk")
        .first()
    )
    voided = False
    if last_test is not None:
        voided = any(
            timezone.localdate(o.opened_at) > last_test.tested_on
            or o.record.opened_at > last_test.record.opened_at
            for o in openings
        )
    last_release = (
        ReleaseTest.objects.filter(record__unit=unit).order_by("-tested_on", "-pk").first()
    )
    latest_check: dict[str, SensorCheck] = {}
    for check in SensorCheck.objects.filter(record__unit=unit).order_by("checked_on", "pk"):
        latest_check[check.sensor] = check

    duty = open_deployment or (closed[-1] if closed else None)
    state, _ = UnitState.objects.update_or_create(
        unit=unit,
        defaults={
            "refreshed_at": at,
            "immersed_days_closed": immersed_days(
                [(d.over_side_at, d.recovered_at) for d in closed], _FAR_FUTURE
            ),
            "first_over_side_at": deployments[0].over_side_at if deployments else None,
            "open_deployment": open_deployment,
            "duty_deployment": duty,
            "duty_replies_per_day": replies_per_day(duty) if duty else None,
            "duty_site": duty.site if duty else None,
            "pack": pack,
            "pack_charge_used_ah": pack_charge,
            "pack_releases": pack_releases,
            "last_pressure_test": last_test,
            "last_opening_at": openings[-1].opened_at if openings else None,
            "test_voided_by_opening": voided,
            "last_release_test": last_release,
            "last_temperature_check": latest_check.get(SensorCheck.Sensor.TEMPERATURE),
            "last_pressure_check": latest_check.get(SensorCheck.Sensor.PRESSURE),
            "last_tilt_check": latest_check.get(SensorCheck.Sensor.TILT),
        },
    )
    return state


def rebuild_all(*, at: dt.datetime, batch: int = 500) -> int:
    """Recompute every unit's state and stored due items from its records.

    Returns the number of units.
    """
    from .store import refresh_unit  # the store builds on this module

    count = 0
    queryset = Transponder.objects.select_related("variant").order_by("pk")
    for unit in queryset.iterator(chunk_size=batch):
        refresh_unit(unit, at=at)
        count += 1
    return count
