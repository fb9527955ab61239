"""One guard per model: every view starts with one of these. They 404 on a missing object and
403 on a user whose role does not allow the action."""

from collections.abc import Callable
from functools import wraps
from typing import Any

from django.contrib import messages
from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied
from django.http import Http404, HttpRequest
from django.http.response import HttpResponseBase
from django.shortcuts import get_object_or_404, redirect
from django.urls import reverse

from fleet import roles
from fleet.kits.identity import current_kit
from fleet.models import (
    CalendarFeed,
    Deployment,
    Kit,
    KitConflict,
    KitMerge,
    ReleaseCertificate,
    ReleaseTest,
    ServiceRecord,
    Site,
    Transponder,
    Variant,
)


class AuthenticatedRequest(HttpRequest):
    """A request the login middleware let through: its user is signed in, never anonymous.
    Views that act for the user (``by=request.user``) take this type."""

    user: User


ViewFunction = Callable[..., HttpResponseBase]


def require(check: Callable[[Any], bool]) -> Callable[[ViewFunction], ViewFunction]:
    def decorator(view: ViewFunction) -> ViewFunction:
        @wraps(view)
        def wrapped(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponseBase:
            if not check(request.user):
                raise PermissionDenied
            return view(request, *args, **kwargs)

        return wrapped

    return decorator


def _check(request: HttpRequest, write: bool, supervise: bool = False) -> None:
    user = request.user
    allowed = (
        roles.can_supervise(user)
        if supervise
        else roles.can_record(user)
        if write
        else roles.can_read(user)
    )
    if not allowed:
        raise PermissionDenied


def check_import_for_user(request: HttpRequest) -> None:
    """Importing history is for supervisors (every import view starts here)."""
    _check(request, write=False, supervise=True)


def check_kit_merge_for_user(request: HttpRequest) -> None:
    """Merging a vessel kit and resolving its conflicts is for supervisors."""
    _check(request, write=False, supervise=True)


def get_kit_merge_for_user(request: HttpRequest, pk: int) -> KitMerge:
    _check(request, write=False, supervise=True)
    return get_object_or_404(KitMerge.objects.select_related("kit", "merged_by"), pk=pk)


def get_kit_conflict_for_user(request: HttpRequest, pk: int) -> KitConflict:
    _check(request, write=False, supervise=True)
    return get_object_or_404(KitConflict.objects.select_related("merge", "unit"), pk=pk)


def get_unit_for_user(
    request: HttpRequest,
    serial: str,
    *,
    write: bool = False,
    supervise: bool = False,
    related: tuple[str, ...] = ("variant", "place"),
) -> Transponder:
    """The unit, with ``related`` loaded in the same query (a page that reads more of the
    unit's rows names them)."""
    _check(request, write, supervise)
    return get_object_or_404(Transponder.objects.select_related(*related), serial=serial)


def get_variant_for_user(request: HttpRequest, pk: int) -> Variant:
    """Variants are managed by supervisors: 403 before 404."""
    _check(request, write=False, supervise=True)
    return get_object_or_404(Variant, pk=pk)


def get_record_for_user(
    request: HttpRequest, pk: int, *, write: bool = False, supervise: bool = False
) -> ServiceRecord:
    _check(request, write, supervise)
    return get_object_or_404(
        ServiceRecord.objects.select_related(
            "unit__variant", "place", "technician", "created_by", "updated_by", "closed_by"
        ),
        pk=pk,
    )


def get_deployment_for_user(request: HttpRequest, pk: int, *, write: bool = False) -> Deployment:
    _check(request, write)
    return get_object_or_404(Deployment.objects.select_related("unit", "site"), pk=pk)


def get_site_for_user(request: HttpRequest, pk: int, *, supervise: bool = False) -> Site:
    _check(request, write=False, supervise=supervise)
    return get_object_or_404(Site, pk=pk)


def get_release_test_for_user(request: HttpRequest, pk: int) -> ReleaseTest:
    """Issuing is for supervisors: 403 before 404, like every guard."""
    _check(request, write=False, supervise=True)
    return get_object_or_404(ReleaseTest.objects.select_related("record__unit"), pk=pk)


def get_certificate_for_user(
    request: HttpRequest, number: str, *, supervise: bool = False
) -> ReleaseCertificate:
    _check(request, write=False, supervise=supervise)
    return get_object_or_404(
        ReleaseCertificate.objects.select_related(
            "release_test__record__unit__variant", "issued_by", "superseded_by"
        ),
        number=number,
    )


def get_calendar_feed_for_token(token: str) -> CalendarFeed:
    """The feed is read without a login, by its secret token. A revoked token, or a user who
    has left or lost every role, gets a 404 (not a 403: the address itself is the secret)."""
    feed = CalendarFeed.objects.select_related("user").filter(token=token).first()
    if feed is None or not feed.user.is_active or not roles.can_read(feed.user):
        raise Http404("No such calendar.")
    return feed


def ashore_only(action: str) -> Callable[[ViewFunction], ViewFunction]:
    """Refuse the view on a vessel kit, with a message saying ``action`` is done ashore (making
    a kit, importing a fleet, merging a kit back: none makes sense on board)."""

    def decorator(view: ViewFunction) -> ViewFunction:
        @wraps(view)
        def wrapped(request: HttpRequest, *args: Any, **kwargs: Any) -> HttpResponseBase:
            kit = current_kit()
            if kit is not None:
                messages.error(
                    request,
                    f"This is a vessel copy ({kit.code}): {action} is done ashore, not on board.",
                )
                return redirect(reverse("kit-list"))
            return view(request, *args, **kwargs)

        return wrapped

    return decorator


def check_kits_for_user(request: HttpRequest) -> None:
    """Vessel kits are a supervisor's: making one, downloading its file, packing it."""
    _check(request, write=False, supervise=True)


def get_kit_for_user(request: HttpRequest, code: str) -> Kit:
    _check(request, write=False, supervise=True)
    return get_object_or_404(Kit, code=code)
