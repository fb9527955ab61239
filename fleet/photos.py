"""Photo uploads: bounded decode, orient, re-encode to a clean JPEG.

1. Refuse a file over ``PHOTO_MAX_BYTES`` before reading it.
2. Open it as JPEG, PNG or WebP only and read the header, not the pixels. Refuse more than
   ``MAX_PIXELS`` (Pillow's own decompression-bomb check uses the same limit and its warning
   is an error here), so a small file cannot claim a huge canvas.
3. A JPEG is decoded already scaled down by its decoder (``draft``: 1/2, 1/4 or 1/8) to no
   less than the final size, so a 20 MP photo is held at about 5 MP.
4. Decode fully (``verify()`` alone accepts a truncated JPEG), shrink to ``MAX_EDGE_PX``,
   then turn it upright from its EXIF orientation.
5. Copy the pixels into a new image, which carries no metadata (EXIF and GPS, XMP, ICC
   profile, JPEG comments, PNG text chunks), and encode that as JPEG.

Peak memory for one upload is about the decoded image (at most ``MAX_PIXELS`` x 4 bytes for
an RGBA PNG; a JPEG far less) plus the shrunk copy: ``manage.py benchmark_upload`` measures it.
"""

import io
import struct
import warnings
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.files.base import ContentFile
from django.core.files.uploadedfile import UploadedFile
from PIL import Image, ImageOps, UnidentifiedImageError

MAX_PIXELS = 24_000_000  # a 6000 x 4000 camera frame
MAX_EDGE_PX = 2400
FORMATS = ("JPEG", "PNG", "WEBP")

# Pillow warns above this many pixels and refuses above twice as many; both stop an upload
# here (the warning is turned into an error around every decode below).
Image.MAX_IMAGE_PIXELS = MAX_PIXELS

_TOO_MANY_PIXELS = (
    "The photo has more than %(limit)d megapixels. Take it at a lower resolution or resize it."
)


def _too_many_pixels() -> ValidationError:
    return ValidationError(
        _TOO_MANY_PIXELS, params={"limit": MAX_PIXELS // 1_000_000}, code="too_many_pixels"
    )


def _decode(upload: UploadedFile[Any]) -> Image.Image:
    """The upright image, at most MAX_EDGE_PX on its long side, without metadata."""
    with Image.open(upload, formats=FORMATS) as probe:
        width, height = probe.size
        if width * height > MAX_PIXELS:
            raise _too_many_pixels()
        scale = min(1.0, MAX_EDGE_PX / max(width, height))
        if probe.format == "JPEG" and scale < 1.0:
            # The decoder picks the largest of 1/2, 1/4, 1/8 that stays at or above this size.
            probe.draft("RGB", (max(1, int(width * scale)), max(1, int(height * scale))))
        probe.load()
        probe.thumbnail((MAX_EDGE_PX, MAX_EDGE_PX))
        upright = ImageOps.exif_transpose(probe)
    if upright.mode in ("RGBA", "LA", "PA") or "transparency" in upright.info:
        # Transparent parts show as white paper, not as whatever colour they hide.
        rgba = upright.convert("RGBA")
        clean = Image.new("RGB", rgba.size, (255, 255, 255))
        clean.paste(rgba, mask=rgba.getchannel("A"))
        return clean
    if upright.mode not in ("RGB", "L"):
        upright = upright.convert("RGB")
    clean = Image.new(upright.mode, upright.size)
    clean.paste(upright)
    return clean


def clean_photo(upload: UploadedFile[Any]) -> ContentFile[bytes]:
    """Return a JPEG re-encoded from ``upload`` or raise ValidationError with a code."""
    if upload.size is not None and upload.size > settings.PHOTO_MAX_BYTES:
        raise ValidationError(
            "The photo is larger than %(limit)d MB.",
            params={"limit": settings.PHOTO_MAX_BYTES // (1024 * 1024)},
            code="too_large",
        )
    upload.seek(0)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            image = _decode(upload)
    except ValidationError:
        raise
    except (Image.DecompressionBombWarning, Image.DecompressionBombError) as exc:
        raise _too_many_pixels() from exc
    except (
        UnidentifiedImageError,
        OSError,
        EOFError,
        SyntaxError,
        ValueError,
        struct.error,
    ) as exc:
        raise ValidationError(
            "This file is not a photo we can read (JPEG, PNG or WebP).", code="unreadable"
        ) from exc
    out = io.BytesIO()
    image.save(out, format="JPEG", quality=85, optimize=True)
    stem = (upload.name or "photo").rsplit("/", 1)[-1].rsplit(".", 1)[0][:60] or "photo"
    return ContentFile(out.getvalue(), name=f"{stem}.jpg")
