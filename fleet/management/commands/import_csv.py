"""``manage.py import_csv KIND FILE [--user U] [--commit]``: check a spreadsheet (CSV) of
history and, with ``--commit``, import it, all or nothing (``docs/import.md``).

Without ``--commit`` nothing is written: the command lists what the file would create and
every bad row. KIND is units, sites, deployments or visits.
"""

from pathlib import Path
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import User
from django.core.management.base import BaseCommand, CommandError, CommandParser

from fleet.services.imports import (
    KINDS,
    ImportRefusedError,
    Outcome,
    import_commit,
    import_preview,
)


def _user(username: str | None) -> User:
    users = get_user_model().objects.filter(is_active=True)
    if username:
        found = users.filter(username=username).first()
        if found is None:
            raise CommandError(f"No active user {username!r}.")
        return found
    superusers = list(users.filter(is_superuser=True)[:2])
    if len(superusers) != 1:
        raise CommandError("Name the user the records are attributed to: --user NAME.")
    return superusers[0]


class Command(BaseCommand):
    help = "Check a CSV file of history and, with --commit, import it (all or nothing)."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("kind", choices=sorted(KINDS))
        parser.add_argument("file", type=Path)
        parser.add_argument("--user", help="who imports (default: the only superuser)")
        parser.add_argument("--commit", action="store_true", help="write the file")
        parser.add_argument(
            "--accept-flagged",
            action="store_true",
            help="import the rows flagged to check (an anode heavier than its last reading)",
        )

    def _report(self, outcome: Outcome) -> None:
        for label, count in outcome.counts.items():
            self.stdout.write(f"  {count} {label}")
        for problem in outcome.problems:
            where = f"row {problem.row}" + (f", {problem.column}" if problem.column else "")
            self.stdout.write(f"{where}: {problem.message}")
        for flag in outcome.flagged:
            self.stdout.write(f"row {flag.row}, {flag.column}: to check: {flag.message}")

    def handle(
        self,
        *args: Any,
        kind: str,
        file: Path,
        user: str | None,
        commit: bool,
        accept_flagged: bool,
        **options: Any,
    ) -> None:
        by = _user(user)
        try:
            data = file.read_bytes()
        except OSError as exc:
            raise CommandError(f"Cannot read {file}: {exc.strerror}.") from exc
        if not commit:
            outcome = import_preview(kind=kind, data=data, file_name=file.name, by=by)
            self.stdout.write(f"{file.name}: {outcome.rows} rows; would create:")
            self._report(outcome)
            if outcome.problems:
                raise CommandError(f"{len(outcome.problems)} problem(s); fix them first.")
            if outcome.flagged:
                self.stdout.write(
                    f"{len(outcome.flagged)} row(s) to check; --commit --accept-flagged imports "
                    "them as they are."
                )
            self.stdout.write("Nothing written; add --commit to import.")
            return
        try:
            outcome = import_commit(
                kind=kind, data=data, file_name=file.name, by=by, accept_flagged=accept_flagged
            )
        except ImportRefusedError as refused:
            self._report(refused.outcome)
            raise CommandError(
                f"{len(refused.outcome.problems)} problem(s); nothing was imported."
            ) from refused
        self.stdout.write(f"Imported {file.name} ({outcome.rows} rows):")
        self._report(outcome)
