"""The help page: our own words, and how each due date is worked out, with the defaults in
force (a variant may set its own)."""

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from fleet import roles
from fleet.due.condition import Condition
from fleet.due.items import DueState
from fleet.due.readiness import Verdict
from fleet.due.rules import default_rules

from .guards import require


@require(roles.can_read)
def help_page(request: HttpRequest) -> HttpResponse:
    return render(
        request,
        "fleet/help.html",
        {
            "rules": default_rules(),
            "conditions": list(Condition),
            "due_states": list(DueState),
            "verdicts": list(Verdict),
        },
    )
