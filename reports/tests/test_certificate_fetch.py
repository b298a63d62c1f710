"""The certificate renderer loads nothing but the project's own static files (reports/pdf_fetch.py): values
holding image or stylesheet references are printed as text, and the fetcher refuses every other URL."""
import io
import re
import socket

import pytest
from pypdf import PdfReader

from plant.models import Device, Site
from reports import certificate, pdf_fetch
from tests.helpers import user_with_role
from tests.helpers import calibrate, guarded_standard as standard

LOCAL_IMAGE = '<img src="file:///etc/hostname">'
REMOTE_SHEET = '<link rel="stylesheet" href="http://203.0.113.1/steal.css">'
REMOTE_IMAGE = '<img src="https://198.51.100.7/track.png?id=1">'
CSS_IMPORT = "<style>@import url(file:///etc/passwd);</style>"
CSS_URL = 'background:url("http://203.0.113.2/x.png")'
pytestmark = pytest.mark.small_world("guarded")


@pytest.fixture
def no_network(monkeypatch):
    """Any attempt to open a network connection fails the test."""
    def refuse(*args, **kwargs):
        raise AssertionError(f"network access attempted: {args!r}")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)


@pytest.fixture
def fetched(monkeypatch):
    """Every URL the renderer asks the fetcher for, with what the fetcher did."""
    calls = []
    original = pdf_fetch.static_only

    def recording(url, *args, **kwargs):
        try:
            result = original(url, *args, **kwargs)
        except pdf_fetch.RefusedFetch:
            calls.append((url, "refused"))
            raise
        calls.append((url, "served"))
        return result

    monkeypatch.setattr(pdf_fetch, "static_only", recording)
    return calls


def squeezed(text):
    """Without whitespace: the PDF wraps long values at places of its own (e.g. inside a URL)."""
    return re.sub(r"\s+", "", text)


def pdf_text(content):
    return squeezed("".join(page.extract_text() for page in PdfReader(io.BytesIO(content)).pages))


@pytest.mark.django_db
def test_references_in_stored_values_are_printed_as_text_and_fetched_nowhere(device, fetched, no_network):  # noqa: F811
    Device.objects.filter(pk=device.pk).update(serial=LOCAL_IMAGE[:60], maker=REMOTE_IMAGE[:80], model=CSS_URL[:80])
    Site.objects.filter(pk=device.area.site_id).update(address=f"{REMOTE_SHEET}\n{CSS_IMPORT}")
    event = calibrate(device, standard(0.25), "simple", [0.5])
    # notes, procedure and technician are free text typed by people; a signed record cannot be edited,
    # so the hostile values go in before signing through a fresh draft
    from calibration.models import CalibrationEvent, CalibrationPoint

    draft = CalibrationEvent.objects.create(device=device, performed_on=event.performed_on, technician=LOCAL_IMAGE,
                                            procedure=f"{REMOTE_IMAGE} {CSS_IMPORT}", notes=f"{LOCAL_IMAGE}\n{REMOTE_SHEET}",
                                            decision_rule="simple", created_by=user_with_role("technician", "t1"))
    draft.reference_standards.add(*event.reference_standards.all())
    CalibrationPoint.objects.create(event=draft, kind="as_found", nominal_pct=50, reference_value=20, indicated_value=20.1)
    draft.sign(by=REMOTE_SHEET[:120], role="Technician")

    pdf = certificate.certificate_pdf(certificate.load_event(draft.pk))
    assert fetched == []  # nothing in the certificate asked the renderer for any URL
    text = pdf_text(pdf)
    for shown in (LOCAL_IMAGE, REMOTE_IMAGE, REMOTE_SHEET, CSS_IMPORT, LOCAL_IMAGE[:60], CSS_URL):
        assert squeezed(shown) in text, shown


@pytest.mark.django_db
def test_the_fetcher_refuses_every_other_reference_that_reaches_the_renderer(fetched, no_network):
    from weasyprint import HTML

    markup = f"""<html><head>{REMOTE_SHEET}<link rel="stylesheet" href="file:///etc/passwd">
      <link rel="stylesheet" href="static/site.css"></head>
      <body style='{CSS_URL}'>{LOCAL_IMAGE}{REMOTE_IMAGE}<img src="../../etc/hostname">
      <img src="https://certificate.quenby.invalid/static/../../plant/settings.py"><p>text</p></body></html>"""
    pdf = HTML(string=markup, base_url=pdf_fetch.BASE_URL, url_fetcher=pdf_fetch.static_only).write_pdf()
    assert pdf.startswith(b"%PDF-")
    outcome = dict(fetched)
    assert outcome.pop(pdf_fetch.BASE_URL + "static/site.css") == "served"  # our own stylesheet, from disk
    assert outcome and set(outcome.values()) == {"refused"}, outcome
    assert {"file:///etc/hostname", "http://203.0.113.1/steal.css", "https://198.51.100.7/track.png?id=1",
            "file:///etc/passwd", "http://203.0.113.2/x.png"} <= set(outcome)


@pytest.mark.parametrize("url", [
    "file:///etc/passwd",
    "http://203.0.113.1/static/site.css",                   # another host
    "http://certificate.quenby.invalid/static/site.css",    # another scheme
    "https://certificate.quenby.invalid/etc/passwd",        # outside the static files
    "https://certificate.quenby.invalid/static/../plant/settings.py",
    "https://certificate.quenby.invalid/static/%2e%2e/plant/settings.py",
    "https://certificate.quenby.invalid/static/site.css?x=1",
    "https://certificate.quenby.invalid/static/",
    "https://certificate.quenby.invalid/static/missing.css",
    "https://user@certificate.quenby.invalid/static/site.css",
    "data:text/css,body{}",
    "ftp://203.0.113.1/x",
])
def test_refused_urls(url):
    with pytest.raises(pdf_fetch.RefusedFetch):
        pdf_fetch.static_only(url)


def test_a_static_file_is_served_from_disk(settings):
    served = pdf_fetch.static_only(pdf_fetch.BASE_URL + "static/site.css")
    with open(settings.BASE_DIR / "static" / "site.css", "rb") as handle:
        assert served["string"] == handle.read()
    assert served["mime_type"] == "text/css"
