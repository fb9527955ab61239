from django.conf import settings
from django.http import HttpRequest, HttpResponse
from django.views.static import serve

from fleet import roles

from .guards import require


@require(roles.can_read)
def media_file(request: HttpRequest, path: str) -> HttpResponse:
    """Photos are workshop records: served only to signed-in users with a role."""
    return serve(request, path, document_root=settings.MEDIA_ROOT)
