"""Load the invented demo fleet: ``python manage.py seed_demo [--reset] [--force]``.

Idempotent: a second run finds the demo variants, says so and only makes sure the demo
logins exist. ``--reset`` deletes the demo fleet and loads it again. The scenario itself
lives in the ``fleet/demo`` package.

The demo logins' password is published (README), so the command runs only with DEBUG on,
or with ``--force`` on a server someone means to fill with the demo. It creates a missing
demo user with that password and never changes an existing user's password: it says which
users keep their own.
"""

import time
from typing import Any

from django.conf import settings
from django.core.management.base import BaseCommand, CommandError, CommandParser
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
        parser.add_argument(
            "--force",
            action="store_true",
            help="Run although DEBUG is off: the demo logins have a published password.",
        )

    def handle(self, *args: Any, **options: Any) -> None:
        if not settings.DEBUG and not options["force"]:
            raise CommandError(
                "DEBUG is off, so this looks like a real server: seed_demo creates sign-in "
                f"users with the published password {demo.DEMO_PASSWORD!r}. Run it with "
                "DEBUG=true for a local demo, or add --force to load the demo here anyway."
            )
        started = time.monotonic()
        today = timezone.localdate()  # the one clock read: every date is anchored on it
        with transaction.atomic():
            if options["reset"]:
                kept = demo.delete_demo()
                self.stdout.write("Deleted the demo fleet.")
                for name in kept:
                    self.stdout.write(self.style.WARNING(f"  kept {name}: other data uses it"))
            if demo.demo_loaded():
                logins = demo.ensure_logins()
                self.stdout.write("demo fleet already loaded (use --reset to load it afresh)")
                self._logins(logins.own_password)
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
        self._logins(summary.own_password)

    def _logins(self, own_password: tuple[str, ...]) -> None:
        names = ", ".join(name for name, _, _ in demo.LOGINS)
        self.stdout.write(f"Demo logins: {names}; password {demo.DEMO_PASSWORD}")
        for name in own_password:
            self.stdout.write(
                self.style.WARNING(
                    f"  {name} already existed with a password of its own: left as it is"
                    + (
                        ""
                        if name in demo.EXTRA_TECHNICIANS
                        else " (the demo password will not work)"
                    )
                )
            )
