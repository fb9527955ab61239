"""Unit photos: decoded, oriented and re-encoded on upload; errors by ValidationError code."""

import io
import struct
import time
import zlib

import pytest
from django.core.exceptions import ValidationError
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse
from PIL import Image, JpegImagePlugin, PngImagePlugin

from fleet.models import UnitPhoto
from fleet.photos import clean_photo

pytestmark = pytest.mark.django_db


def jpeg(size=(80, 40), exif=None) -> bytes:
    out = io.BytesIO()
    image = Image.new("RGB", size, (30, 90, 150))
    if exif is not None:
        image.save(out, format="JPEG", exif=exif)
    else:
        image.save(out, format="JPEG")
    return out.getvalue()


def test_a_technician_adds_a_photo(as_technician, unit, technician, settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path
    upload = SimpleUploadedFile("housing.jpeg", jpeg(), "image/jpeg")
    response = as_technician.post(
        reverse("unit-photo-add", args=[unit.serial]), {"image": upload, "caption": "Pitting"}
    )
    assert response.status_code == 302
    photo = UnitPhoto.objects.get()
    assert (photo.caption, photo.uploaded_by) == ("Pitting", technician)
    assert photo.image.name.startswith(f"units/{unit.serial}/")
    page = as_technician.get(unit.get_absolute_url()).content.decode()
    assert "Pitting" in page


def test_a_viewer_cannot_add_photos(as_viewer, unit):
    upload = SimpleUploadedFile("x.jpg", jpeg(), "image/jpeg")
    response = as_viewer.post(reverse("unit-photo-add", args=[unit.serial]), {"image": upload})
    assert response.status_code == 403
    assert not UnitPhoto.objects.exists()


def test_a_broken_file_is_refused_with_a_message(as_technician, unit):
    upload = SimpleUploadedFile("x.jpg", jpeg()[:150], "image/jpeg")
    response = as_technician.post(
        reverse("unit-photo-add", args=[unit.serial]), {"image": upload}, follow=True
    )
    assert "Photo not added" in response.content.decode()
    assert not UnitPhoto.objects.exists()


def test_reencoding_drops_exif_including_location():
    exif = Image.Exif()
    exif[0x010F] = "CameraMaker"  # Make
    exif[0x8825] = {1: "N", 2: (59.0, 1.0, 2.0)}  # GPS IFD
    cleaned = clean_photo(SimpleUploadedFile("g.jpg", jpeg(exif=exif), "image/jpeg"))
    with Image.open(io.BytesIO(cleaned.read())) as image:
        assert dict(image.getexif()) == {}


def test_a_truncated_jpeg_is_unreadable():
    # Pillow's verify() accepts some truncated JPEGs; a full decode does not.
    with pytest.raises(ValidationError) as caught:
        clean_photo(SimpleUploadedFile("t.jpg", jpeg((400, 300))[:-400], "image/jpeg"))
    assert caught.value.code == "unreadable"


def test_a_decompression_bomb_is_refused(monkeypatch):
    monkeypatch.setattr(Image, "MAX_IMAGE_PIXELS", 1000)
    with pytest.raises(ValidationError) as caught:
        clean_photo(SimpleUploadedFile("b.jpg", jpeg((100, 100)), "image/jpeg"))
    assert caught.value.code == "too_many_pixels"


# --- Hostile and heavy input -----------------------------------------------------------------

COMMENT = b"internal-note-do-not-publish"


def _upload(data: bytes, name: str = "p.jpg", content_type: str = "image/jpeg"):
    return SimpleUploadedFile(name, data, content_type)


def _jpeg_markers(data: bytes) -> list[int]:
    """The marker bytes of a JPEG's header segments, up to the start of scan (ITU-T T.81 B.1)."""
    markers, at = [], 2
    while at < len(data) and data[at] == 0xFF:
        marker = data[at + 1]
        markers.append(marker)
        if marker == 0xDA:  # start of scan: entropy-coded data follows
            break
        at += 2 + int.from_bytes(data[at + 2 : at + 4], "big")
    return markers


def _png_header_only(width: int, height: int) -> bytes:
    """A PNG that is a signature, an IHDR and an IEND: it claims a canvas and holds no pixels."""

    def chunk(kind: bytes, body: bytes) -> bytes:
        crc = zlib.crc32(kind + body).to_bytes(4, "big")
        return len(body).to_bytes(4, "big") + kind + body + crc

    ihdr = struct.pack(">IIBBBBB", width, height, 8, 6, 0, 0, 0)  # 8-bit RGBA
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IEND", b"")


def test_reencoding_drops_jpeg_comments_exif_and_colour_profile():
    exif = Image.Exif()
    exif[0x010F] = "CameraMaker"  # Make
    exif[0x8825] = {1: "N", 2: (59.0, 1.0, 2.0)}  # GPS IFD
    out = io.BytesIO()
    Image.new("RGB", (120, 90), (200, 40, 40)).save(
        out, format="JPEG", exif=exif, comment=COMMENT, icc_profile=b"\0" * 128
    )
    source = out.getvalue()
    assert 0xFE in _jpeg_markers(source)  # the source does carry a comment (COM)
    cleaned = clean_photo(_upload(source)).read()
    assert COMMENT not in cleaned
    # Only the markers a bare JPEG needs: no COM (FE), no APPn (E0..EF) but JFIF's APP0.
    assert [m for m in _jpeg_markers(cleaned) if m == 0xFE or 0xE1 <= m <= 0xEF] == []
    with Image.open(io.BytesIO(cleaned)) as image:
        assert "comment" not in image.info
        assert "icc_profile" not in image.info
        assert dict(image.getexif()) == {}


def test_reencoding_drops_png_text_chunks():
    info = PngImagePlugin.PngInfo()
    info.add_text("comment", COMMENT.decode())  # would become a JPEG comment if carried over
    info.add_text("Author", "someone-private")
    info.add_itxt("Description", "where-it-was-taken", zip=True)
    out = io.BytesIO()
    Image.new("RGB", (64, 64), (10, 120, 60)).save(out, format="PNG", pnginfo=info)
    cleaned = clean_photo(_upload(out.getvalue(), "p.png", "image/png")).read()
    for secret in (COMMENT, b"someone-private", b"where-it-was-taken", b"Author"):
        assert secret not in cleaned
    assert [m for m in _jpeg_markers(cleaned) if m == 0xFE or 0xE1 <= m <= 0xEF] == []


def test_a_forty_megapixel_png_is_refused_from_its_header_quickly():
    data = _png_header_only(8000, 5000)
    assert len(data) < 100
    started = time.perf_counter()
    with pytest.raises(ValidationError) as caught:
        clean_photo(_upload(data, "huge.png", "image/png"))
    assert time.perf_counter() - started < 0.5
    assert caught.value.code == "too_many_pixels"
    assert "more than 24 megapixels" in " ".join(caught.value.messages)


def test_a_photo_just_under_the_pixel_limit_is_accepted():
    # 6000 x 4000 = 24,000,000 pixels: the limit itself is allowed.
    out = io.BytesIO()
    Image.new("L", (6000, 4000), 128).save(out, format="JPEG", quality=50)
    cleaned = clean_photo(_upload(out.getvalue()))
    with Image.open(cleaned) as image:
        assert image.size == (2400, 1600)


def test_a_large_jpeg_is_decoded_already_scaled_down(monkeypatch):
    scales = []
    draft = JpegImagePlugin.JpegImageFile.draft

    def spy(self, mode, size):
        result = draft(self, mode, size)
        scales.append(self.decoderconfig[0])
        return result

    monkeypatch.setattr(JpegImagePlugin.JpegImageFile, "draft", spy)
    out = io.BytesIO()
    Image.new("RGB", (5472, 3648), (90, 90, 90)).save(out, format="JPEG", quality=50)
    cleaned = clean_photo(_upload(out.getvalue()))
    # The first request sets the decoder's scale (later ones cannot change it): 5472 x 3648 is
    # read as 2736 x 1824, still above 2400 x 1600. Pillow's thumbnail() alone would ask for
    # no less than twice the final size, and so decode every pixel.
    assert scales[0] == 2
    with Image.open(cleaned) as image:
        assert image.size == (2400, 1600)


def test_a_photo_turned_in_the_camera_comes_out_upright():
    exif = Image.Exif()
    exif[0x0112] = 6  # Orientation: rotate 90 degrees clockwise to display
    cleaned = clean_photo(_upload(jpeg((80, 40), exif=exif)))
    with Image.open(cleaned) as image:
        assert image.size == (40, 80)
        assert dict(image.getexif()) == {}


def test_transparent_parts_come_out_white():
    out = io.BytesIO()
    image = Image.new("RGBA", (40, 40), (0, 0, 0, 0))
    image.paste((0, 0, 255, 255), (0, 0, 20, 40))
    image.save(out, format="PNG")
    cleaned = clean_photo(_upload(out.getvalue(), "t.png", "image/png"))
    with Image.open(cleaned) as result:
        r, g, b = result.convert("RGB").getpixel((35, 20))
        assert min(r, g, b) > 240
        r, g, b = result.convert("RGB").getpixel((5, 20))
        assert b > 200 and r < 40


@pytest.mark.parametrize("fmt", ["GIF", "BMP", "TIFF"])
def test_formats_other_than_jpeg_png_and_webp_are_refused(fmt):
    out = io.BytesIO()
    Image.new("RGB", (20, 20), (1, 2, 3)).save(out, format=fmt)
    with pytest.raises(ValidationError) as caught:
        clean_photo(_upload(out.getvalue(), f"x.{fmt.lower()}", "image/octet-stream"))
    assert caught.value.code == "unreadable"


def test_a_webp_is_accepted():
    out = io.BytesIO()
    Image.new("RGB", (30, 20), (5, 6, 7)).save(out, format="WEBP")
    cleaned = clean_photo(_upload(out.getvalue(), "x.webp", "image/webp"))
    with Image.open(cleaned) as image:
        assert (image.format, image.size) == ("JPEG", (30, 20))
