"""Behind a TLS-terminating proxy (HTTPS=true trusts its X-Forwarded-Proto), the addresses a
document prints start with https://."""

import pytest

from fleet.services.certificates import certificate_issue
from tests.documents.conftest import AT
from tests.documents.helpers import pdf_text

pytestmark = pytest.mark.django_db


def test_a_certificate_fetched_through_the_proxy_prints_an_https_verification_link(
    as_supervisor, history, supervisor, settings
):
    settings.SECURE_PROXY_SSL_HEADER = ("HTTP_X_FORWARDED_PROTO", "https")
    cert = certificate_issue(release_test=history.release_test, by=supervisor, at=AT)
    # As the proxy forwards it: the public host name, and the scheme the client used.
    response = as_supervisor.get(
        f"/certificates/{cert.number}.pdf", HTTP_HOST="testserver", HTTP_X_FORWARDED_PROTO="https"
    )
    assert response.status_code == 200
    text = pdf_text(response.content)
    assert f"https://testserver/verify/{cert.verification_code}/" in text
