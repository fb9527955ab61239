from django.http import HttpRequest

from . import roles
from .kits.identity import current_kit
from .models import Kit


def role_flags(request: HttpRequest) -> dict[str, bool]:
    user = request.user
    return {
        "can_record": roles.can_record(user),
        "can_supervise": roles.can_supervise(user),
    }


def vessel_kit(request: HttpRequest) -> dict[str, Kit | None]:
    """The kit this database is, for the banner on every page (None ashore)."""
    return {"vessel_kit": current_kit()}
