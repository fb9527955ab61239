"""Make a vessel kit: the chosen units, sites and sailing users in one file (docs/kits.md)."""

from pathlib import Path
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError, CommandParser

from fleet.models import Site, Transponder
from fleet.services.kits import kit_export


def _names(raw: str) -> list[str]:
    return [name.strip() for name in raw.split(",") if name.strip()]


def _find(model: Any, field: str, names: list[str], what: str) -> list[Any]:
    found = {getattr(row, field): row for row in model.objects.filter(**{f"{field}__in": names})}
    missing = [name for name in names if name not in found]
    if missing:
        raise CommandError(f"No {what} named {', '.join(missing)}.")
    return [found[name] for name in names]


class Command(BaseCommand):
    help = "Write a vessel kit file for some units, sites and the users who sail."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--units", required=True, help="Serials, comma separated.")
        parser.add_argument("--sites", default="", help="Site names, comma separated.")
        parser.add_argument("--users", required=True, help="Who sails: usernames, comma separated.")
        parser.add_argument("--job", required=True, help='What the job is, e.g. "Survey block 7".')
        parser.add_argument("--by", required=True, help="The supervisor making the kit.")
        parser.add_argument("--out", required=True, type=Path, help="The kit file to write.")

    def handle(self, *args: Any, **options: Any) -> None:
        units = _find(Transponder, "serial", _names(options["units"]), "unit")
        sites = _find(Site, "name", _names(options["sites"]), "site")
        users = _find(User, "username", _names(options["users"]), "user")
        by = _find(User, "username", [options["by"]], "user")[0]
        out = Path(options["out"])
        if out.exists():
            raise CommandError(f"{out} exists already; choose another file name.")
        try:
            kit = kit_export(
                units=units, sites=sites, users=users, job=options["job"], by=by, out=out
            )
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages)) from exc
        self.stdout.write(
            f"kit {kit.code} written to {out}: {len(units)} units, {len(sites)} sites, "
            f"{len(users)} users; certificate numbers {kit.certificate_first} to "
            f"{kit.certificate_last} of {kit.certificate_year} reserved for it"
        )
