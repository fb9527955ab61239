"""Write everything Holdfast holds to one archive of CSV files, photos and certificate PDFs
(see fleet.export_archive). For reading elsewhere; restore from ``manage.py backup``."""

from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.utils import timezone

from fleet.archive import ArchiveError
from fleet.export_archive import default_base_url, export_all


class Command(BaseCommand):
    help = "Export every fleet table, users and groups as CSV, with photos and certificates."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument(
            "--output",
            default="",
            help="Archive to write (default: holdfast-export-<UTC time>.zip here).",
        )
        parser.add_argument(
            "--base-url",
            default="",
            help="Address the certificates' verification links start with "
            "(default: the first CSRF_TRUSTED_ORIGINS entry, else https://<first allowed host>).",
        )

    def handle(self, *args: Any, output: str, base_url: str, **options: Any) -> None:
        at = timezone.now()
        path = Path(output or f"holdfast-export-{at:%Y%m%dT%H%M%SZ}.zip")
        if path.is_dir():
            raise CommandError(f"{path} is a folder; give a file name for the archive.")
        if not path.parent.is_dir():
            raise CommandError(f"The folder {path.parent} does not exist.")
        base = base_url or default_base_url()
        if not base.startswith(("http://", "https://")):
            raise CommandError(f"--base-url must start with http:// or https://, not {base!r}.")
        try:
            result = export_all(path=path, at=at, base_url=base)
        except (ArchiveError, OSError) as exc:
            raise CommandError(str(exc)) from exc
        for name in result.missing_media:
            self.stderr.write(f"warning: {name} is referenced but not on disk; not exported")
        self.stdout.write(
            f"exported {result.rows} rows in {result.csv_files} CSV files, "
            f"{result.media_files} photos and {result.certificates} certificates to {result.path}"
        )
