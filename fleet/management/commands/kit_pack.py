"""On the vessel: write the kit's return file for the merge ashore (docs/kits.md)."""

import subprocess
import sys
from pathlib import Path
from typing import Any

from django.conf import settings
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError, CommandParser

from fleet.kits.serve import WorkingCopyError, kit_environment
from fleet.services.kits import kit_pack


class Command(BaseCommand):
    help = "Pack this vessel kit (or the working copy in --dir) into its return file."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--out", required=True, type=Path, help="The return file to write.")
        parser.add_argument("--by", required=True, help="Who packs it (a username in the kit).")
        parser.add_argument(
            "--dir", type=Path, default=None, help="The kit's working folder (from kit_serve)."
        )

    def handle(self, *args: Any, **options: Any) -> None:
        out = Path(options["out"]).resolve()
        if out.exists():
            raise CommandError(f"{out} exists already; choose another file name.")
        if options["dir"] is not None:
            self._pack_in(Path(options["dir"]), out, options["by"])
            return
        by = User.objects.filter(username=options["by"]).first()
        if by is None:
            raise CommandError(f"No user named {options['by']} in this kit.")
        try:
            kit_pack(by=by, out=out)
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages)) from exc
        self.stdout.write(f"return file written to {out}")

    def _pack_in(self, folder: Path, out: Path, by: str) -> None:
        """Run this command again on the working copy in ``folder`` (its own database)."""
        try:
            env = kit_environment(folder)
        except WorkingCopyError as exc:
            raise CommandError(str(exc)) from exc
        manage = str(Path(settings.BASE_DIR) / "manage.py")
        done = subprocess.run(  # noqa: S603 (our own manage.py, no shell)
            [sys.executable, manage, "kit_pack", "--out", str(out), "--by", by],
            env=env,
            capture_output=True,
            text=True,
            check=False,
        )
        if done.returncode != 0:
            raise CommandError(done.stderr.strip() or "packing failed")
        self.stdout.write(done.stdout.strip())
