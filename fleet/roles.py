"""Roles are Django groups. Every view asks these helpers, never the group names directly.

- technician: reads everything, creates and edits open service records and deployments;
- supervisor: everything a technician can, plus closing records and managing fleet and
  reference data (Django admin);
- viewer: reads everything, writes nothing.
A superuser counts as a supervisor. A logged-in user in no group sees nothing but a 403.
"""

from django.contrib.auth.models import AbstractUser, AnonymousUser, Group, Permission
from django.db.models import Q

TECHNICIAN = "technician"
SUPERVISOR = "supervisor"
VIEWER = "viewer"
ROLES = (TECHNICIAN, SUPERVISOR, VIEWER)

User = AbstractUser | AnonymousUser


def role_names(user: User) -> frozenset[str]:
    if not user.is_authenticated:
        return frozenset()
    cached = getattr(user, "_holdfast_roles", None)
    if cached is None:
        cached = frozenset(user.groups.values_list("name", flat=True))
        if user.is_superuser:
            cached = cached | {SUPERVISOR}
        # A per-request cache kept on the user object, which declares no such attribute.
        user._holdfast_roles = cached  # type: ignore[attr-defined]
    return cached


def can_read(user: User) -> bool:
    return bool(role_names(user) & set(ROLES))


def can_record(user: User) -> bool:
    """Create and edit open service records and deployments."""
    return bool(role_names(user) & {TECHNICIAN, SUPERVISOR})


def can_supervise(user: User) -> bool:
    """Close records, manage fleet and reference data."""
    return SUPERVISOR in role_names(user)


def ensure_groups(using: str = "default") -> None:
    """Create the three groups and give supervisors the model permissions the admin needs."""
    groups = Group.objects.db_manager(using)
    permissions = Permission.objects.db_manager(using)
    for name in ROLES:
        groups.get_or_create(name=name)
    supervisor = groups.get(name=SUPERVISOR)
    # Supervisors also see and clear sign-in locks (django-axes' access attempts).
    supervisor.permissions.set(
        permissions.filter(
            Q(content_type__app_label="fleet")
            | Q(
                content_type__app_label="axes",
                codename__in=["view_accessattempt", "delete_accessattempt"],
            )
        )
    )
    viewer = groups.get(name=VIEWER)
    viewer.permissions.set(
        permissions.filter(content_type__app_label="fleet", codename__startswith="view_")
    )
