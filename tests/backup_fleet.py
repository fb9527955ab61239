"""A small fleet with one of everything a backup or an export must carry, built through the
services: units, deployments (one open), closed and open bench visits with entries, an
amendment, an issued and a superseded certificate, a unit photo and an anode photo."""

import datetime as dt
import io
from dataclasses import dataclass
from typing import Any

from django.core.files.base import ContentFile
from PIL import Image

from fleet.models import (
    AnodeReading,
    Deployment,
    ReleaseCertificate,
    ServiceRecord,
    Transponder,
    UnitPhoto,
)
from fleet.services.certificates import certificate_issue
from fleet.services.deployments import deployment_start
from fleet.services.records import amendment_create, service_record_save
from tests.builders import make_place, make_site, make_unit, make_user, make_variant, serviced_unit


def jpeg_bytes(colour: tuple[int, int, int]) -> bytes:
    out = io.BytesIO()
    Image.new("RGB", (40, 30), colour).save(out, format="JPEG")
    return out.getvalue()


@dataclass
class SmallFleet:
    units: list[Transponder]
    closed_record: ServiceRecord
    open_record: ServiceRecord
    certificate: ReleaseCertificate
    photos: dict[str, bytes]  # file name under MEDIA_ROOT -> bytes


def build_small_fleet(**_: Any) -> SmallFleet:
    tech = make_user("tech", "technician", first_name="Ana")
    boss = make_user("boss", "supervisor", is_staff=True)
    make_user("reader", "viewer", email="=HYPERLINK(1)@example.invalid")
    place = make_place()
    site = make_site()
    make_variant()
    first = make_unit(serial="TX-0001", place=place, notes="=SUM(A1:A9) typed by hand")
    second = make_unit(serial="TX-0002", acoustic_address="102", place=place)
    third = make_unit(serial="TX-0003", acoustic_address="103", place=place)
    day = dt.date(2026, 3, 2)
    closed = serviced_unit(first, by=tech, site=site, day=day)
    serviced_unit(second, by=tech, site=site, day=day)
    amendment_create(
        record=closed,
        target=closed.release_tests.get(),
        field_name="seconds_to_release",
        corrected_value="4.5",
        reason="Stopwatch read again from the video.",
        by=boss,
    )
    at = dt.datetime(2026, 3, 3, 10, 0, tzinfo=dt.UTC)
    release_test = closed.release_tests.get()
    certificate_issue(release_test=release_test, by=boss, at=at)
    current = certificate_issue(release_test=release_test, by=boss, at=at + dt.timedelta(hours=1))
    # The second unit goes back in the water: an open deployment.
    deployment_start(
        deployment=Deployment(
            unit=second,
            site=site,
            over_side_at=dt.datetime(2026, 3, 5, 7, 30, 15, 123456, tzinfo=dt.UTC),
            planned_days=90,
            planned_interrogations_per_day=100,
            transmit_power_step=1,
        ),
        by=tech,
        check_readiness=False,
    )
    # The third unit is on the bench: an open visit with an anode photo.
    position = third.variant.anode_positions.first()
    anode = AnodeReading(position=position, mass_g=350.0, note="+ pitting at the base")
    anode.photo = ContentFile(jpeg_bytes((200, 120, 40)), name="pitting.jpg")
    open_record = service_record_save(
        record=ServiceRecord(
            unit=third,
            opened_at=dt.datetime(2026, 3, 4, 8, 0, tzinfo=dt.UTC),
            technician=tech,
            place=place,
            summary="@ bench, left overnight",
        ),
        entries=[anode],
        by=tech,
    )
    photo = UnitPhoto(unit=first, caption="Release after the load test", uploaded_by=tech)
    photo.image.save("release.jpg", ContentFile(jpeg_bytes((30, 90, 150))), save=False)
    photo.save()
    anode.refresh_from_db()
    photos = {}
    for field in (photo.image, anode.photo):
        with field.open("rb") as handle:
            photos[field.name] = handle.read()
    return SmallFleet(
        units=[first, second, third],
        closed_record=closed,
        open_record=open_record,
        certificate=current,
        photos=photos,
    )
