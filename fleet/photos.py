"""Photo uploads: decode fully, orient, re-encode. Re-encoding also drops EXIF (GPS included)."""

import io
import warnings
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.files.base import ContentFile
from django.core.files.uploadedfile import UploadedFile
from PIL import Image, ImageOps, UnidentifiedImageError

MAX_PIXELS = 40_000_000
MAX_EDGE_PX = 2400


def clean_photo(upload: UploadedFile[Any]) -> ContentFile[bytes]:
    """Return a JPEG re-encoded from ``upload`` or raise ValidationError with a code."""
    if upload.size is not None and upload.size > settings.PHOTO_MAX_BYTES:
        raise ValidationError(
            "The photo is larger than %(limit)d MB.",
            params={"limit": settings.PHOTO_MAX_BYTES // (1024 * 1024)},
            code="too_large",
        )
    upload.seek(0)
    data = upload.read()
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            with Image.open(io.BytesIO(data)) as probe:
                if probe.width * probe.height > MAX_PIXELS:
                    raise ValidationError("The photo has too many pixels.", code="too_many_pixels")
                probe.load()  # verify() alone accepts a truncated JPEG; load() decodes it all
                image = ImageOps.exif_transpose(probe)
    except ValidationError:
        raise
    except (Image.DecompressionBombWarning, Image.DecompressionBombError) as exc:
        raise ValidationError("The photo has too many pixels.", code="too_many_pixels") from exc
    except (UnidentifiedImageError, OSError, SyntaxError, ValueError) as exc:
        raise ValidationError(
            "This file is not a photo we can read (JPEG, PNG or WebP).", code="unreadable"
        ) from exc
    image = image.convert("RGB")
    image.thumbnail((MAX_EDGE_PX, MAX_EDGE_PX))
    out = io.BytesIO()
    image.save(out, format="JPEG", quality=85, optimize=True)
    stem = (upload.name or "photo").rsplit("/", 1)[-1].rsplit(".", 1)[0][:60] or "photo"
    return ContentFile(out.getvalue(), name=f"{stem}.jpg")
