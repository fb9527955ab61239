"""Vessel kits ashore and on board: export a copy of part of the fleet, pack it to come back.

``kit_export`` (ashore; the empty kit database is made first, the rest is one transaction):

1. locks the chosen units, issues the next kit code (``K0001``, ``K0002``…) and reserves the
   kit's certificate numbers in the shore's counter (``reserve_certificates``);
2. builds a new SQLite database (migrated once per process by ``manage.py migrate`` in a child
   process on that file, then copied) and copies into it,
   keeping every primary key and uid: the units, their whole history (records, every entry
   kind, amendments, deployments, certificates, hold changes, photos' rows without their
   files), their stored derived state (UnitState, AnodeState, SealState, DueRow), and every
   row those point at (variants with their positions and reply charge steps, sites, users),
   plus every place (a unit recovered on board goes to one), the chosen sites, the sailing
   users with their password hashes and roles (other users the copied rows name come
   inactive, so they cannot sign in on board), the label settings, and the kit's own row with
   ``here=True``;
3. sets the kit's certificate counters to its reserved ranges and its SQLite AUTOINCREMENT
   counters far above the shore's highest keys (``KEY_HEADROOM``), so a row made on board never
   takes a primary key the shore hands out meanwhile (the merge still matches by uid);
4. checks, in the kit, that the stored derived state equals a rebuild (``manage.py
   rebuild_state --check`` run on the kit file), writes the kit file and keeps its SHA-256 on
   the shore's Kit row.

Rows are copied generically, column by column (``_meta.concrete_fields``), by INSERT
statements rather than ``bulk_create``, which would stamp ``auto_now`` columns with the time
of the copy. A key to a content type (an amendment's target) is matched by app and model name,
since content type ids differ between databases.

``kit_pack`` (on board) writes the returning file: a consistent copy of the kit's database and
a manifest saying when and by whom it was packed.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
import subprocess
import sys
import tempfile
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from django.apps import apps
from django.conf import settings
from django.contrib.auth.models import Group, User
from django.contrib.contenttypes.models import ContentType
from django.core.exceptions import ValidationError
from django.db import connections, models, transaction
from django.db.models import Max
from django.utils import timezone

from fleet.archive import manifest_header, migration_heads, write_archive
from fleet.kits.db import copy_database, kit_database
from fleet.kits.files import DATABASE_MEMBER, KIT_FORMAT, OUT, RETURN, RETURN_FORMAT
from fleet.kits.identity import current_kit
from fleet.models import (
    Amendment,
    AnodePosition,
    AnodeState,
    CertificateCounter,
    Deployment,
    DueRow,
    HoldChange,
    Kit,
    LabelSetting,
    Place,
    ReleaseCertificate,
    ReleaseTest,
    ReplyChargeStep,
    SealPosition,
    SealState,
    ServiceRecord,
    Site,
    Transponder,
    UnitPhoto,
    UnitState,
    Variant,
)
from fleet.models.kits import JOB_MAX_CHARS
from fleet.models.records import Entry, entry_kinds
from fleet.services.backup import dependency_order

# Certificate numbers reserved for one kit in one year.
CERTIFICATE_RESERVE = 200
# A kit exported this many days or fewer before the New Year also holds numbers in the next.
NEW_YEAR_DAYS = 60
# A kit's AUTOINCREMENT counters start this far above the shore's highest key.
KEY_HEADROOM = 10_000_000
_BATCH = 500


@dataclass(frozen=True)
class KitChoice:
    """What goes to sea, checked: the units, sites and sailing users, and the job."""

    units: Sequence[Transponder]
    sites: Sequence[Site]
    users: Sequence[User]
    job: str


def _check_choice(choice: KitChoice) -> None:
    errors: dict[str, str] = {}
    if not choice.units:
        errors["units"] = "Choose at least one unit for the kit."
    if not choice.users:
        errors["users"] = "Choose who sails: at least one user signs in on board."
    elif not any(u.is_active for u in choice.users):
        errors["users"] = "None of the users chosen is active; they could not sign in on board."
    job = choice.job.strip()
    if not job:
        errors["job"] = "Say what the job is (for example the survey block)."
    elif len(job) > JOB_MAX_CHARS:
        errors["job"] = f"Keep the job to {JOB_MAX_CHARS} characters."
    if errors:
        raise ValidationError(errors)


def _next_code() -> str:
    codes = Kit.objects.values_list("code", flat=True)
    numbers = [int(code[1:]) for code in codes if code[:1] == "K" and code[1:].isdigit()]
    return f"K{max(numbers, default=0) + 1:04d}"


def _reserve(year: int) -> tuple[int, int]:
    counter, _ = CertificateCounter.objects.select_for_update().get_or_create(year=year)
    first = counter.last_number + 1
    counter.last_number += CERTIFICATE_RESERVE
    counter.save(update_fields=["last_number"])
    return first, counter.last_number


def reserve_certificates(kit: Kit, *, on: dt.date) -> None:
    """Reserve the kit's certificate numbers in the shore's counter for ``on``'s year, and for
    the next year too when ``on`` is within ``NEW_YEAR_DAYS`` of the New Year (a job at sea
    over the turn of the year): the shore's numbering jumps past each range."""
    kit.certificate_year = on.year
    kit.certificate_first, kit.certificate_last = _reserve(on.year)
    if (dt.date(on.year + 1, 1, 1) - on).days <= NEW_YEAR_DAYS:
        kit.certificate_next_first, kit.certificate_next_last = _reserve(on.year + 1)


# --- which rows go -----------------------------------------------------------------------------


def _ids(queryset: models.QuerySet[Any]) -> set[Any]:
    return set(queryset.values_list("pk", flat=True))


def _by_pk(model: type[models.Model], ids: Iterable[Any]) -> Iterable[models.Model]:
    ordered = sorted(ids)
    for start in range(0, len(ordered), _BATCH):
        yield from model._default_manager.filter(pk__in=ordered[start : start + _BATCH]).order_by(
            "pk"
        )


def _values(model: type[models.Model], ids: set[Any], attname: str) -> set[Any]:
    """The distinct non-null values of column ``attname`` over the rows ``ids``."""
    ordered = sorted(ids)
    found: set[Any] = set()
    for start in range(0, len(ordered), _BATCH):
        found.update(
            model._default_manager.filter(pk__in=ordered[start : start + _BATCH])
            .exclude(**{f"{attname}__isnull": True})
            .values_list(attname, flat=True)
            .distinct()
        )
    return found


def _history(unit_ids: set[int]) -> dict[type[models.Model], set[Any]]:
    """The units' own rows: everything that hangs from them."""
    chosen: dict[type[models.Model], set[Any]] = {Transponder: set(unit_ids)}
    by_unit: tuple[type[models.Model], ...] = (
        HoldChange,
        UnitPhoto,
        ServiceRecord,
        Deployment,
        UnitState,
        AnodeState,
        SealState,
        DueRow,
    )
    for model in by_unit:
        chosen[model] = _ids(model._default_manager.filter(unit__in=unit_ids))
    records = chosen[ServiceRecord]
    kind: type[Entry]
    for kind in entry_kinds():
        chosen[kind] = _ids(kind._default_manager.filter(record__in=records))
    chosen[Amendment] = _ids(Amendment.objects.filter(record__in=records))
    chosen[ReleaseCertificate] = _ids(
        ReleaseCertificate.objects.filter(release_test__in=chosen[ReleaseTest])
    )
    chosen[LabelSetting] = _ids(LabelSetting.objects.all())
    # Every place (a short list): a unit recovered on board goes to one, the vessel say, that
    # its history may not name yet.
    chosen[Place] = _ids(Place.objects.all())
    return chosen


def _keys_between(chosen: dict[type[models.Model], set[Any]]) -> None:
    """Add every row a chosen row points at (keys to users, places, sites, variants…), and each
    chosen variant's positions and reply charge steps, until nothing new turns up."""
    while True:
        added = False
        variants = chosen.get(Variant, set())
        for part in (AnodePosition, SealPosition, ReplyChargeStep):
            found = _ids(part._default_manager.filter(variant__in=variants))
            if not found <= chosen.setdefault(part, set()):
                chosen[part] |= found
                added = True
        for model, ids in list(chosen.items()):
            for field in model._meta.concrete_fields:
                target = field.related_model
                if not field.is_relation or target is None or target is ContentType:
                    continue
                wanted = _values(model, ids, field.attname)
                have = chosen.setdefault(target, set())
                if not wanted <= have:
                    have |= wanted
                    added = True
        if not added:
            return


# --- copying ---------------------------------------------------------------------------------


def _insert(alias: str, model: type[models.Model], rows: list[list[Any]]) -> None:
    if not rows:
        return
    connection = connections[alias]
    quote = connection.ops.quote_name
    fields = model._meta.concrete_fields
    columns = ", ".join(quote(str(f.column)) for f in fields)
    marks = ", ".join(["%s"] * len(fields))
    sql = f"INSERT INTO {quote(model._meta.db_table)} ({columns}) VALUES ({marks})"
    with connection.cursor() as cursor:
        cursor.executemany(sql, rows)


def _content_types(alias: str) -> dict[int, int]:
    """Shore content type id → the kit database's, matched by app and model name."""
    theirs = {(ct.app_label, ct.model): ct.pk for ct in ContentType.objects.using(alias).all()}
    return {
        ct.pk: theirs[(ct.app_label, ct.model)]
        for ct in ContentType.objects.all()
        if (ct.app_label, ct.model) in theirs
    }


def _copy_rows(
    alias: str,
    model: type[models.Model],
    ids: set[Any],
    *,
    types: dict[int, int],
    overrides: dict[str, Any] | None = None,
) -> int:
    """Copy the rows of ``model`` with keys ``ids``, every column as stored."""
    connection = connections[alias]
    fields = model._meta.concrete_fields
    rows: list[list[Any]] = []
    count = 0
    for obj in _by_pk(model, ids):
        row = []
        for field in fields:
            value = getattr(obj, field.attname)
            if field.is_relation and field.related_model is ContentType and value is not None:
                value = types[value]
            if overrides and field.attname in overrides:
                value = overrides[field.attname](obj)
            row.append(field.get_db_prep_save(value, connection))
        rows.append(row)
        count += 1
        if len(rows) >= _BATCH:
            _insert(alias, model, rows)
            rows = []
    _insert(alias, model, rows)
    return count


def _copy_m2m(alias: str, through: type[models.Model], rows: list[dict[str, Any]]) -> None:
    fields = [f for f in through._meta.concrete_fields if not f.primary_key]
    connection = connections[alias]
    quote = connection.ops.quote_name
    columns = ", ".join(quote(str(f.column)) for f in fields)
    marks = ", ".join(["%s"] * len(fields))
    sql = f"INSERT INTO {quote(through._meta.db_table)} ({columns}) VALUES ({marks})"
    with connection.cursor() as cursor:
        cursor.executemany(sql, [[row[f.attname] for f in fields] for row in rows])


def _copy_roles(alias: str, sailing: set[int]) -> None:
    """The sailing users' roles: groups are matched by name (``migrate`` made them in the kit)."""
    kit_groups = dict(Group.objects.using(alias).values_list("name", "pk"))
    through = User.groups.through
    rows = [
        {"user_id": user_id, "group_id": kit_groups[name]}
        for user_id, name in through.objects.filter(user_id__in=sailing).values_list(
            "user_id", "group__name"
        )
        if name in kit_groups
    ]
    _copy_m2m(alias, through, rows)


def _copy_kit_row(alias: str, kit: Kit, types: dict[int, int]) -> None:
    _copy_rows(alias, Kit, {kit.pk}, types=types, overrides={"here": lambda obj: True})
    for name in ("units", "sites", "users"):
        through = getattr(Kit, name).through
        rows = list(through.objects.filter(kit_id=kit.pk).values())
        for row in rows:
            row.pop("id", None)
        _copy_m2m(alias, through, rows)


def _start_counters(alias: str, kit: Kit) -> None:
    counters = CertificateCounter.objects.using(alias)
    counters.create(year=kit.certificate_year, last_number=kit.certificate_first - 1)
    if kit.certificate_next_first is not None:
        counters.create(year=kit.certificate_year + 1, last_number=kit.certificate_next_first - 1)


def _key_headroom(alias: str, copied: Iterable[type[models.Model]]) -> None:
    """Start each table's AUTOINCREMENT counter far above the shore's highest key."""
    with connections[alias].cursor() as cursor:
        for model in copied:
            pk = model._meta.pk
            if not isinstance(pk, models.AutoField):  # BigAutoField is one too
                continue
            table = model._meta.db_table
            top = model._default_manager.aggregate(top=Max("pk"))["top"] or 0
            cursor.execute("DELETE FROM sqlite_sequence WHERE name = %s", [table])
            cursor.execute(
                "INSERT INTO sqlite_sequence (name, seq) VALUES (%s, %s)",
                [table, top + KEY_HEADROOM],
            )


def _manage_on(db_path: Path, *args: str) -> subprocess.CompletedProcess[str]:
    """Run ``manage.py <args>`` in a child process whose database is the SQLite file
    ``db_path`` (its own process, so every migration and check runs on that file alone)."""
    env = {
        **os.environ,
        "DATABASE_URL": f"sqlite:///{Path(db_path).resolve()}",
        "SECRET_KEY": os.environ.get("SECRET_KEY") or "kit-work-only",
    }
    manage = Path(settings.BASE_DIR) / "manage.py"
    return subprocess.run(  # noqa: S603 (our own manage.py, no shell)
        [sys.executable, str(manage), *args],
        env=env,
        capture_output=True,
        text=True,
        check=False,
        timeout=900,
    )


_template: dict[str, Path] = {}


def _empty_kit_database(path: Path) -> None:
    """A migrated, empty database at ``path``: migrated once per process, then copied."""
    heads = repr(sorted(migration_heads().items()))
    template = _template.get(heads)
    if template is None or not template.exists():
        template = Path(tempfile.mkdtemp(prefix="holdfast-kit-")) / "empty.sqlite3"
        done = _manage_on(template, "migrate", "--no-input", "--verbosity", "0")
        if done.returncode != 0:
            raise RuntimeError(f"Migrating a new kit database failed: {done.stderr.strip()}")
        _template[heads] = template
    copy_database(template, path)


def check_derived_state(db_path: Path) -> str:
    """Run ``manage.py rebuild_state --check`` on the SQLite file ``db_path``; "" when its
    stored state and due rows equal a rebuild, else what the check said."""
    done = _manage_on(db_path, "rebuild_state", "--check")
    if done.returncode == 0:
        return ""
    return (done.stderr or done.stdout).strip() or f"exit status {done.returncode}"


def _copy_into(alias: str, kit: Kit, choice: KitChoice) -> dict[str, int]:
    chosen = _history({u.pk for u in choice.units})
    chosen[Site] = {s.pk for s in choice.sites}
    sailing = {u.pk for u in choice.users}
    chosen[User] = set(sailing) | {kit.created_by_id}
    _keys_between(chosen)
    types = _content_types(alias)
    counts: dict[str, int] = {}
    for model in dependency_order(list(chosen)):
        overrides = None
        if model is User:
            overrides = {"is_active": lambda obj: obj.is_active and obj.pk in sailing}
        counts[model._meta.label] = _copy_rows(
            alias, model, chosen[model], types=types, overrides=overrides
        )
    _copy_roles(alias, sailing)
    _copy_kit_row(alias, kit, types)
    _start_counters(alias, kit)
    _key_headroom(alias, [*apps.get_app_config("fleet").get_models(), User])
    return counts


def _manifest(kit: Kit, choice: KitChoice, counts: dict[str, int]) -> dict[str, Any]:
    return {
        "code": kit.code,
        "job": kit.job,
        "direction": OUT,
        "made_at": kit.created_at.isoformat(),
        "made_by": kit.created_by.get_username(),
        "units": sorted(u.serial for u in choice.units),
        "sites": sorted(s.name for s in choice.sites),
        "users": sorted(u.get_username() for u in choice.users),
        "certificates": {
            "year": kit.certificate_year,
            "first": kit.certificate_first,
            "last": kit.certificate_last,
            "next_year_first": kit.certificate_next_first,
            "next_year_last": kit.certificate_next_last,
        },
        "rows": counts,
    }


def _write_kit_file(
    out: Path, db_path: Path, *, kind: str, command: str, at: dt.datetime, kit: dict[str, Any]
) -> dict[str, Any]:
    with write_archive(out, at=at) as writer:
        writer.copy_file(DATABASE_MEMBER, db_path)
        return writer.finish(
            {**manifest_header(kind=kind, command=command, at=at, using="default"), "kit": kit}
        )


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as f:
        while chunk := f.read(1024 * 1024):
            digest.update(chunk)
    return digest.hexdigest()


def refuse_on_a_kit(action: str) -> None:
    """Refuse ``action`` when this database is a vessel kit (it is done ashore)."""
    kit = current_kit()
    if kit is not None:
        raise ValidationError(
            f"This is a vessel copy ({kit.code}): {action} is done ashore, not on board."
        )


def kit_export(
    *,
    units: Sequence[Transponder],
    sites: Sequence[Site],
    users: Sequence[User],
    job: str,
    by: User,
    out: Path,
) -> Kit:
    """Make a vessel kit of ``units`` (with ``sites`` and the sailing ``users``) for ``job`` and
    write its file to ``out`` (see the module docstring). Nothing is kept if any step fails.

    The empty kit database is made before the shore's transaction starts (the first time in a
    process it is migrated, which takes a while), so the shore's write lock is held only for
    the copy and the check."""
    refuse_on_a_kit("making a kit")
    choice = KitChoice(units=units, sites=sites, users=users, job=job.strip())
    _check_choice(choice)
    with tempfile.TemporaryDirectory(prefix="holdfast-kit-") as work:
        db_path = Path(work) / DATABASE_MEMBER
        _empty_kit_database(db_path)
        return _export_into(choice, by=by, db_path=db_path, out=Path(out))


@transaction.atomic
def _export_into(choice: KitChoice, *, by: User, db_path: Path, out: Path) -> Kit:
    unit_ids = sorted({u.pk for u in choice.units})
    locked = list(Transponder.objects.select_for_update().filter(pk__in=unit_ids).order_by("pk"))
    if len(locked) != len(unit_ids):
        raise ValidationError({"units": "A unit chosen no longer exists; choose again."})
    at = timezone.now()
    kit = Kit(code=_next_code(), job=choice.job, created_at=at, created_by=by)
    reserve_certificates(kit, on=timezone.localdate(at))
    kit.full_clean()
    kit.save()
    kit.units.set(locked)
    kit.sites.set(choice.sites)
    kit.users.set(choice.users)
    choice = KitChoice(units=locked, sites=choice.sites, users=choice.users, job=choice.job)
    with kit_database(db_path) as alias, transaction.atomic(using=alias):
        counts = _copy_into(alias, kit, choice)
    problem = check_derived_state(db_path)
    if problem:
        raise ValidationError(
            f"The kit's derived state does not match a rebuild; no kit was made. {problem}"
        )
    final = db_path.with_name("final.sqlite3")
    copy_database(db_path, final)
    _write_kit_file(
        out,
        final,
        kind=KIT_FORMAT,
        command="kit_export",
        at=at,
        kit=_manifest(kit, choice, counts),
    )
    kit.exported_sha256 = _sha256(out)
    kit.save(update_fields=["exported_sha256"])
    return kit


def kit_pack(*, by: User, out: Path) -> Path:
    """On board: write the returning file of this kit to ``out``."""
    kit = current_kit()
    if kit is None:
        raise ValidationError("This is not a vessel copy: there is no kit to pack.")
    at = timezone.now()
    source = Path(str(connections["default"].settings_dict["NAME"]))
    stamped: list[type[models.Model]] = [
        ServiceRecord,
        *entry_kinds(),
        Amendment,
        Deployment,
        ReleaseCertificate,
        HoldChange,
    ]
    made = {
        model._meta.label: model._default_manager.filter(origin=kit.code).count()
        for model in stamped
    }
    header = {
        "code": kit.code,
        "job": kit.job,
        "direction": RETURN,
        "made_at": kit.created_at.isoformat(),
        "made_by": kit.created_by.get_username(),
        "packed_at": at.isoformat(),
        "packed_by": by.get_username(),
        "units": sorted(kit.units.values_list("serial", flat=True)),
        "sites": sorted(kit.sites.values_list("name", flat=True)),
        "users": sorted(kit.users.values_list("username", flat=True)),
        "made_on_board": made,
    }
    with tempfile.TemporaryDirectory(prefix="holdfast-pack-") as work:
        db_path = Path(work) / DATABASE_MEMBER
        copy_database(source, db_path)
        _write_kit_file(
            Path(out), db_path, kind=RETURN_FORMAT, command="kit_pack", at=at, kit=header
        )
    return Path(out)
