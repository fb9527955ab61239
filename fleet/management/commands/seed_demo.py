"""Load the invented demo fleet: ``python manage.py seed_demo [--reset]``.

Idempotent: a second run finds the demo variants, says so and only makes sure the demo
logins exist with the demo password. ``--reset`` deletes the demo fleet and loads it again.
The scenario itself lives in the ``fleet/demo`` package.
"""

import time
from typing import Any

from django.core.management.base import BaseCommand, CommandParser
from django.db import transaction
from django.utils import timezone

from fleet import demo
from fleet.due.condition import Condition


class Command(BaseCommand):
    help = "Load the invented demo fleet (idempotent); --reset deletes it and loads it again."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument(
            "--reset",
            action="store_true",
            help="Delete the demo units, records, deployments, variants, places, sites and "
            "users, then load the demo again.",
        )

    def handle(self, *args: Any, **options: Any) -> None:
        started = time.monotonic()
        today = timezone.localdate()  # the one clock read: every date is anchored on it
        with transaction.atomic():
            if options["reset"]:
                kept = demo.delete_demo()
                self.stdout.write("Deleted the demo fleet.")
                for name in kept:
                    self.stdout.write(self.style.WARNING(f"  kept {name}: other data uses it"))
            if demo.demo_loaded():
                demo.ensure_logins()
                self.stdout.write("demo fleet already loaded (use --reset to load it afresh)")
                self._logins()
                return
            summary = demo.load_demo(today=today)
        seconds = time.monotonic() - started
        self.stdout.write(self.style.SUCCESS(f"Loaded the demo fleet in {seconds:.1f} s:"))
        conditions = ", ".join(
            f"{count} {Condition(value).label.lower()}"
            for value, count in summary.conditions.items()
        )
        self.stdout.write(
            f"  {summary.units} units ({conditions})\n"
            f"  {summary.variants} variants, {summary.sites} sites, {summary.places} places\n"
            f"  {summary.deployments} deployments ({summary.open_deployments} open)\n"
            f"  {summary.records} service records ({summary.open_records} open), "
            f"{summary.entries} entries"
        )
        self._logins()

    def _logins(self) -> None:
        names = ", ".join(name for name, _, _ in demo.LOGINS)
        self.stdout.write(f"Demo logins: {names}; password {demo.DEMO_PASSWORD}")
