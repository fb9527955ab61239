"""Request-level protections the settings point at: the client's address, the page policy."""

from ipaddress import ip_address

from csp.middleware import CSPMiddleware
from django.conf import settings
from django.http import HttpRequest, HttpResponseBase


def client_ip(request: HttpRequest) -> str | None:
    """The address a request came from, for sign-in throttling.

    With ``TRUSTED_PROXY_COUNT = 0`` it is the connection's own address. Behind N proxies that
    each append the address they saw to ``X-Forwarded-For``, it is the Nth entry from the
    right: the one the outermost trusted proxy saw. Entries further left are whatever the
    client chose to send and are never trusted. A missing or malformed entry falls back to
    the connection's address (the proxy's), which throttles more, never less.
    """
    remote = request.META.get("REMOTE_ADDR") or None
    count: int = settings.TRUSTED_PROXY_COUNT
    if count == 0:
        return remote
    hops = [h.strip() for h in request.META.get("HTTP_X_FORWARDED_FOR", "").split(",")]
    hops = [h for h in hops if h]
    if len(hops) < count:
        return remote
    candidate = hops[-count]
    try:
        return str(ip_address(candidate))
    except ValueError:
        return remote


class PageCSPMiddleware(CSPMiddleware):
    """django-csp's middleware for every response except PDFs.

    Chrome's built-in PDF viewer draws the document in a page of its own, which a policy sent
    with the PDF blocks (its inline styles and embedded viewer); the PDFs hold no script.
    """

    def process_response(
        self, request: HttpRequest, response: HttpResponseBase
    ) -> HttpResponseBase:
        if response.get("Content-Type", "").startswith("application/pdf"):
            return response
        return super().process_response(request, response)
