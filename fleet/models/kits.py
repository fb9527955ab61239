"""Vessel kits: a copy of part of the fleet that works offline on a vessel and merges back.

The shore issues each kit a code (``K0001``, sequential) and keeps its row; the kit's own
database holds a copy of that row with ``here=True`` (exactly one such row, and only there).
Rows a kit writes carry the kit's code in ``origin`` and a ``uid`` (uuid4) that stays theirs
when the merge brings them ashore (``Stamped``; see docs/kits.md).

Which kit this database is, is read here (``kit_here``) rather than in ``fleet.kits``, so that
the models' ``save()`` can stamp ``origin`` without importing a floor above them.
"""

import threading
import uuid
from collections.abc import Collection
from typing import Any

from django.conf import settings
from django.core.validators import MaxLengthValidator
from django.db import models
from django.db.models import Q

KIT_CODE_MAX = 12
JOB_MAX_CHARS = 200


def uid_field() -> Any:
    """The row's identity across the shore and its kits (rows older than kits keep NULL and are
    identified by primary key, which a kit copy keeps)."""
    return models.UUIDField(unique=True, null=True, default=uuid.uuid4, editable=False)


def origin_field() -> Any:
    """The code of the kit the row was written on ("" = ashore)."""
    return models.CharField(max_length=KIT_CODE_MAX, blank=True, default="", editable=False)


class Kit(models.Model):
    class Status(models.TextChoices):
        EXPORTED = "exported", "At sea"
        RETURNED_PARTLY = "returned_partly", "Partly merged"
        MERGED = "merged", "Merged back"
        WITHDRAWN = "withdrawn", "Withdrawn"

    code = models.CharField(max_length=KIT_CODE_MAX, unique=True)
    job = models.CharField(max_length=JOB_MAX_CHARS, validators=[MaxLengthValidator(JOB_MAX_CHARS)])
    created_at = models.DateTimeField()
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    units = models.ManyToManyField("fleet.Transponder", related_name="+", blank=True)
    sites = models.ManyToManyField("fleet.Site", related_name="+", blank=True)
    users = models.ManyToManyField(settings.AUTH_USER_MODEL, related_name="+", blank=True)
    # True only in the kit's own database, on its one row.
    here = models.BooleanField(default=False)
    status = models.CharField(max_length=16, choices=Status.choices, default=Status.EXPORTED)
    # Certificate numbers reserved for the kit in ``certificate_year``; a kit exported in the
    # last days of a year also holds a range in the next year (docs/kits.md).
    certificate_year = models.PositiveSmallIntegerField()
    certificate_first = models.PositiveIntegerField()
    certificate_last = models.PositiveIntegerField()
    certificate_next_first = models.PositiveIntegerField(null=True, blank=True)
    certificate_next_last = models.PositiveIntegerField(null=True, blank=True)
    exported_sha256 = models.CharField(max_length=64, blank=True)

    class Meta:
        ordering = ["-created_at", "-pk"]
        constraints = [
            models.UniqueConstraint(fields=["here"], condition=Q(here=True), name="one_kit_here"),
            models.CheckConstraint(
                condition=Q(certificate_last__gte=models.F("certificate_first")),
                name="kit_certificate_range_ordered",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.code} {self.job}"

    def certificate_range(self, year: int) -> tuple[int, int] | None:
        """The (first, last) certificate sequence numbers this kit may issue in ``year``."""
        if year == self.certificate_year:
            return self.certificate_first, self.certificate_last
        if (
            year == self.certificate_year + 1
            and self.certificate_next_first is not None
            and self.certificate_next_last is not None
        ):
            return self.certificate_next_first, self.certificate_next_last
        return None


# --- which kit this database is -------------------------------------------------------------

_NOT_READ = object()
_cache: dict[str, Any] = {}
_lock = threading.Lock()


def _cache_key(using: str) -> str:
    # A kit database opened beside the main one has an alias of its own (fleet.kits.db).
    return using


def kit_here(using: str = "default") -> Kit | None:
    """The kit this database is (its one ``here`` row), or None ashore. Read once per process
    and database; ``forget_kit_here()`` (called when a Kit row is saved or deleted) reads again."""
    key = _cache_key(using)
    found = _cache.get(key, _NOT_READ)
    if found is _NOT_READ:
        found = Kit.objects.using(using).filter(here=True).first()
        with _lock:
            _cache[key] = found
    return found  # type: ignore[no-any-return]


def remember_kit_here(kit: Kit | None, using: str = "default") -> None:
    """Take ``kit`` as the answer for ``using`` without reading it (a test database known to
    hold no kit at the start of each test, so query counts do not include the first read)."""
    with _lock:
        _cache[_cache_key(using)] = kit


def forget_kit_here() -> None:
    with _lock:
        _cache.clear()


def origin_here(using: str = "default") -> str:
    kit = kit_here(using)
    return kit.code if kit is not None else ""


class Stamped(models.Model):
    """A row the merge must recognise: stamped with the kit it was written on when first saved.
    Subclasses declare ``uid = uid_field()`` and ``origin = origin_field()``."""

    origin: str  # declared by each subclass (``origin_field()``)

    class Meta:
        abstract = True

    def save(self, *args: Any, **kwargs: Any) -> None:
        if self._state.adding and not self.origin:
            self.origin = origin_here(kwargs.get("using") or "default")
        super().save(*args, **kwargs)

    def validate_unique(self, exclude: Collection[str] | None = None) -> None:
        # A uid is a fresh uuid4, or one the merge copies after looking it up: asking the
        # database whether it is taken would cost a query for every row a service or an
        # import checks. The unique index stays the backstop.
        super().validate_unique(exclude={*(exclude or ()), "uid"})

    def clean_fields(self, exclude: Collection[str] | None = None) -> None:
        # A relation given as a row read from the database (held on this one) is known to
        # exist: Django would ask the database again, a query for every relation of every
        # row a service saves. The foreign key constraint stays the backstop.
        super().clean_fields(exclude={*(exclude or ()), *loaded_relations(self)})


def loaded_relations(row: models.Model) -> set[str]:
    """The names of ``row``'s foreign keys whose target is held on it as a saved row with the
    same key (set by assigning the object, not its id), and with no ``limit_choices_to``
    (whose filter only the database can answer)."""
    names = set()
    for field in row._meta.concrete_fields:
        if not isinstance(field, models.ForeignKey) or field.remote_field.limit_choices_to:
            continue
        if not field.is_cached(row):
            continue
        target = field.get_cached_value(row)
        if (
            target is not None
            and not target._state.adding
            and getattr(target, field.target_field.attname) == getattr(row, field.attname)
        ):
            names.add(field.name)
    return names
