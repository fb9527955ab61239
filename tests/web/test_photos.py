"""Unit photos: decoded, oriented and re-encoded on upload; errors by ValidationError code."""

import io

import pytest
from django.core.exceptions import ValidationError
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse
from PIL import Image

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
