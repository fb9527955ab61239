"""Merging a vessel kit's return file into the shore database, and resolving its conflicts.

``merge_apply`` is one transaction. It locks every unit of the kit first (``select_for_update``,
in primary-key order, as every write service does), plans the merge again inside the lock
(``fleet.kits.merge.plan_merge``, the same plan the preview showed unless the shore moved in
between), then, unit by unit, each in a savepoint:

1. carries out the board's changes to rows that existed at export through the services: an
   open visit's new, corrected or removed entries and fields (``service_record_save``), its
   close (``service_record_close``), a recovery (``deployment_recover``), a hold
   (``unit_hold_set``), a move (``unit_move``); the rows these services create take the
   vessel's uid and origin;
2. inserts the rows made on board, with new shore primary keys, their keys resolved to shore
   rows (``Ref``), each checked (``full_clean``) and written as the vessel wrote it (its own
   times kept); an amendment to a shore row goes through ``amendment_create`` unless the row
   already holds the corrected value;
3. a service or check that refuses a unit's rows turns the unit's whole vessel side into a
   conflict (rolled back to the savepoint, kept whole in the conflict), so one refusal never
   leaves a half-merged unit nor loses the vessel's rows.

Conflicts are recorded (``KitConflict``, both versions kept) and nothing of them is written
until a supervisor resolves them (``conflict_resolve``). Every touched unit's derived state and
due rows are refreshed once at the end (``refreshing_once``), so they equal a rebuild.

A file already merged (same SHA-256) changes nothing: its earlier merge is returned.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any, cast

from django.apps import apps
from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied, ValidationError
from django.db import DatabaseError, IntegrityError, models, transaction
from django.utils import timezone

from fleet import roles
from fleet.due.store import refresh_unit, refreshing_once
from fleet.kits.db import kit_database
from fleet.kits.files import DATABASE_MEMBER, KitFile
from fleet.kits.merge import (
    Change,
    Conflict,
    MergePlan,
    MergeRefusedError,
    Ref,
    VesselRow,
    identified_models,
    kind_label,
    plan_merge,
)
from fleet.models import (
    Amendment,
    Deployment,
    HoldChange,
    Kit,
    KitConflict,
    KitMerge,
    Place,
    ReleaseCertificate,
    ServiceRecord,
    Transponder,
    UnitHold,
)
from fleet.models.records import Entry, entry_kinds
from fleet.services.deployments import deployment_recover
from fleet.services.fleet import unit_hold_set, unit_move
from fleet.services.records import amendment_create, service_record_close, service_record_save

Choice = KitConflict.Choice


_REFUSALS = (ValidationError, PermissionDenied, IntegrityError, DatabaseError, MergeRefusedError)


class CertificateClashError(MergeRefusedError):
    """A certificate number issued on board is taken ashore: the kit's range was not its own.
    It refuses the whole merge."""


def file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with Path(path).open("rb") as source:
        while chunk := source.read(1024 * 1024):
            digest.update(chunk)
    return digest.hexdigest()


def _sha_of(kit_file: KitFile) -> str:
    """The return file's identity: the SHA-256 of its database as its manifest records it
    (``read_kit_file`` checked the two agree). Opening the database changes its bytes, so it
    is never hashed again here."""
    files = kit_file.manifest.get("files") if isinstance(kit_file.manifest, dict) else None
    entry = files.get(DATABASE_MEMBER) if isinstance(files, dict) else None
    if isinstance(entry, dict) and entry.get("sha256"):
        return str(entry["sha256"])
    return file_sha256(Path(kit_file.db_path))


def _check_direction(kit_file: KitFile) -> None:
    if kit_file.direction != "return":
        raise MergeRefusedError(
            f"This is kit {kit_file.kit_code} as it was exported, not a return file: on the "
            "vessel, write the return file with manage.py kit_pack and merge that."
        )


def merge_preview(kit_file: KitFile) -> MergePlan:
    """What merging ``kit_file`` would add, change and find in conflict; writes nothing."""
    _check_direction(kit_file)
    with _opened(kit_file) as alias:
        return plan_merge(alias, code=kit_file.kit_code, file_sha256=_sha_of(kit_file))


# --- writing one vessel row ----------------------------------------------------------------


def resolve(ref: Ref) -> int:
    """The shore primary key a ``Ref`` points to (a vessel row must be ashore by now)."""
    if ref.pk is not None:
        return int(ref.pk)
    model = apps.get_model(ref.label)
    pk = model._base_manager.filter(uid=ref.uid).values_list("pk", flat=True).first()
    if pk is None:
        raise MergeRefusedError(
            f"A vessel row refers to a {model._meta.verbose_name} ({ref.uid}) that is not "
            "ashore (it waits in a conflict)."
        )
    return int(pk)


def build(row: VesselRow, *, defer: tuple[str, ...] = ()) -> models.Model:
    """The vessel row as an unsaved shore instance (no primary key: the shore gives one)."""
    model = row.model
    instance = model()
    for f in model._meta.concrete_fields:
        if f.primary_key:
            continue
        if f.attname in row.refs:
            value: Any = None if f.attname in defer else resolve(row.refs[f.attname])
        else:
            raw = row.fields.get(f.attname)
            value = None if raw is None else f.to_python(raw)
        setattr(instance, f.attname, value)
    return instance


def _insert(instance: models.Model) -> None:
    """Check and insert a vessel row as written on board: ``raw`` keeps its own creation and
    change times (``auto_now`` would stamp the merge's)."""
    instance.full_clean()
    instance.save_base(raw=True, force_insert=True)


def _user(pk: int | None, fallback: User) -> User:
    if pk is None:
        return fallback
    return User.objects.get(pk=pk)


def _stamp_identity(model: type[models.Model], pk: int, row: VesselRow) -> None:
    """A row a service just created for a vessel row takes the vessel row's identity."""
    model._base_manager.filter(pk=pk).update(
        uid=row.fields["uid"], origin=row.fields.get("origin") or ""
    )


class _Applier:
    def __init__(self, merge: KitMerge, by: User, plan: MergePlan) -> None:
        self.merge = merge
        self.by = by
        self.plan = plan
        self.counts: dict[str, int] = {}
        self.changed = 0
        self.touched: set[int] = set()

    def count(self, label: str, n: int = 1) -> None:
        self.counts[label] = self.counts.get(label, 0) + n

    # --- one unit --------------------------------------------------------------------------

    def unit(self, unit: Transponder, changes: list[Change], rows: list[VesselRow]) -> None:
        self.touched.add(unit.pk)
        counts, changed = dict(self.counts), self.changed
        try:
            with transaction.atomic():
                self._changes(unit, changes)
                self._rows(unit, rows)
        except CertificateClashError:
            raise
        except _REFUSALS as exc:
            self.counts, self.changed = counts, changed
            self._refused(unit, changes, rows, exc)

    def _refused(
        self, unit: Transponder, changes: list[Change], rows: list[VesselRow], exc: Exception
    ) -> None:
        message = "; ".join(getattr(exc, "messages", None) or [str(exc)])
        record_conflict(
            self.merge,
            Conflict(
                kind=KitConflict.Kind.INTERLEAVED,
                unit_serial=unit.serial,
                key="unit:" + ",".join(sorted(r.uid for r in rows)) + f":{unit.pk}",
                explanation=(
                    f"{unit.serial}: the vessel's work could not be added to the shore's "
                    f"history as it stands: {message} Nothing of the vessel's side of this "
                    "unit was written; it is kept here. Keep the shore's history, or correct "
                    "it and add the vessel's work."
                ),
                shore=[],
                vessel=rows,
                choices=[Choice.KEEP_SHORE, Choice.ADD_VESSEL],
            ),
            changes=changes,
        )

    def _changes(self, unit: Transponder, changes: list[Change]) -> None:
        for change in changes:
            if change.what == "certificate changes":
                continue  # after the rows: a certificate may point at one of them
            getattr(self, "_" + change.what.replace(" ", "_"))(unit, change)
            self.changed += 1

    def _rows(self, unit: Transponder, rows: list[VesselRow]) -> None:
        later = ("fleet.releasecertificate",)
        for row in rows:
            if row.label not in later:
                self.add(row)
        for change in [c for c in self.plan.changes if c.unit_serial == unit.serial]:
            if change.what == "certificate changes":
                self._certificate_changes(unit, change)
                self.changed += 1
        certificates = [r for r in rows if r.label in later]
        for row in certificates:
            self.add(row)
        for row in certificates:
            if "superseded_by_id" in row.refs:
                ReleaseCertificate.objects.filter(uid=row.fields["uid"]).update(
                    superseded_by_id=resolve(row.refs["superseded_by_id"])
                )

    # --- changes to rows that existed at export --------------------------------------------

    def _bench_visits_worked_on_board(self, unit: Transponder, change: Change) -> None:
        data = change.payload
        record = ServiceRecord.objects.get(pk=data["record"])
        by = _user(data.get("by"), self.by)
        for name, value in data["fields"].items():
            f = cast(
                "models.Field[Any, Any]", ServiceRecord._meta.get_field(name.removesuffix("_id"))
            )
            setattr(record, f.attname, value if f.is_relation else f.to_python(value))
        entries: list[Entry] = []
        for item in data["new"]:
            entries.append(cast("Entry", build(VesselRow.from_json(item))))
        for item in data["edited"]:
            row = VesselRow.from_json(item)
            entry = cast("Entry", build(row))
            entry.pk = row.kit_pk if row.uid.startswith("pk") else _pk_by_uid(row)
            entries.append(entry)
        delete = [
            cast("Entry", apps.get_model(label)._base_manager.get(pk=pk))
            for label, pk in data["deleted"]
        ]
        service_record_save(record=record, entries=entries, delete=delete, by=by)
        for item in data["new"]:
            row = VesselRow.from_json(item)
            self.count(kind_label(row.model))
        if data.get("closed_at"):
            service_record_close(
                record=record,
                by=_user(data.get("closed_by"), self.by),
                at=dt.datetime.fromisoformat(data["closed_at"]),
            )

    def _recoveries(self, unit: Transponder, change: Change) -> None:
        data = change.payload
        place = Place.objects.get(pk=data["place"]) if data.get("place") else None
        deployment_recover(
            deployment=Deployment.objects.get(pk=data["deployment"]),
            recovered_at=dt.datetime.fromisoformat(data["recovered_at"]),
            replies_counted=data.get("replies_counted"),
            place=place if place is not None and place.pk != unit.place_id else None,
            by=self.by,
        )

    def _hold_changes(self, unit: Transponder, change: Change) -> None:
        for item in change.payload["rows"]:
            row = VesselRow.from_json(item)
            current = Transponder.objects.get(pk=unit.pk)
            made = unit_hold_set(
                unit=current,
                hold=UnitHold(row.value("to_hold")),
                reason=row.value("reason"),
                by=_user(resolve(row.refs["set_by_id"]), self.by),
                at=row.value("set_at"),
            )
            _stamp_identity(HoldChange, made.pk, row)
            self.count("hold changes")

    def _moves(self, unit: Transponder, change: Change) -> None:
        place = Place.objects.get(pk=change.payload["place"])
        try:
            with transaction.atomic():
                unit_move(unit=Transponder.objects.get(pk=unit.pk), place=place)
        except ValidationError as exc:
            # Where a unit stands is not history: the shore's place stands, and the merge says so.
            line = f"{unit.serial} was moved on board to {place}; not moved ashore: " + " ".join(
                exc.messages
            )
            self.merge.notes = "\n".join(filter(None, [self.merge.notes, line]))

    def _certificate_changes(self, unit: Transponder, change: Change) -> None:
        row = VesselRow.from_json(change.payload["row"])
        certificate = ReleaseCertificate.objects.select_for_update().get(
            pk=change.payload["certificate"]
        )
        if certificate.status == row.value("status"):
            return  # the merge's own amendment made it so already
        certificate.status = row.value("status")
        certificate.status_reason = row.value("status_reason") or ""
        certificate.status_changed_at = row.value("status_changed_at")
        by_ref = row.refs.get("status_changed_by_id")
        certificate.status_changed_by_id = resolve(by_ref) if by_ref else None
        fields = ["status", "status_reason", "status_changed_at", "status_changed_by"]
        for name in ("invalidated_by_id", "superseded_by_id"):
            if name in row.refs:
                setattr(certificate, name, resolve(row.refs[name]))
                fields.append(name.removesuffix("_id"))
        certificate.save(update_fields=fields)

    # --- rows made on board ----------------------------------------------------------------

    def add(self, row: VesselRow) -> None:
        model = row.model
        if model is Amendment:
            self._amendment(row)
        elif model is ReleaseCertificate:
            number = row.value("number")
            if ReleaseCertificate.objects.filter(number=number).exists():
                # Numbers issued on board come from the kit's own range: a clash is a bug.
                raise CertificateClashError(
                    f"Certificate number {number} issued on board is already used ashore; "
                    "the kit's number range overlaps the shore's. Nothing was merged."
                )
            _insert(build(row, defer=("superseded_by_id",)))
        else:
            instance = build(row)
            refusal = history_refusal(instance)
            if refusal:
                raise ValidationError(refusal)
            _insert(instance)
        self.count(kind_label(model))

    def _amendment(self, row: VesselRow) -> None:
        target_ref = row.refs["target_id"]
        amendment = cast("Amendment", build(row))
        target_model = amendment.target_type.model_class()
        assert target_model is not None
        target = target_model._base_manager.get(pk=amendment.target_id)
        f = target._meta.get_field(amendment.field_name)
        already = cast("models.Field[Any, Any]", f).value_to_string(target)
        if target_ref.pk is None or already == amendment.corrected_value:
            _insert(amendment)
            return
        made = amendment_create(
            record=ServiceRecord.objects.get(pk=amendment.record_id),
            target=target,
            field_name=amendment.field_name,
            corrected_value=amendment.corrected_value,
            reason=amendment.reason,
            by=amendment.created_by,
        )
        Amendment.objects.filter(pk=made.pk).update(
            uid=row.fields["uid"],
            origin=row.fields.get("origin") or "",
            created_at=amendment.created_at,
        )


def history_refusal(instance: models.Model) -> str:
    """Why a vessel deployment or bench visit cannot go into the unit's shore history ("" when
    it can): a unit is in the water or on the bench, not both."""
    local = timezone.localtime
    if isinstance(instance, Deployment):
        visits = ServiceRecord.objects.filter(
            unit_id=instance.unit_id, opened_at__gt=instance.over_side_at
        )
        if instance.recovered_at is not None:
            visits = visits.filter(opened_at__lt=instance.recovered_at)
        visit = visits.order_by("opened_at").first()
        if visit is not None:
            return (
                f"the unit was on the bench ashore ({local(visit.opened_at):%Y-%m-%d %H:%M}) "
                "while this deployment had it in the water."
            )
    if isinstance(instance, ServiceRecord):
        wet = (
            Deployment.objects.filter(unit_id=instance.unit_id, over_side_at__lt=instance.opened_at)
            .filter(
                models.Q(recovered_at__isnull=True) | models.Q(recovered_at__gt=instance.opened_at)
            )
            .order_by("over_side_at")
            .first()
        )
        if wet is not None:
            return (
                f"the unit was in the water (over the side {local(wet.over_side_at):%Y-%m-%d %H:%M}"
                ") when this bench visit opened."
            )
    return ""


def _pk_by_uid(row: VesselRow) -> int:
    return resolve(Ref(row.label, uid=row.uid))


def record_conflict(
    merge: KitMerge, conflict: Conflict, *, changes: Sequence[Change] = ()
) -> KitConflict | None:
    """Keep a conflict, both sides whole; a conflict this kit already recorded (the same rows
    of the vessel) is not kept twice."""
    fresh = sorted(row.uid for row in conflict.vessel if not row.copy)
    key = f"{conflict.key}:{hashlib.sha256(','.join(fresh).encode()).hexdigest()[:16]}"
    if KitConflict.objects.filter(merge__kit=merge.kit, key=key).exists():
        return None
    vessel = [row.as_json() for row in conflict.vessel]
    vessel += [
        {
            "change": c.what,
            "unit": c.unit_serial,
            "text": c.text,
            "payload": c.payload,
            "uid": f"change:{c.what}:{c.unit_serial}:{n}",
        }
        for n, c in enumerate(changes)
    ]
    return KitConflict.objects.create(
        merge=merge,
        kind=conflict.kind,
        unit=Transponder.objects.get(serial=conflict.unit_serial),
        key=key[:200],
        explanation=conflict.explanation,
        shore_version=conflict.shore,
        vessel_version=vessel,
        choices=list(conflict.choices),
    )


def _keep_orphan(merge: KitMerge, row: VesselRow) -> None:
    """A new vessel row whose parent an earlier merge kept in a conflict joins that conflict
    while it waits; once it was resolved, the row is a conflict of its own."""
    parents = {ref.uid for ref in row.refs.values() if ref.uid is not None}
    for earlier in KitConflict.objects.select_for_update().filter(merge__kit=merge.kit):
        uids = {item.get("uid") for item in earlier.vessel_version}
        if not parents & uids or row.uid in uids:
            continue
        if not earlier.resolution:
            earlier.vessel_version = [*earlier.vessel_version, row.as_json()]
            earlier.save(update_fields=["vessel_version"])
            return
        break
    record_conflict(
        merge,
        Conflict(
            kind=KitConflict.Kind.INTERLEAVED,
            unit_serial=row.unit_serial,
            key=f"vessel:{row.uid}",
            explanation=(
                f"{row.unit_serial}: the vessel's {row.text} belongs to vessel rows an earlier "
                "merge kept out of the shore's records (a conflict already resolved). Keep it "
                "out, or add it once what it belongs to is ashore."
            ),
            shore=[],
            vessel=[row],
            choices=[Choice.KEEP_SHORE, Choice.ADD_VESSEL],
        ),
    )


def _lock_units(serials: list[str]) -> list[Transponder]:
    return list(Transponder.objects.select_for_update().filter(serial__in=serials).order_by("pk"))


@contextmanager
def _opened(kit_file: KitFile) -> Iterator[str]:
    with kit_database(kit_file.db_path) as alias:
        yield alias


def merge_apply(
    kit_file: KitFile, *, by: User, resolutions: Mapping[str, str] | None = None
) -> KitMerge:
    """Merge ``kit_file`` into the shore, all of it in one transaction (see the module's
    docstring). ``resolutions`` (conflict key -> choice) resolves conflicts found at once."""
    _check_direction(kit_file)
    if not roles.can_supervise(by):
        raise PermissionDenied("Only a supervisor merges a kit.")
    with _opened(kit_file) as alias:
        return merge_apply_from(
            alias,
            code=kit_file.kit_code,
            file_sha256=_sha_of(kit_file),
            by=by,
            resolutions=resolutions,
        )


@transaction.atomic
def merge_apply_from(
    alias: str,
    *,
    code: str,
    file_sha256: str,
    by: User,
    resolutions: Mapping[str, str] | None = None,
) -> KitMerge:
    """``merge_apply`` on a kit database already open at ``alias``."""
    kit = Kit.objects.filter(code=code).first()
    if kit is not None:
        done = KitMerge.objects.filter(
            kit=kit, file_sha256=file_sha256, status=KitMerge.Status.APPLIED
        ).first()
        if done is not None:
            return done
        _lock_units(list(kit.units.values_list("serial", flat=True)))
    plan = plan_merge(alias, code=code, file_sha256=file_sha256)
    _lock_units(plan.units)
    return _apply(plan, by=by, resolutions=resolutions or {})


def _apply(plan: MergePlan, *, by: User, resolutions: Mapping[str, str]) -> KitMerge:
    now = timezone.now()
    merge = KitMerge.objects.create(
        kit=plan.kit,
        file_sha256=plan.file_sha256,
        merged_at=now,
        merged_by=by,
        status=KitMerge.Status.APPLIED,
        notes="\n".join(plan.notes),
    )
    applier = _Applier(merge, by, plan)
    order = {model._meta.label_lower: n for n, model in enumerate(identified_models())}
    units = {u.serial: u for u in Transponder.objects.filter(serial__in=plan.units)}
    with refreshing_once(at=now):
        for serial in sorted(units):
            unit = units[serial]
            changes = [c for c in plan.changes if c.unit_serial == serial]
            rows = sorted(
                (r for r in plan.additions if r.unit_serial == serial),
                key=lambda r: (order[r.label], r.kit_pk),
            )
            if changes or rows:
                applier.unit(unit, changes, rows)
                refresh_unit(unit, at=now)
        for conflict in plan.conflicts:
            recorded = record_conflict(merge, conflict)
            if recorded is not None and conflict.key in resolutions:
                conflict_resolve(
                    conflict=recorded, choice=resolutions[conflict.key], by=by, note=""
                )
        for row in plan.orphans:
            _keep_orphan(merge, row)
    merge.counts = applier.counts
    merge.rows_added = sum(applier.counts.values())
    merge.rows_changed = applier.changed
    # Stamped after every write: a later return file of this kit compares the shore's
    # changes with this moment, not with the export (``plan_merge``).
    merge.merged_at = timezone.now()
    merge.save(update_fields=["counts", "rows_added", "rows_changed", "merged_at", "notes"])
    _mark_kit_merged(plan)
    return merge


def _mark_kit_merged(plan: MergePlan) -> None:
    _set_kit_status(plan.kit)


def _set_kit_status(kit: Kit) -> None:
    """Merged back once merged with no conflict left to resolve; partly merged until then."""
    waiting = KitConflict.objects.filter(merge__kit=kit, resolution="").exists()
    status = Kit.Status.RETURNED_PARTLY if waiting else Kit.Status.MERGED
    if kit.status != status:
        kit.status = status
        kit.save(update_fields=["status"])


# --- resolving a conflict ------------------------------------------------------------------


@transaction.atomic
def conflict_resolve(
    *, conflict: KitConflict, choice: str, by: User, note: str = ""
) -> KitConflict:
    """Carry out a supervisor's choice for a conflict and record it (who, when, note).
    ``keep_shore`` writes nothing (the vessel's side stays kept in the conflict);
    ``add_vessel`` and ``take_vessel`` write the vessel's side through the services."""
    if not roles.can_supervise(by):
        raise PermissionDenied("Only a supervisor resolves a kit conflict.")
    unit = Transponder.objects.select_for_update().get(pk=conflict.unit_id)
    current = KitConflict.objects.select_for_update().get(pk=conflict.pk)
    if current.resolution:
        raise ValidationError(
            f"This conflict was resolved already ({current.get_resolution_display().lower()}, "
            f"by {current.resolved_by}, {timezone.localtime(current.resolved_at):%Y-%m-%d %H:%M})."
        )
    if choice not in current.choices:
        raise ValidationError({"choice": "Choose one of the choices offered."})
    note = note.strip()
    now = timezone.now()
    if choice == Choice.ADD_VESSEL:
        _add_vessel(current, unit, by)
    elif choice == Choice.TAKE_VESSEL:
        _take_vessel(current, unit, by)
    current.resolution = choice
    current.resolved_by = by
    current.resolved_at = now
    current.note = note
    current.full_clean()
    current.save(update_fields=["resolution", "resolved_by", "resolved_at", "note"])
    refresh_unit(unit, at=now)
    _set_kit_status(current.merge.kit)
    conflict.resolution, conflict.resolved_by, conflict.resolved_at, conflict.note = (
        choice,
        by,
        now,
        note,
    )
    return current


def _vessel_rows(conflict: KitConflict) -> tuple[list[VesselRow], list[Change]]:
    rows, changes = [], []
    for item in conflict.vessel_version:
        if "change" in item:
            changes.append(
                Change(
                    what=item["change"],
                    unit_serial=item["unit"],
                    text=item["text"],
                    payload=item["payload"],
                )
            )
        else:
            rows.append(VesselRow.from_json(item))
    return rows, changes


def _refusal(exc: Exception) -> ValidationError:
    message = "; ".join(getattr(exc, "messages", None) or [str(exc)])
    return ValidationError(
        f"The vessel's version cannot be added to the shore's history as it stands: {message} "
        "Correct the shore's history first, or keep the shore's version."
    )


def _add_vessel(conflict: KitConflict, unit: Transponder, by: User) -> None:
    rows, changes = _vessel_rows(conflict)
    kinds = KitConflict.Kind
    plan = MergePlan(
        kit=conflict.merge.kit,
        file_sha256=conflict.merge.file_sha256,
        exported_at=conflict.merge.kit.created_at,
        units=[unit.serial],
        changes=changes,
    )
    applier = _Applier(conflict.merge, by, plan)
    try:
        with transaction.atomic():
            if conflict.kind in (kinds.CLOSED_TWICE, kinds.WORKED_TWICE):
                _as_own_visit(conflict, unit, rows, by)
                return
            order = {m._meta.label_lower: n for n, m in enumerate(identified_models())}
            fresh = [r for r in rows if not r.copy]
            fresh.sort(key=lambda r: (order[r.label], r.kit_pk))
            applier._changes(unit, changes)
            applier._rows(unit, fresh)
    except _REFUSALS as exc:
        raise _refusal(exc) from exc


def _as_own_visit(
    conflict: KitConflict, unit: Transponder, rows: list[VesselRow], by: User
) -> None:
    """The vessel's new entries of a visit both sides worked on, as a closed bench visit of
    their own beside the shore's."""
    visit_row = rows[0]
    entries = [r for r in rows[1:] if not r.copy]
    if not entries:
        raise ValidationError("The vessel added no entries to this visit; there is nothing to add.")
    closed_at = visit_row.value("closed_at") or timezone.now()
    record = ServiceRecord(
        unit=unit,
        opened_at=visit_row.value("opened_at"),
        closed_at=closed_at,
        technician_id=resolve(visit_row.refs["technician_id"]),
        place_id=resolve(visit_row.refs["place_id"]),
        summary=(
            f"Entries made on board (kit {conflict.merge.kit.code}) in a visit the shore also "
            f"worked on; kept beside the shore's visit. {visit_row.value('summary') or ''}"
        ).strip()[:2000],
        created_by=by,
        closed_by=by,
        updated_by=by,
        version=2,
    )
    record.full_clean()
    record.save()
    for row in entries:
        entry = cast("Entry", build(row))
        entry.record_id = record.pk
        _insert(entry)


def _take_vessel(conflict: KitConflict, unit: Transponder, by: User) -> None:
    rows, _ = _vessel_rows(conflict)
    kinds = KitConflict.Kind
    try:
        with transaction.atomic():
            if conflict.kind == kinds.AMENDED_TWICE:
                row = rows[0]
                amendment = cast("Amendment", build(row))
                target_model = amendment.target_type.model_class()
                assert target_model is not None
                made = amendment_create(
                    record=ServiceRecord.objects.get(pk=amendment.record_id),
                    target=target_model._base_manager.get(pk=amendment.target_id),
                    field_name=amendment.field_name,
                    corrected_value=amendment.corrected_value,
                    reason=f"{amendment.reason} (made on board, kit {conflict.merge.kit.code})",
                    by=by,
                )
                _stamp_identity(Amendment, made.pk, row)
            elif conflict.kind == kinds.HOLD_TWICE:
                last = rows[-1]
                made_hold = unit_hold_set(
                    unit=unit,
                    hold=UnitHold(last.value("to_hold")),
                    reason=last.value("reason"),
                    by=by,
                    at=timezone.now(),
                )
                _stamp_identity(HoldChange, made_hold.pk, last)
            elif conflict.kind == kinds.RECOVERED_TWICE:
                row = rows[0]
                deployment = (
                    Deployment.objects.select_for_update().get(uid=row.fields["uid"])
                    if row.fields.get("uid")
                    else Deployment.objects.get(pk=row.kit_pk)
                )
                deployment.recovered_at = row.value("recovered_at")
                deployment.replies_counted = row.value("replies_counted")
                deployment.full_clean()
                deployment.save(update_fields=["recovered_at", "replies_counted"])
            elif conflict.kind == kinds.CERTIFICATE:
                row = rows[0]
                certificate = ReleaseCertificate.objects.get(number=row.value("number"))
                certificate.status = row.value("status")
                certificate.status_reason = row.value("status_reason") or ""
                certificate.status_changed_at = timezone.now()
                certificate.status_changed_by = by
                certificate.full_clean()
                certificate.save(
                    update_fields=[
                        "status",
                        "status_reason",
                        "status_changed_at",
                        "status_changed_by",
                    ]
                )
            else:
                raise ValidationError("This conflict has no vessel value to take.")
    except _REFUSALS as exc:
        raise _refusal(exc) from exc


def entry_models() -> tuple[type[Entry], ...]:
    return entry_kinds()
