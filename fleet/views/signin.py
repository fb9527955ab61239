"""The sign-in page's answer when django-axes has locked a user name or an address."""

from typing import Any

from axes.helpers import get_cool_off
from django.contrib.auth.forms import AuthenticationForm
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils.http import url_has_allowed_host_and_scheme


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
