from django.conf import settings
from django.http import HttpRequest
from django.http.response import HttpResponseBase
from django.views.static import serve

from fleet import roles

from .guards import require


@require(roles.can_read)
def media_file(request: HttpRequest, path: str) -> HttpResponseBase:
    """Photos are workshop records: served only to signed-in users with a role."""
    return serve(request, path, document_root=str(settings.MEDIA_ROOT))
