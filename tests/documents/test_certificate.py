"""Release-test certificates: issuing, numbering, superseding, withdrawing, the PDF, and the
public verification page."""

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.urls import reverse

from fleet.documents.certificate import AcceptanceLine, prepare_certificate, render_certificate
from fleet.models import ReleaseCertificate
from fleet.services.certificates import certificate_issue, certificate_withdraw
from tests.documents.conftest import AT, CLOSED_AT, HOSTILE, bench_visit, release_test
from tests.documents.helpers import pdf_pages, pdf_text, render_png

pytestmark = pytest.mark.django_db

VERIFY = "http://testserver/verify/CODE/"


def issue(history, by, at=AT, test=None):
    return certificate_issue(release_test=test or history.release_test, by=by, at=at)


def test_it_issues_a_numbered_certificate_frozen_from_the_test(history, supervisor):
    cert = issue(history, supervisor)
    assert (cert.number, cert.year, cert.sequence) == ("RC-2026-0001", 2026, 1)
    assert cert.status == ReleaseCertificate.Status.ISSUED
    assert (cert.issued_at, cert.issued_by) == (AT, supervisor)
    assert (cert.tested_on, cert.kind, cert.load_kg) == (dt.date(2026, 3, 2), "load", 250.0)
    assert (cert.seconds_to_release, cert.motor_current_a) == (12.5, 1.8)
    assert (cert.max_seconds, cert.max_motor_current_a) == (60.0, 3.0)  # settings defaults
    assert cert.passed is True
    assert cert.valid_until == dt.date(2026, 8, 29)  # 2026-03-02 + 180 days
    assert len(cert.verification_code) >= 22


def test_numbers_run_in_sequence_within_a_year_and_restart_the_next(history, supervisor, unit):
    numbers = [issue(history, supervisor, at=AT + dt.timedelta(hours=h)).number for h in range(3)]
    assert numbers == ["RC-2026-0001", "RC-2026-0002", "RC-2026-0003"]
    next_year = issue(history, supervisor, at=dt.datetime(2027, 1, 2, 9, 0, tzinfo=dt.UTC))
    assert next_year.number == "RC-2027-0001"
    codes = set(ReleaseCertificate.objects.values_list("verification_code", flat=True))
    assert len(codes) == 4


def test_a_new_certificate_supersedes_the_current_one(history, supervisor):
    first = issue(history, supervisor)
    second = issue(history, supervisor, at=AT + dt.timedelta(days=1))
    first.refresh_from_db()
    assert first.status == ReleaseCertificate.Status.SUPERSEDED
    assert first.superseded_by == second
    assert first.status_changed_at == AT + dt.timedelta(days=1)
    assert first.status_reason == "Superseded by RC-2026-0002."
    assert second.status == ReleaseCertificate.Status.ISSUED
    assert ReleaseCertificate.objects.filter(status="issued").count() == 1


def test_a_failed_test_gets_no_certificate(unit, technician, supervisor):
    record = bench_visit(
        unit,
        technician,
        release_test(seconds_to_release=75.0, limit_switch_ok=False),
        close_at=CLOSED_AT,
        closer=supervisor,
    )
    with pytest.raises(ValidationError) as exc:
        certificate_issue(release_test=record.release_tests.get(), by=supervisor, at=AT)
    assert exc.value.code == "test_failed"
    assert "took 75 s, limit 60 s" in exc.value.messages[0]
    assert "limit switch not confirmed" in exc.value.messages[0]
    assert not ReleaseCertificate.objects.exists()


def test_a_test_on_an_open_record_gets_no_certificate(unit, technician, supervisor):
    record = bench_visit(unit, technician, release_test())
    with pytest.raises(ValidationError) as exc:
        certificate_issue(release_test=record.release_tests.get(), by=supervisor, at=AT)
    assert exc.value.code == "record_open"
    assert not ReleaseCertificate.objects.exists()


def test_withdrawing_needs_a_reason_and_a_current_certificate(history, supervisor):
    cert = issue(history, supervisor)
    with pytest.raises(ValidationError) as exc:
        certificate_withdraw(certificate=cert, reason="  ", by=supervisor, at=AT)
    assert exc.value.error_dict["reason"][0].code == "no_reason"
    done = certificate_withdraw(certificate=cert, reason=HOSTILE, by=supervisor, at=AT)
    assert (done.status, done.status_reason, done.status_changed_by) == (
        "withdrawn",
        HOSTILE,
        supervisor,
    )
    with pytest.raises(ValidationError) as exc:
        certificate_withdraw(certificate=cert, reason="again", by=supervisor, at=AT)
    assert exc.value.code == "not_current"


def test_it_prepares_the_certificate_document_exactly(history, supervisor):
    cert = issue(history, supervisor)
    doc = prepare_certificate(cert, verify_url=VERIFY)
    assert (doc.number, doc.status, doc.status_label, doc.status_note) == (
        "RC-2026-0001",
        "issued",
        "Issued",
        "",
    )
    assert (doc.issued_at, doc.issued_by) == (AT, "super")
    assert (doc.serial, doc.variant, doc.record_id) == (
        "TX-0001",
        "Test variant 1500",
        history.record.pk,
    )
    assert (doc.tested_on, doc.kind) == (dt.date(2026, 3, 2), "Under load")
    assert doc.lines == (
        AcceptanceLine("Load on the hook", "250 kg", "as recorded", None),
        AcceptanceLine("Time to release", "12.5 s", "≤ 60 s", True),
        AcceptanceLine("Peak motor current", "1.8 A", "≤ 3 A", True),
        AcceptanceLine("Limit switch", "confirmed", "confirmed", True),
        AcceptanceLine("Acoustic release command", "confirmed", "confirmed", True),
    )
    assert (doc.passed, doc.verdict_label, doc.verdict_icon) == (True, "PASS", "✔")
    assert (doc.valid_from, doc.valid_until) == (dt.date(2026, 3, 2), dt.date(2026, 8, 29))
    assert doc.verify_url == VERIFY
    assert len(doc.cautions) == 3


def test_the_pdf_shows_values_acceptance_verdict_validity_and_verify_address(history, supervisor):
    cert = issue(history, supervisor)
    data = render_certificate(prepare_certificate(cert, verify_url=VERIFY))
    pages = pdf_pages(data)
    text = " ".join(pages)
    for expected in (
        "Release test certificate",
        "RC-2026-0001",
        "TX-0001",
        "Under load, 2026-03-02",
        "Time to release 12.5 s ≤ 60 s ✔ yes",
        "Peak motor current 1.8 A ≤ 3 A ✔ yes",
        "Limit switch confirmed confirmed ✔ yes",
        "Verdict: ✔ PASS",
        "Valid from 2026-03-02",
        "Valid until 2026-08-29",
        f"Verify this certificate at {VERIFY}",
        "pinch points",
        "Tested by (technician)",
        "Certified by (supervisor)",
        "Signature",
    ):
        assert expected in text, expected
    assert "page 1 of 1" in pages[0]


def test_a_superseded_certificate_says_so_on_paper(history, supervisor):
    old = issue(history, supervisor)
    issue(history, supervisor, at=AT + dt.timedelta(days=2))
    old.refresh_from_db()
    text = pdf_text(render_certificate(prepare_certificate(old, verify_url=VERIFY)))
    assert "SUPERSEDED by RC-2026-0002 on 2026-04-03. Do not rely on this copy." in text


def test_hostile_variant_names_print_literally_and_bytes_repeat(history, supervisor):
    variant = history.unit.variant
    variant.name = HOSTILE
    variant.save()
    cert = ReleaseCertificate.objects.get(pk=issue(history, supervisor).pk)
    data = render_certificate(prepare_certificate(cert, verify_url=VERIFY))
    assert HOSTILE in pdf_text(data)
    assert data == render_certificate(prepare_certificate(cert, verify_url=VERIFY))


def test_page_one_renders_to_png(history, supervisor, tmp_path):
    cert = issue(history, supervisor)
    render_png(render_certificate(prepare_certificate(cert, verify_url=VERIFY)), tmp_path)


# --- views --------------------------------------------------------------------------------


def issue_url(history):
    return reverse("certificate-issue", args=[history.release_test.pk])


def test_a_supervisor_issues_from_the_record_page(as_supervisor, history):
    page = as_supervisor.get(history.record.get_absolute_url())
    assert issue_url(history).encode() in page.content
    response = as_supervisor.post(issue_url(history), {"next": history.record.get_absolute_url()})
    assert response.status_code == 302
    assert response["Location"] == history.record.get_absolute_url()
    cert = ReleaseCertificate.objects.get()
    page = as_supervisor.get(history.record.get_absolute_url())
    assert cert.number.encode() in page.content
    assert b"passing tests on closed records only" in page.content


def test_a_supervisor_issues_from_the_unit_page(as_supervisor, history):
    page = as_supervisor.get("/units/TX-0001/")
    assert issue_url(history).encode() in page.content
    response = as_supervisor.post(issue_url(history), {"next": "/units/TX-0001/"})
    assert response["Location"] == "/units/TX-0001/"
    assert ReleaseCertificate.objects.count() == 1


def test_issuing_never_redirects_off_site(as_supervisor, history):
    response = as_supervisor.post(issue_url(history), {"next": "https://elsewhere.invalid/"})
    assert response["Location"] == history.record.get_absolute_url()


def test_a_refused_issue_shows_the_reason(as_supervisor, unit, technician, supervisor):
    record = bench_visit(
        unit, technician, release_test(motor_current_a=4.2), close_at=CLOSED_AT, closer=supervisor
    )
    test = record.release_tests.get()
    response = as_supervisor.post(reverse("certificate-issue", args=[test.pk]), follow=True)
    assert b"motor drew 4.2 A, limit 3 A" in response.content
    assert b"no certificate is issued for a failed test" in response.content
    assert not ReleaseCertificate.objects.exists()


@pytest.mark.parametrize(
    ("persona", "expected"),
    [("as_technician", 403), ("as_viewer", 403), ("as_outsider", 403)],
)
def test_only_supervisors_issue_and_withdraw(request, persona, expected, history, supervisor):
    client = request.getfixturevalue(persona)
    assert client.post(issue_url(history)).status_code == expected
    cert = issue(history, supervisor)
    withdraw = reverse("certificate-withdraw", args=[cert.number])
    assert client.post(withdraw, {"reason": "x"}).status_code == expected
    cert.refresh_from_db()
    assert cert.status == "issued"
    assert ReleaseCertificate.objects.count() == 1


def test_issuing_is_post_only(as_supervisor, history):
    assert as_supervisor.get(issue_url(history)).status_code == 405


@pytest.mark.parametrize("persona", ["as_technician", "as_supervisor", "as_viewer"])
def test_every_role_downloads_the_pdf(request, persona, history, supervisor):
    cert = issue(history, supervisor)
    response = request.getfixturevalue(persona).get(f"/certificates/{cert.number}.pdf")
    assert response.status_code == 200
    assert response["Content-Type"] == "application/pdf"
    assert 'filename="RC-2026-0001.pdf"' in response["Content-Disposition"]
    text = pdf_text(response.content)
    assert f"http://testserver/verify/{cert.verification_code}/" in text


def test_outsiders_and_anonymous_visitors_get_no_pdf(client, as_outsider, history, supervisor):
    cert = issue(history, supervisor)
    assert as_outsider.get(f"/certificates/{cert.number}.pdf").status_code == 403
    response = client.get(f"/certificates/{cert.number}.pdf")
    assert response.status_code == 302
    assert response["Location"].startswith("/accounts/login/")


def test_a_supervisor_withdraws_with_a_reason(as_supervisor, history, supervisor):
    cert = issue(history, supervisor)
    withdraw = reverse("certificate-withdraw", args=[cert.number])
    as_supervisor.post(withdraw, {"reason": ""})
    cert.refresh_from_db()
    assert cert.status == "issued"
    as_supervisor.post(withdraw, {"reason": "wrong unit"})
    cert.refresh_from_db()
    assert (cert.status, cert.status_reason) == ("withdrawn", "wrong unit")


# --- public verification ------------------------------------------------------------------


def test_the_verification_page_works_without_login(client, history, supervisor):
    cert = issue(history, supervisor)
    cert.status_reason = "internal note that must not show"
    cert.save()
    response = client.get(f"/verify/{cert.verification_code}/")
    assert response.status_code == 200
    body = response.content.decode()
    for expected in (
        "RC-2026-0001",
        "TX-0001",
        "2026-03-02",
        "Pass",
        "2026-03-02 to 2026-08-29",
        "Issued",
    ):
        assert expected in body, expected
    assert "internal note" not in body
    assert "super" not in body.replace("superseded", "")  # no user names
    assert HOSTILE not in body  # no record notes or summary
    assert response["X-Robots-Tag"] == "noindex"


def test_a_made_up_code_says_no_such_certificate(client, history, supervisor):
    issue(history, supervisor)
    response = client.get("/verify/not-a-real-code-123/")
    assert response.status_code == 404
    assert b"No such certificate" in response.content
    assert b"RC-2026" not in response.content


def test_a_withdrawn_certificate_says_so_prominently(client, history, supervisor):
    cert = issue(history, supervisor)
    certificate_withdraw(certificate=cert, reason=HOSTILE, by=supervisor, at=AT)
    body = client.get(f"/verify/{cert.verification_code}/").content.decode()
    assert "WITHDRAWN." in body
    assert "Do not rely on it" in body
    assert "S&amp;P" not in body and "unclosed" not in body  # the reason stays internal


def test_a_superseded_certificate_names_its_successor(client, history, supervisor):
    old = issue(history, supervisor)
    issue(history, supervisor, at=AT + dt.timedelta(days=1))
    body = client.get(f"/verify/{old.verification_code}/").content.decode()
    assert "SUPERSEDED." in body
    assert "RC-2026-0002" in body
