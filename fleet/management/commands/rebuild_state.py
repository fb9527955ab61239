"""Recompute every unit's derived state (anode wear sums, seal openings, battery tally, last
tests) and its stored due items from the records. The write services keep both current;
run this after a bulk import, a restore or a change of the settings' rules, or to prove
nothing differs (``--check``: exits non-zero on any difference). Either runs in one
transaction with every unit locked: writes wait for it (on SQLite, up to its busy timeout)."""

from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.due.store import rebuild_all


class Command(BaseCommand):
    help = "Recompute derived maintenance state from the records."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument(
            "--check",
            action="store_true",
            help="Rebuild inside a transaction that is rolled back, and fail if anything differs.",
        )

    def handle(self, *args: Any, check: bool = False, **options: Any) -> None:
        at = timezone.now()
        if not check:
            n = rebuild_all(at=at)
            self.stdout.write(f"rebuilt derived state for {n} units")
            return
        lines, compared = rebuild_differences(at=at)
        if lines:
            for line in lines[:20]:
                self.stderr.write(line)
            raise CommandError(
                f"stored state and due items differ from a rebuild in {len(lines)} rows"
            )
        self.stdout.write(f"stored state and due items match a rebuild ({compared} rows)")
