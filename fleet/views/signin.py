"""The sign-in page's answer when django-axes has locked a user name or an address, and the
admin's door (our sign-in page, or our 403 page, never the framework's own login)."""

from typing import Any

from axes.helpers import get_cool_off
from django.conf import settings
from django.contrib.auth.decorators import login_not_required
from django.contrib.auth.forms import AuthenticationForm
from django.contrib.auth.views import redirect_to_login
from django.core.exceptions import PermissionDenied
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.http import url_has_allowed_host_and_scheme

ADMIN_REFUSED = (
    "Reference data (variants, units, places, sites) is kept by supervisors with staff "
    "access. Your account does not have it."
)


@login_not_required
def admin_login(request: HttpRequest) -> HttpResponse:
    """Where the admin sends anyone it will not let in.

    Signed out: our sign-in page, with the admin page to come back to. Signed in without staff
    access (a technician or viewer): our 403 page saying why. Staff: on to the admin.
    """
    target = request.GET.get("next", "")
    if not url_has_allowed_host_and_scheme(
        target, allowed_hosts={request.get_host()}, require_https=request.is_secure()
    ):
        target = ""
    target = target or reverse("admin:index")
    if not request.user.is_authenticated:
        return redirect_to_login(target, settings.LOGIN_URL)
    if not (request.user.is_active and request.user.is_staff):
        raise PermissionDenied(ADMIN_REFUSED)
    return redirect(target)


def lockout_message(minutes: int) -> str:
    unit = "minute" if minutes == 1 else "minutes"
    return (
        "Too many failed sign-ins for this user name or from this address. "
        f"Try again in {minutes} {unit}, or ask a supervisor to clear the lock."
    )


def lockout_response(
    request: HttpRequest,
    original_response: HttpResponse | None = None,
    credentials: dict[str, Any] | None = None,
) -> HttpResponse:
    """The sign-in page again, status 429, with the lock explained and no password checked.

    Every refused attempt restarts the cool-off (AXES_RESET_COOL_OFF_ON_FAILURE_DURING_LOCKOUT),
    so the wait from now is the whole cool-off, rounded up to a minute.
    """
    cool_off = get_cool_off(request)
    minutes = max(1, -(-int(cool_off.total_seconds()) // 60)) if cool_off else 0
    username = str((credentials or {}).get("username") or "")
    form = AuthenticationForm(request, initial={"username": username})
    next_url = request.POST.get("next", "")
    if not url_has_allowed_host_and_scheme(
        next_url, allowed_hosts={request.get_host()}, require_https=request.is_secure()
    ):
        next_url = ""
    context = {
        "form": form,
        "next": next_url,
        "lockout": lockout_message(minutes)
        if minutes
        else "Too many failed sign-ins. Ask a supervisor to clear the lock.",
    }
    return render(request, "registration/login.html", context, status=429)
