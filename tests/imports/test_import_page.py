"""The import page as each persona: supervisors preview and confirm; nobody else gets in."""

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from fleet.imports import staging
from fleet.models import ImportBatch, Transponder
from tests.imports.files import csv_bytes

pytestmark = pytest.mark.django_db

HEADER = ["serial", "variant", "acoustic_address", "turnaround_delay_ms"]


def _upload(client, data: bytes, kind: str = "units"):
    return client.post(
        reverse("import"), {"kind": kind, "file": SimpleUploadedFile("units.csv", data)}
    )


@pytest.mark.parametrize("persona", ["as_technician", "as_viewer", "as_outsider"])
@pytest.mark.parametrize(
    ("method", "name", "args"),
    [
        ("get", "import", []),
        ("post", "import", []),
        ("post", "import-confirm", []),
        ("get", "import-template", ["units"]),
        ("get", "import-example", ["units.csv"]),
    ],
)
def test_it_forbids_everyone_but_supervisors(request, persona, method, name, args, variant):
    client = request.getfixturevalue(persona)
    data = csv_bytes([HEADER, ["TX-7", variant.name, "17", "12.5"]])
    payload = {"kind": "units", "file": SimpleUploadedFile("u.csv", data)}

    response = getattr(client, method)(
        reverse(name, args=args), payload if method == "post" else {}
    )

    assert response.status_code == 403
    assert not Transponder.objects.exists()


def test_it_links_the_page_for_supervisors_only(as_supervisor, as_technician):
    assert reverse("import") in as_supervisor.get(reverse("dashboard")).content.decode()
    assert reverse("import") not in as_technician.get(reverse("dashboard")).content.decode()


def test_it_previews_an_upload_then_writes_it_on_confirm(as_supervisor, variant):
    data = csv_bytes(
        [HEADER, ["TX-7", variant.name, "17", "12.5"], ["TX-8", variant.name, "18", "9"]]
    )

    preview = _upload(as_supervisor, data)

    page = preview.content.decode()
    assert preview.status_code == 200
    assert "2 transponders" in page and "TX-8" in page
    assert not Transponder.objects.exists()  # nothing written before the confirm
    digest = preview.context["outcome"].checksum
    assert staging.staged(digest) == data

    confirmed = as_supervisor.post(
        reverse("import-confirm"), {"kind": "units", "checksum": digest, "file_name": "units.csv"}
    )

    assert confirmed.status_code == 302
    assert sorted(Transponder.objects.values_list("serial", flat=True)) == ["TX-7", "TX-8"]
    assert ImportBatch.objects.get().file_name == "units.csv"
    assert staging.staged(digest) is None
    again = _upload(as_supervisor, data)
    assert again.status_code == 400 and "already imported" in again.content.decode()


def test_it_shows_every_bad_row_and_offers_no_confirm(as_supervisor, variant):
    data = csv_bytes(
        [HEADER, ["TX-7", variant.name, "17", "NaN"], ["tx 8", variant.name, "18", "inf"]]
    )

    response = _upload(as_supervisor, data)

    page = response.content.decode()
    assert response.status_code == 400
    assert "3 problems; nothing was imported." in page
    assert "&#x27;NaN&#x27; is not a finite number." in page
    assert "&#x27;inf&#x27; is not a finite number." in page
    assert "Use 2 to 31 capital letters" in page
    assert reverse("import-confirm") not in page
    assert not Transponder.objects.exists()


def test_it_asks_for_the_file_again_when_no_file_waits_under_that_checksum(as_supervisor):
    response = as_supervisor.post(
        reverse("import-confirm"), {"kind": "units", "checksum": "a" * 64, "file_name": "u.csv"}
    )

    assert response.status_code == 302
    assert not Transponder.objects.exists()


def test_it_serves_each_template_and_example(as_supervisor):
    template = as_supervisor.get(reverse("import-template", args=["visits"]))
    example = as_supervisor.get(reverse("import-example", args=["units.csv"]))

    assert template.content.decode().startswith("unit,visit_opened_at,visit_closed_at,")
    assert b"EX-0101" in b"".join(example.streaming_content)
    assert as_supervisor.get(reverse("import-template", args=["ships"])).status_code == 404
    assert as_supervisor.get(reverse("import-example", args=["passwords.csv"])).status_code == 404
