"""Writes for release-test certificates. Each is one transaction, called by views and tests.

Locking: like every write service, each locks the unit row first; issuing then locks the
release test's row, so two supervisors issuing for the same
test run one after the other (the second supersedes the first, never two current
certificates); withdrawing locks the certificate's row.

Numbering: the year's counter row is locked with ``select_for_update`` (a row lock on
PostgreSQL; on SQLite the IMMEDIATE transaction already holds the database write lock), so
two supervisors issuing at once get consecutive numbers, never the same one. The unique
constraints on (year, sequence) and on the number are the backstop.

On a vessel kit, numbers come from the range the shore reserved for the kit when it exported
it (``Kit.certificate_range``; docs/kits.md): issuing past its end, or in a year the kit holds
no range for, is refused with the reason, and the certificate is issued ashore after the
merge. So a number issued at sea is never issued ashore too.
"""

import datetime as dt
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import QuerySet
from django.utils import timezone

from fleet.due.acceptance import release_test_failures, release_valid_to
from fleet.due.rules import rules_for
from fleet.kits.identity import current_kit
from fleet.models import CertificateCounter, ReleaseCertificate, ReleaseTest, Transponder


def _lock_unit_of(rows: QuerySet[Any], unit_path: str) -> None:
    """Lock the unit row the certificate work is about, before anything else."""
    unit_id = rows.values_list(unit_path, flat=True).get()
    list(Transponder.objects.select_for_update().filter(pk=unit_id).values_list("pk"))


def _kit_refusal(year: int, last_number: int) -> tuple[str, int]:
    """On a vessel kit: why the next number of ``year`` cannot be issued here ("" when it can),
    and the last number before the kit's range (the counter starts there)."""
    kit = current_kit()
    if kit is None:
        return "", last_number
    span = kit.certificate_range(year)
    if span is None:
        return (
            f"This vessel copy ({kit.code}) holds no certificate numbers for {year}: issue the "
            "certificate ashore after the merge.",
            last_number,
        )
    first, last = span
    if max(last_number, first - 1) >= last:
        return (
            f"This vessel copy ({kit.code}) has issued all {last - first + 1} certificate "
            f"numbers reserved for it in {year} ({first} to {last}): issue this certificate "
            "ashore after the merge.",
            last_number,
        )
    return "", max(last_number, first - 1)


def _next_number(year: int) -> tuple[int, str]:
    counter, _ = CertificateCounter.objects.select_for_update().get_or_create(year=year)
    refusal, counter.last_number = _kit_refusal(year, counter.last_number)
    if refusal:
        raise ValidationError(refusal, code="kit_range_used")
    counter.last_number += 1
    counter.save(update_fields=["last_number"])
    return counter.last_number, f"RC-{year}-{counter.last_number:04d}"


@transaction.atomic
def certificate_issue(
    *, release_test: ReleaseTest, by: User, at: dt.datetime
) -> ReleaseCertificate:
    """Issue a certificate for a passing release test on a closed record.

    A failing test gets no certificate: the refusal names the failures. A new certificate for
    a test that already has one (current, or made not valid by an amendment) supersedes it.
    """
    _lock_unit_of(ReleaseTest.objects.filter(pk=release_test.pk), "record__unit_id")
    # Lock only the test's own row (``of``): the joined record, unit and variant are read, not
    # changed.
    test = (
        ReleaseTest.objects.select_for_update(of=("self",))
        .select_related("record__unit__variant")
        .get(pk=release_test.pk)
    )
    record = test.record
    if not record.is_closed:
        raise ValidationError(
            "Close the bench visit first: a certificate certifies a closed record.",
            code="record_open",
        )
    rules = rules_for(record.unit.variant)
    failures = release_test_failures(test, rules)
    if failures:
        raise ValidationError(
            "This release test failed (%(failures)s); no certificate is issued for a failed "
            "test. Repair, retest and record a passing test first.",
            params={"failures": "; ".join(failures)},
            code="test_failed",
        )
    previous = list(
        ReleaseCertificate.objects.select_for_update().filter(
            release_test=test,
            status__in=(ReleaseCertificate.Status.ISSUED, ReleaseCertificate.Status.NOT_VALID),
        )
    )
    for old in previous:
        old.status = ReleaseCertificate.Status.SUPERSEDED
        old.status_changed_at = at
        old.status_changed_by = by
        old.save(update_fields=["status", "status_changed_at", "status_changed_by"])

    year = timezone.localdate(at).year
    sequence, number = _next_number(year)
    certificate = ReleaseCertificate(
        number=number,
        year=year,
        sequence=sequence,
        release_test=test,
        issued_at=at,
        issued_by=by,
        tested_on=test.tested_on,
        kind=test.kind,
        load_kg=test.load_kg,
        seconds_to_release=test.seconds_to_release,
        motor_current_a=test.motor_current_a,
        limit_switch_ok=test.limit_switch_ok,
        acoustic_command_ok=test.acoustic_command_ok,
        max_seconds=rules.release_max_seconds,
        max_motor_current_a=rules.release_max_motor_current_a,
        passed=True,
        valid_until=release_valid_to(test.tested_on, rules),
    )
    certificate.full_clean()
    certificate.save()
    for old in previous:
        old.superseded_by = certificate
        old.status_reason = f"Superseded by {certificate.number}."
        old.save(update_fields=["superseded_by", "status_reason"])
    return certificate


@transaction.atomic
def certificate_withdraw(
    *, certificate: ReleaseCertificate, reason: str, by: User, at: dt.datetime
) -> ReleaseCertificate:
    _lock_unit_of(
        ReleaseCertificate.objects.filter(pk=certificate.pk), "release_test__record__unit_id"
    )
    current = ReleaseCertificate.objects.select_for_update().get(pk=certificate.pk)
    if not current.is_replaceable:
        raise ValidationError(
            "Only a current certificate, or one an amendment made not valid, can be withdrawn; "
            "this one is %(status)s.",
            params={"status": current.get_status_display().lower()},
            code="not_current",
        )
    if not reason.strip():
        raise ValidationError(
            {"reason": ValidationError("Say why the certificate is withdrawn.", code="no_reason")}
        )
    current.status = ReleaseCertificate.Status.WITHDRAWN
    current.status_reason = reason.strip()
    current.status_changed_at = at
    current.status_changed_by = by
    current.full_clean()
    current.save(
        update_fields=["status", "status_reason", "status_changed_at", "status_changed_by"]
    )
    return current
