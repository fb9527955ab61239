"""The example files on the import page import cleanly into a freshly seeded demo."""

from io import StringIO

import pytest
from django.contrib.auth import get_user_model
from django.core.management import call_command
from django.utils import timezone

from fleet.due.snapshot import rebuild_differences
from fleet.imports.examples import EXAMPLES, example_path
from fleet.models import Deployment, ServiceRecord, Transponder
from fleet.services.imports import import_commit

pytestmark = pytest.mark.django_db


def test_it_imports_every_example_file_into_the_seeded_demo_without_a_problem(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
    call_command("seed_demo", "--force", stdout=StringIO())
    supervisor = get_user_model().objects.get(username="supervisor")
    units_before = Transponder.objects.count()

    for name, kind, _ in EXAMPLES:
        path = example_path(name)
        outcome = import_commit(kind=kind, data=path.read_bytes(), file_name=name, by=supervisor)
        assert outcome.problems == [], name

    imported = Transponder.objects.filter(serial__startswith="EX-")
    assert imported.count() == 3 == Transponder.objects.count() - units_before
    assert ServiceRecord.objects.filter(unit__in=imported, closed_at__isnull=False).count() == 4
    assert Deployment.objects.filter(unit__in=imported).count() == 3
    assert rebuild_differences(at=timezone.now())[0] == []
