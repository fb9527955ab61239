"""Restore an archive written by ``manage.py backup`` (see fleet.services.backup)."""

from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.utils import timezone

from fleet.services.backup import RestoreError, backup_restore


class Command(BaseCommand):
    help = (
        "Restore a backup archive into this database and MEDIA_ROOT. The archive is checked "
        "first; the database must be empty unless --replace is given."
    )

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("file", help="The archive written by manage.py backup.")
        parser.add_argument(
            "--replace",
            action="store_true",
            help="Delete everything in this database first (all users, records and units).",
        )

    def handle(self, *args: Any, file: str, replace: bool = False, **options: Any) -> None:
        try:
            result = backup_restore(path=Path(file), replace=replace, at=timezone.now())
        except (RestoreError, OSError) as exc:
            raise CommandError(f"Restore refused: {exc}") from exc
        self.stdout.write(
            f"restored {result.rows} rows in {result.tables} tables and {result.media_files} "
            f"media files; stored state and due items match a rebuild "
            f"({result.state_rows_checked} rows)"
        )
