"""Merge a vessel kit's return file into this (shore) database (see fleet.services.kit_merge)."""

import tempfile
from pathlib import Path
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied, ValidationError
from django.core.management.base import BaseCommand, CommandError, CommandParser

from fleet import roles
from fleet.archive import ArchiveError
from fleet.kits.merge import MergeRefusedError
from fleet.services.kit_merge import merge_apply, merge_preview


class Command(BaseCommand):
    help = (
        "Show what merging a kit's return file (written on the vessel by kit_pack) would add, "
        "change and find in conflict; with --apply, merge it. The file is checked completely "
        "first; the same file merged twice changes nothing."
    )

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("file", help="The return file written on the vessel by kit_pack.")
        parser.add_argument("--apply", action="store_true", help="Merge it (else only preview).")
        parser.add_argument("--by", default="", help="The supervisor merging (a username).")

    def handle(
        self, *args: Any, file: str, apply: bool = False, by: str = "", **options: Any
    ) -> None:
        from fleet.kits.files import read_kit_file

        merger = None
        if apply:
            merger = User.objects.filter(username=by).first() if by else None
            if merger is None or not roles.can_supervise(merger):
                raise CommandError("Give --by USERNAME: a supervisor merges a kit.")
        with tempfile.TemporaryDirectory(prefix="holdfast-kit-merge-") as work:
            try:
                kit_file = read_kit_file(Path(file), into=Path(work))
                plan = merge_preview(kit_file)
                for line in plan.lines():
                    self.stdout.write(line)
                if merger is None:
                    if not plan.already_applied:
                        self.stdout.write("Nothing was written; give --apply to merge.")
                    return
                merge = merge_apply(kit_file, by=merger)
            except (ArchiveError, MergeRefusedError) as exc:
                raise CommandError(f"Kit merge refused: {exc}") from exc
            except (ValidationError, PermissionDenied) as exc:
                raise CommandError(
                    f"Kit merge refused: {'; '.join(getattr(exc, 'messages', [str(exc)]))}"
                ) from exc
        added = ", ".join(f"{label}: {n}" for label, n in merge.counts.items()) or "nothing new"
        conflicts = merge.conflicts.count()
        self.stdout.write(
            f"Merged kit {merge.kit.code} (merge {merge.pk}): added {added}; "
            f"{merge.rows_changed} changes carried out; {conflicts} conflict(s) kept for a "
            "supervisor to resolve (the kit merge page lists them)."
        )
