"""Everything Holdfast holds, readable without Holdfast: one zip of CSV files, photos and PDFs.

The export is for people and other tools (a spreadsheet, an audit, a move to another system);
``manage.py backup`` is the one to restore from. It holds:

- ``fleet/<table>.csv``: every table of the fleet app, one file each, every column;
- ``auth/user.csv`` (no password hashes), ``auth/group.csv``, ``auth/user_groups.csv``;
- ``media/…``: the photos, under the names the tables give;
- ``certificates/<number>.pdf``: every release-test certificate, as its PDF prints today;
- ``manifest.json``: each file's row count (CSV), size and SHA-256, the Holdfast version, the
  migration of each app, when and by which command.

CSV: UTF-8 without a byte-order mark, a header row of column names, one type per column:
integers and decimal numbers as digits, booleans ``true``/``false``, dates ``YYYY-MM-DD``,
times ``HH:MM:SS``, datetimes ISO 8601 in UTC with their offset (``+00:00``), a foreign key
as the other row's ``id``, the type an amendment corrects as ``app_label.model``, lists as
JSON, an empty cell for no value. A text cell a spreadsheet would run as a formula (starting
with ``= + - @``) gets a leading apostrophe, as in the pages' own CSV exports.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from django.apps import apps
from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.contrib.contenttypes.models import ContentType
from django.db import models
from django.urls import reverse

from fleet.archive import ArchiveWriter, manifest_header, safe_member_name, write_archive
from fleet.documents.certificate import prepare_certificate, render_certificate
from fleet.exports import spreadsheet_safe
from fleet.models import ReleaseCertificate

FORMAT = "holdfast-export"
USER_COLUMNS = (
    "id",
    "username",
    "first_name",
    "last_name",
    "email",
    "is_active",
    "is_staff",
    "is_superuser",
    "last_login",
    "date_joined",
)


@dataclass(frozen=True, slots=True)
class ExportResult:
    path: Path
    csv_files: int
    rows: int
    media_files: int
    certificates: int
    missing_media: tuple[str, ...]


def cell(value: object) -> str:
    """One value as its CSV text (the module docstring lists the forms)."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, dt.datetime):
        if value.tzinfo is not None:
            value = value.astimezone(dt.UTC)
        return value.isoformat()
    if isinstance(value, dt.date | dt.time):
        return value.isoformat()
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, list | dict):
        return spreadsheet_safe(json.dumps(value, ensure_ascii=False))
    return spreadsheet_safe(value)


def _content_type_label(pk: int | None) -> str | None:
    if pk is None:
        return None
    content_type = ContentType.objects.get_for_id(pk)
    return f"{content_type.app_label}.{content_type.model}"


Getter = Callable[[models.Model], object]


def _getter(f: models.Field[Any, Any]) -> Getter:
    """How one column reads its value from a row."""
    attname = f.attname

    def content_type(obj: models.Model) -> object:
        return _content_type_label(getattr(obj, attname))

    def file_name(obj: models.Model) -> object:
        return getattr(obj, attname).name or None

    def plain(obj: models.Model) -> object:
        return getattr(obj, attname)

    if f.is_relation and f.related_model is ContentType:
        return content_type
    if isinstance(f, models.FileField):
        return file_name
    return plain


def _columns(model: type[models.Model]) -> list[tuple[str, Getter]]:
    return [
        (f.name if f.is_relation and f.related_model is ContentType else f.attname, _getter(f))
        for f in model._meta.concrete_fields
    ]


def _write_csv(
    archive: ArchiveWriter, name: str, header: Sequence[str], rows: Iterable[Sequence[object]]
) -> int:
    count = 0
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    with archive.open(name) as out:
        writer.writerow(header)
        for row in rows:
            writer.writerow([cell(value) for value in row])
            count += 1
            if buffer.tell() > 65536:
                out.write(buffer.getvalue().encode("utf-8"))
                buffer.seek(0)
                buffer.truncate()
        out.write(buffer.getvalue().encode("utf-8"))
    archive.set_rows(name, count)
    return count


def default_base_url() -> str:
    """Where the certificates' verification links point when no base address is given: the
    first trusted origin, else the first allowed host."""
    if settings.CSRF_TRUSTED_ORIGINS:
        return str(settings.CSRF_TRUSTED_ORIGINS[0]).rstrip("/")
    host = next((h for h in settings.ALLOWED_HOSTS if h not in ("*", "")), "localhost")
    return f"https://{host.lstrip('.')}"


def export_all(
    *, path: Path, at: dt.datetime, base_url: str, command: str = "manage.py export_all"
) -> ExportResult:
    """Write the export archive to ``path``; nothing in the database changes."""
    header = manifest_header(kind=FORMAT, command=command, at=at, using="default")
    media_root = Path(settings.MEDIA_ROOT)
    media: set[str] = set()
    csv_files = rows = certificates = 0
    with write_archive(path, at=at) as archive:
        for model in apps.get_app_config("fleet").get_models():
            columns = _columns(model)
            file_fields = [
                f.attname for f in model._meta.concrete_fields if isinstance(f, models.FileField)
            ]

            def values(
                model: type[models.Model] = model,
                columns: list[tuple[str, Getter]] = columns,
                file_fields: list[str] = file_fields,
            ) -> Iterator[list[object]]:
                for obj in model._base_manager.order_by("pk").iterator(chunk_size=2000):
                    media.update(n for n in (getattr(obj, a).name for a in file_fields) if n)
                    yield [get(obj) for _, get in columns]

            name = f"fleet/{model._meta.model_name}.csv"
            rows += _write_csv(archive, name, [c for c, _ in columns], values())
            csv_files += 1
        users = get_user_model()._base_manager.order_by("pk")
        rows += _write_csv(
            archive, "auth/user.csv", USER_COLUMNS, users.values_list(*USER_COLUMNS).iterator()
        )
        rows += _write_csv(
            archive, "auth/group.csv", ("id", "name"), Group.objects.order_by("pk").values_list()
        )
        membership = get_user_model().groups.through.objects.order_by("user_id", "group_id")
        rows += _write_csv(
            archive,
            "auth/user_groups.csv",
            ("user_id", "group_id"),
            membership.values_list("user_id", "group_id"),
        )
        csv_files += 3
        missing: list[str] = []
        for file_name in sorted(media):
            source = media_root / safe_member_name(file_name)
            if source.is_file():
                archive.copy_file(f"media/{file_name}", source)
            else:
                missing.append(file_name)
        issued = ReleaseCertificate.objects.select_related(
            "release_test__record__unit__variant", "issued_by", "superseded_by"
        ).order_by("year", "sequence")
        for certificate in issued:
            verify = base_url.rstrip("/") + reverse(
                "certificate-verify", args=[certificate.verification_code]
            )
            pdf = render_certificate(prepare_certificate(certificate, verify_url=verify))
            archive.write_bytes(f"certificates/{certificate.number}.pdf", pdf)
            certificates += 1
        archive.finish({**header, "encoding": "utf-8", "missing_media": missing})
    return ExportResult(
        path=Path(path),
        csv_files=csv_files,
        rows=rows,
        media_files=len(media) - len(missing),
        certificates=certificates,
        missing_media=tuple(missing),
    )
