"""Writes for deployments: a unit goes over the side, a unit comes back.

Going over the side is gated:

1. the unit row is locked, then its condition read (``fleet.due.condition``): a held unit
   (lost, retired, quarantined), one in the water or one on the bench cannot deploy, whoever
   asks;
2. the deployment's own fields are validated (dates, power step, overlapping deployments);
3. readiness runs for the site and the planned days, duty and power step
   (``fleet.due.readiness.readiness_for``). Any failing check blocks the deployment. A
   supervisor may deploy against the failed checks with a written reason; the reason, who,
   when and the failing checks as they read then are kept on the deployment.

Readiness is evaluated from today (``start = max(today, over-side date)``) for the full planned
days: the records it reads are today's, so judging "as of" a past over-side moment would mix
today's records with a past clock. From today the battery and anode checks need what the true
period needs (today's state does not yet count the days already in the water), and the
validity checks look as far as the true recovery date or further: a deployment entered after
the fact is judged at least as strictly as one entered on the day, never more leniently.
"""

import datetime as dt

from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import Q
from django.utils import timezone

from fleet import roles
from fleet.due.condition import Condition, condition_of
from fleet.due.planned import PlannedDeployment
from fleet.due.readiness import CheckResult, Verdict, readiness_for
from fleet.due.store import refresh_unit
from fleet.models import Deployment, Place, ServiceRecord, Transponder, UnitHold
from fleet.models.validators import within_date_bounds

OVERRIDE_MIN_CHARS = 10

_REFUSAL = {
    Condition.IN_WATER: "is in the water now; recover it first",
    Condition.ON_BENCH: "is on the bench; close or discard its open bench visit first",
}


class ReadinessError(ValidationError):
    """Readiness failed and was not overridden. ``checks`` are the failing checks;
    ``override_error`` says why a given override reason was not accepted (else "")."""

    def __init__(
        self,
        checks: list[CheckResult],
        *,
        site: str,
        start: dt.date,
        days: int,
        override_error: str = "",
    ):
        self.checks = checks
        self.override_error = override_error
        self.summary = (
            f"Readiness for {site} from {start} for {days} days failed "
            f"({len(checks)} check{'s' if len(checks) != 1 else ''}); the unit cannot deploy."
        )
        super().__init__(
            [self.summary]
            + [f"{c.name}: {c.numbers}" for c in checks]
            + ([override_error] if override_error else [])
        )


def deploy_refusal(unit: Transponder, on: dt.date) -> str:
    """Why ``unit`` cannot deploy whatever readiness says ("" when it may be checked): held,
    in the water or on the bench."""
    condition = condition_of(unit, on)
    if condition.held:
        return (
            f"{unit.serial} is {condition.label.lower()} and cannot deploy "
            f"(hold: {unit.hold_reason})."
        )
    if condition in _REFUSAL:
        return f"{unit.serial} {_REFUSAL[condition]}; it cannot deploy."
    return ""


@transaction.atomic
def deployment_start(
    *,
    deployment: Deployment,
    by: User,
    override_reason: str = "",
    check_readiness: bool = True,
) -> Deployment:
    """Put a unit in the water, gated as the module docstring says.

    ``override_reason`` (a supervisor's, at least ten characters) deploys against failed
    checks. ``check_readiness=False`` is only for loading past deployments that were
    recovered long ago (the demo loader): their readiness cannot be judged from today's
    records. The condition gate (step 1) always applies.
    """
    at = timezone.now()
    today = timezone.localdate(at)
    unit = (
        Transponder.objects.select_for_update().select_related("variant").get(pk=deployment.unit_id)
    )
    refusal = deploy_refusal(unit, today)
    if refusal:
        raise ValidationError({"unit": refusal})
    deployment.unit = unit
    deployment.created_by = by
    deployment.full_clean()
    reason = override_reason.strip()
    if check_readiness:
        start = max(today, timezone.localdate(deployment.over_side_at))
        try:
            planned = PlannedDeployment(
                site=deployment.site,
                start=start,
                days=deployment.planned_days,
                interrogations_per_day=deployment.planned_interrogations_per_day,
                power_step=deployment.transmit_power_step,
            )
            readiness = readiness_for(unit, planned, on=today)
        except ValueError as exc:
            raise ValidationError(f"Readiness could not be checked: {exc}") from exc
        failures = [c for c in readiness.checks if c.verdict == Verdict.FAIL]
        if failures:
            refused = ""
            if not reason:
                pass
            elif not roles.can_supervise(by):
                refused = "Only a supervisor can deploy against a failed check."
            elif len(reason) < OVERRIDE_MIN_CHARS:
                refused = (
                    f"Write at least {OVERRIDE_MIN_CHARS} characters on why the unit goes "
                    "against the failed checks."
                )
            if not reason or refused:
                raise ReadinessError(
                    failures,
                    site=deployment.site.name,
                    start=start,
                    days=deployment.planned_days,
                    override_error=refused,
                )
            deployment.override_reason = reason
            deployment.override_by = by
            deployment.override_at = at
            deployment.override_checks = "\n".join(f"{c.name}: {c.numbers}" for c in failures)
    deployment.save()
    refresh_unit(unit, at=at)
    return deployment


@transaction.atomic
def deployment_recover(
    *,
    deployment: Deployment,
    recovered_at: dt.datetime,
    replies_counted: int | None,
    place: Place | None,
    by: User,
) -> Deployment:
    """Bring a unit back. Its condition follows the records (no longer in the water); a
    recovered unit goes to the bench before anything else: it may hold pressure or water."""
    unit = Transponder.objects.select_for_update().get(pk=deployment.unit_id)
    current = Deployment.objects.select_for_update().get(pk=deployment.pk)
    if current.recovered_at is not None:
        raise ValidationError("This deployment is already recovered.")
    if unit.hold == UnitHold.LOST:
        raise ValidationError(
            "This unit is held as lost. If it has been found, a supervisor clears the hold "
            "first; then record the recovery."
        )
    current.recovered_at = recovered_at
    current.replies_counted = replies_counted
    current.full_clean()
    current.save(update_fields=["recovered_at", "replies_counted"])
    update_fields = ["version", "updated_at"]
    if place is not None:
        unit.place = place
        update_fields.append("place")
    unit.version += 1
    unit.save(update_fields=update_fields)
    refresh_unit(unit, at=timezone.now())
    return current


def _overlap_refusal(deployment: Deployment) -> str:
    """Why a past deployment cannot go in between the unit's other records ("" when it can):
    it overlaps another deployment, or a bench visit opened while it was in the water."""
    over, back = deployment.over_side_at, deployment.recovered_at
    assert back is not None
    other = (
        Deployment.objects.filter(unit_id=deployment.unit_id, over_side_at__lt=back)
        .filter(Q(recovered_at__isnull=True) | Q(recovered_at__gt=over))
        .select_related("site")
        .order_by("over_side_at")
        .first()
    )
    if other is not None:
        until = (
            f"recovered {timezone.localtime(other.recovered_at):%Y-%m-%d %H:%M}"
            if other.recovered_at
            else "still in the water"
        )
        return (
            f"{deployment.unit.serial} was already deployed at {other.site.name} from "
            f"{timezone.localtime(other.over_side_at):%Y-%m-%d %H:%M} ({until}), which "
            "overlaps these dates. A unit is in one place at a time: check both dates."
        )
    visit = (
        ServiceRecord.objects.filter(
            unit_id=deployment.unit_id, opened_at__gt=over, opened_at__lt=back
        )
        .order_by("opened_at")
        .first()
    )
    if visit is not None:
        return (
            f"{deployment.unit.serial} was on the bench "
            f"({timezone.localtime(visit.opened_at):%Y-%m-%d %H:%M}) between these dates, so "
            "it cannot have been in the water then."
        )
    return ""


def backfill_refusal(deployment: Deployment) -> str:
    """Why a past deployment cannot be entered ("" when it can, or when its dates are for the
    model's own validation to refuse): no recovery date, or an overlap (``_overlap_refusal``)."""
    over, back = deployment.over_side_at, deployment.recovered_at
    if back is None:
        return "A past deployment needs its recovery date as well."
    if over and within_date_bounds(over) and within_date_bounds(back) and back > over:
        return _overlap_refusal(deployment)
    return ""


@transaction.atomic
def deployment_backfill(*, deployment: Deployment, by: User) -> Deployment:
    """Enter a past deployment, over the side and recovered, wherever it falls in the unit's
    history: before, between or after the deployments already recorded, as long as it
    overlaps none of them and no bench visit opened while it was out.

    It is history, so neither today's condition (the unit may be deployed or on the bench
    now) nor readiness (judged from today's records) applies; the deployment's own
    validation (dates, power step) does. The unit's derived state is then rebuilt from all of
    its records, so it equals a rebuild whatever order the history arrived in.
    """
    unit = (
        Transponder.objects.select_for_update().select_related("variant").get(pk=deployment.unit_id)
    )
    deployment.unit = unit
    deployment.created_by = by
    # Before full_clean, whose own overlap check only says that there is one.
    refusal = backfill_refusal(deployment)
    if refusal:
        field = "recovered_at" if deployment.recovered_at is None else "over_side_at"
        raise ValidationError({field: refusal})
    deployment.full_clean()
    deployment.save()
    refresh_unit(unit, at=timezone.now())
    return deployment
