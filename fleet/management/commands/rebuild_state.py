"""Recompute every unit's derived state (anode wear sums, seal openings, battery tally, last
tests) from the records. The write services keep it current; run this after a bulk import
or a restore, or to check nothing has drifted (``--check``)."""

from django.core.management.base import BaseCommand, CommandError
from django.utils import timezone

from fleet.due.snapshot import state_snapshot
from fleet.due.state import rebuild_all


class Command(BaseCommand):
    help = "Recompute derived maintenance state from the records."

    def add_arguments(self, parser):
        parser.add_argument(
            "--check",
            action="store_true",
            help="Rebuild inside a transaction that is rolled back, and fail if anything differs.",
        )

    def handle(self, *args, check: bool = False, **options):
        from django.db import transaction

        at = timezone.now()
        if not check:
            n = rebuild_all(at=at)
            self.stdout.write(f"rebuilt derived state for {n} units")
            return
        before = state_snapshot()
        with transaction.atomic():
            rebuild_all(at=at)
            after = state_snapshot()
            transaction.set_rollback(True)
        differences = sorted(set(before.items()) ^ set(after.items()))
        if differences:
            raise CommandError(f"derived state differs from the records in {len(differences)} rows")
        self.stdout.write(f"derived state matches the records ({len(after)} rows)")
