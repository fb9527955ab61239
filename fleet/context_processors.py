from django.http import HttpRequest

from . import roles


def role_flags(request: HttpRequest) -> dict[str, bool]:
    user = request.user
    return {
        "can_record": roles.can_record(user),
        "can_supervise": roles.can_supervise(user),
    }
