"""Write the whole database content and the photos to one archive (see fleet.services.backup).
Run it nightly from cron; restore with ``manage.py restore``."""

from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.utils import timezone

from fleet.archive import ArchiveError
from fleet.services.backup import backup_create


class Command(BaseCommand):
    help = "Back up the database content and media files to one archive (zip)."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("file", help="Where to write the archive, e.g. holdfast-backup.zip.")

    def handle(self, *args: Any, file: str, **options: Any) -> None:
        path = Path(file)
        if path.is_dir():
            raise CommandError(f"{path} is a folder; give a file name for the archive.")
        if not path.parent.is_dir():
            raise CommandError(f"The folder {path.parent} does not exist.")
        try:
            result = backup_create(path=path, at=timezone.now())
        except (ArchiveError, OSError) as exc:
            raise CommandError(str(exc)) from exc
        for name in result.missing_media:
            self.stderr.write(f"warning: {name} is referenced but not on disk; not backed up")
        self.stdout.write(
            f"backed up {result.rows} rows in {result.tables} tables and "
            f"{result.media_files} media files to {result.path}"
        )
