"""On the vessel's laptop: unpack a kit file and serve it on 127.0.0.1 (docs/kits.md)."""

import os
import sys
from pathlib import Path
from typing import Any

from django.conf import settings
from django.core.management.base import BaseCommand, CommandError, CommandParser

from fleet.kits.files import KitFileError
from fleet.kits.serve import WorkingCopyError, kit_environment, working_copy


class Command(BaseCommand):
    help = "Unpack a vessel kit file into a working copy and serve it on this computer only."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("file", type=Path, help="The kit file from the shore.")
        parser.add_argument(
            "--dir",
            type=Path,
            default=None,
            help="Working folder (default ~/holdfast-kits/<code>).",
        )
        parser.add_argument("--port", type=int, default=8000)
        parser.add_argument(
            "--keep", action="store_true", help="Carry on with a working copy that has changes."
        )
        parser.add_argument(
            "--replace",
            action="store_true",
            help="Start again from the file; a changed working copy is kept beside it, renamed.",
        )
        parser.add_argument(
            "--unpack-only", action="store_true", help="Unpack, say how to serve, do not serve."
        )

    def handle(self, *args: Any, **options: Any) -> None:
        port = int(options["port"])
        if not 1024 <= port <= 65535:
            raise CommandError("Choose a port from 1024 to 65535.")
        try:
            copy = working_copy(
                Path(options["file"]),
                folder=Path(options["dir"]) if options["dir"] else None,
                keep=options["keep"],
                replace=options["replace"],
            )
        except (KitFileError, WorkingCopyError) as exc:
            raise CommandError(str(exc)) from exc
        said = "unpacked into" if copy.unpacked else "working copy kept in"
        self.stdout.write(f"kit {copy.kit_code} {said} {copy.folder}")
        self.stdout.write(
            f"pack it to go back ashore with: manage.py kit_pack --dir {copy.folder} "
            "--by <username> --out <file>"
        )
        if options["unpack_only"]:
            return
        self.stdout.write(f"serving on http://127.0.0.1:{port}/ (Ctrl+C stops it)")
        self.stdout.flush()
        manage = str(Path(settings.BASE_DIR) / "manage.py")
        argv = [sys.executable, manage, "runserver", "--noreload", f"127.0.0.1:{port}"]
        os.execve(sys.executable, argv, kit_environment(copy.folder))  # noqa: S606
