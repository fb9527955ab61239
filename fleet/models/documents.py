"""Release-test certificates: numbered, verifiable, and frozen at issue.

A certificate copies the test's values and the acceptance values it was judged against when
it is issued, so the paper and the public verification page keep saying what was certified
even if the test is amended later (the record page then offers a new certificate, which
supersedes this one). Numbers run per calendar year, ``RC-2026-0001``, from a counter row
that the issuing transaction locks.
"""

import secrets

from django.conf import settings
from django.core.validators import MaxLengthValidator
from django.db import models
from django.db.models import Q

from .audit import Amendment
from .kits import Stamped, origin_field, uid_field
from .records import ReleaseTest
from .validators import REASON_MAX_CHARS


def new_verification_code() -> str:
    """24 URL-safe characters, 144 random bits: not guessable, short enough to type."""
    return secrets.token_urlsafe(18)


class CertificateCounter(models.Model):
    """The last number issued in one year. Locked with ``select_for_update`` while issuing."""

    year = models.PositiveSmallIntegerField(primary_key=True)
    last_number = models.PositiveIntegerField(default=0)

    def __str__(self) -> str:
        return f"{self.year}: {self.last_number}"


class ReleaseCertificate(Stamped):
    class Status(models.TextChoices):
        ISSUED = "issued", "Issued"
        SUPERSEDED = "superseded", "Superseded"
        WITHDRAWN = "withdrawn", "Withdrawn"
        # The release test (or its record) was amended after issue: the paper no longer
        # certifies what the record says, until a new certificate supersedes it or it is
        # withdrawn.
        NOT_VALID = "not_valid", "Not valid: test amended"

    number = models.CharField(max_length=16, unique=True, editable=False)
    year = models.PositiveSmallIntegerField(editable=False)
    sequence = models.PositiveIntegerField(editable=False)
    verification_code = models.CharField(
        max_length=32, unique=True, default=new_verification_code, editable=False
    )
    release_test = models.ForeignKey(
        ReleaseTest, on_delete=models.PROTECT, related_name="certificates"
    )
    issued_at = models.DateTimeField()
    issued_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )

    # What was certified, copied from the test at issue.
    tested_on = models.DateField()
    kind = models.CharField(max_length=8, choices=ReleaseTest.Kind.choices)
    load_kg = models.FloatField("load (kg)", null=True, blank=True)
    seconds_to_release = models.FloatField("time to release (s)")
    motor_current_a = models.FloatField("peak motor current (A)")
    limit_switch_ok = models.BooleanField("limit switch ok")
    acoustic_command_ok = models.BooleanField("acoustic command ok")
    # The acceptance values it was judged against (fleet.due.rules at issue).
    max_seconds = models.FloatField("acceptance: time to release at most (s)")
    max_motor_current_a = models.FloatField("acceptance: motor current at most (A)")
    passed = models.BooleanField()
    valid_until = models.DateField()

    status = models.CharField(max_length=12, choices=Status.choices, default=Status.ISSUED)
    superseded_by = models.ForeignKey(
        "self", on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    status_reason = models.TextField(
        blank=True,
        max_length=REASON_MAX_CHARS,
        validators=[MaxLengthValidator(REASON_MAX_CHARS)],
    )
    status_changed_at = models.DateTimeField(null=True, blank=True)
    status_changed_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, null=True, blank=True, related_name="+"
    )
    invalidated_by = models.ForeignKey(
        Amendment,
        on_delete=models.PROTECT,
        null=True,
        blank=True,
        related_name="invalidated_certificates",
        help_text="The amendment that made this certificate not valid.",
    )
    uid = uid_field()
    origin = origin_field()

    class Meta:
        ordering = ["-year", "-sequence"]
        constraints = [
            models.UniqueConstraint(fields=["year", "sequence"], name="uniq_certificate_sequence"),
            models.UniqueConstraint(
                fields=["release_test"],
                condition=Q(status="issued"),
                name="one_current_certificate_per_release_test",
            ),
        ]

    def __str__(self) -> str:
        return self.number

    @property
    def is_current(self) -> bool:
        return self.status == self.Status.ISSUED

    @property
    def is_replaceable(self) -> bool:
        """Issued, or made not valid by an amendment: a new certificate supersedes it and a
        supervisor may withdraw it."""
        return self.status in (self.Status.ISSUED, self.Status.NOT_VALID)

    @property
    def test_amended_since_issue(self) -> bool:
        return self.differs_from_test(self.release_test)

    def differs_from_test(self, test: ReleaseTest) -> bool:
        """True when the test was amended after this certificate copied it."""
        return (
            self.tested_on,
            self.kind,
            self.load_kg,
            self.seconds_to_release,
            self.motor_current_a,
            self.limit_switch_ok,
            self.acoustic_command_ok,
        ) != (
            test.tested_on,
            test.kind,
            test.load_kg,
            test.seconds_to_release,
            test.motor_current_a,
            test.limit_switch_ok,
            test.acoustic_command_ok,
        )
