"""A reference standard's own DCC read in: checked (schema, no DTD/entities/network, signature), shown, confirmed by
a reviewer, and the standard updated with its old values kept in its history and the file kept beside it."""
import datetime as dt
import re

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.test import Client

from calibration import dcc_read, dcc_schema
from calibration.models import ReferenceStandard, StandardDcc
from reports import certificate
from tests.helpers import user_with_role
from tests.helpers import at, enter, needs_schema, sign

pytestmark = [pytest.mark.django_db, needs_schema, pytest.mark.small_world("certificate")]


def example_bytes():
    return (dcc_schema.schema_dir() / "example-temperature-signed.xml").read_bytes()


@pytest.fixture
def reviewer():
    c = Client()
    c.force_login(user_with_role("reviewer", "rev"))
    return c


@pytest.fixture
def bench_standard():
    return ReferenceStandard.objects.create(identification="RS-9", description="Bench master", range_min=0,
                                            range_max=60, certificate_number="OLD-001", issuer="Old Lab",
                                            due_date=dt.date(2027, 1, 1), expanded_uncertainty=0.2,
                                            uncertainty_basis="pct_reading", interval_days=400)


def upload(c, standard, data, name="dcc.xml"):
    return c.post(f"/calibrations/standards/{standard.pk}/dcc/", {"file": SimpleUploadedFile(name, data)})


def text_of(response):
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", response.content.decode()))


def test_shared_example_is_read_shown_and_confirmed(reviewer, bench_standard):
    response = upload(reviewer, bench_standard, example_bytes(), "example.xml")
    assert response.status_code == 302, text_of(response)[:800]
    record = StandardDcc.objects.get()
    assert bytes(record.xml) == example_bytes()
    page = reviewer.get(response["Location"])
    text = text_of(page)
    assert "Kalibrierfirma GmbH" in text
    assert "GP_DCC_temperature_typical_1.2" in text
    assert "1957-08-13" in text
    assert "holds no flow results" in text
    assert "XML signature holds" in text
    assert "0.061" in text  # the measurement error's U in the example, in kelvin
    bench_standard.refresh_from_db()
    assert bench_standard.certificate_number == "OLD-001"  # nothing changes before the reviewer confirms
    form = {"certificate_number": "GP_DCC_temperature_typical_1.2", "issuer": "Kalibrierfirma GmbH",
            "calibrated_on": "1957-08-13", "interval_days": "730", "expanded_uncertainty": "0.2",
            "uncertainty_basis": "pct_reading"}
    assert reviewer.post(response["Location"], form).status_code == 302
    bench_standard.refresh_from_db()
    assert bench_standard.certificate_number == "GP_DCC_temperature_typical_1.2"
    assert bench_standard.issuer == "Kalibrierfirma GmbH"
    assert bench_standard.calibrated_on == dt.date(1957, 8, 13)
    assert bench_standard.due_date == dt.date(1957, 8, 13) + dt.timedelta(days=730)
    assert bench_standard.interval_days == 730
    versions = list(bench_standard.history.order_by("history_date"))
    assert versions[0].certificate_number == "OLD-001" and versions[0].issuer == "Old Lab"
    assert versions[-1].history_change_reason == f"Read from its DCC (file {record.pk}): GP_DCC_temperature_typical_1.2"
    assert versions[-1].history_user.username == "rev"
    record.refresh_from_db()
    assert record.confirmed and record.applied["certificate_number"] == ["OLD-001", "GP_DCC_temperature_typical_1.2"]
    detail = text_of(reviewer.get(f"/calibrations/standards/{bench_standard.pk}/"))
    assert "OLD-001" in detail and "GP_DCC_temperature_typical_1.2" in detail  # the history shows both
    file = reviewer.get(f"/calibrations/standards/{bench_standard.pk}/dcc/{record.pk}/file.xml")
    assert file.content == example_bytes()
    # a second confirmation changes nothing
    again = reviewer.post(response["Location"], {**form, "certificate_number": "OTHER"})
    assert again.status_code == 400
    bench_standard.refresh_from_db()
    assert bench_standard.certificate_number == "GP_DCC_temperature_typical_1.2"


def test_our_own_export_is_read_with_its_flow_results(client, device, standard, reviewer, bench_standard,  # noqa: F811
                                                      monkeypatch):
    event = sign(client, enter(client, device, standard), at(dt.date(2026, 11, 23)), monkeypatch)
    xml = certificate.certificate_xml(event)
    content = event.content_as_signed()
    response = upload(reviewer, bench_standard, xml, "ours.xml")
    assert response.status_code == 302, text_of(response)[:800]
    record = StandardDcc.objects.get()
    read = record.read
    assert read["certificate_number"] == content["certificate"]["number"]
    assert read["issuer"] == content["laboratory"]["name"]
    assert read["calibration_date"] == content["calibration"]["performed_on"]
    points = content["points"]["as_found"] + content["points"]["as_left"]
    assert read["flow_results"] > 0
    assert read["suggested_uncertainty"] == max(p["expanded_uncertainty"] for p in points)
    errors = [r for r in read["results"] if r["ref_type"] == "basic_measurementError"]
    assert [r["values"][0] for r in errors] == [p["error"] for p in points]
    assert [r["U"][0] for r in errors] == [p["expanded_uncertainty"] for p in points]
    html = reviewer.get(response["Location"]).content.decode()
    offered = float(re.search(r'name="expanded_uncertainty" value="([^"]+)"', html).group(1))
    assert offered == dcc_read.round_up(read["suggested_uncertainty"]) >= read["suggested_uncertainty"]
    page = text_of(reviewer.get(response["Location"]))
    assert "holds no flow results" not in page
    assert "carries no XML signature" in page
    assert content["certificate"]["number"] in page
    form = {"certificate_number": read["certificate_number"], "issuer": read["issuer"],
            "calibrated_on": read["calibration_date"], "interval_days": "365",
            "expanded_uncertainty": str(read["suggested_uncertainty"]), "uncertainty_basis": "pct_reading"}
    assert reviewer.post(response["Location"], form).status_code == 302
    bench_standard.refresh_from_db()
    assert bench_standard.expanded_uncertainty == read["suggested_uncertainty"]
    assert bench_standard.due_date == dt.date.fromisoformat(read["calibration_date"]) + dt.timedelta(days=365)


@pytest.mark.parametrize("value,expected", [
    # U to two significant digits (JCGM 100:2008 §7.2.6), rounded up (common practice); worked by hand
    (0.2939945976810081, 0.3), (0.061, 0.061), (1.234, 1.3), (12.01, 13.0), (0.0123, 0.013), (150.0, 150.0),
    (0.1 + 0.2, 0.3),  # binary noise above an exact two-digit value is not rounded up
])
def test_offered_uncertainty_is_rounded_up_to_two_significant_digits(value, expected):
    assert dcc_read.round_up(value) == pytest.approx(expected, rel=1e-12)


def test_a_long_certificate_number_fits_the_audit_trail(reviewer, bench_standard):
    long_number = "N" * 60  # the longest a standard's certificate number may be
    data = example_bytes().replace(b"GP_DCC_temperature_typical_1.2", long_number.encode())
    location = upload(reviewer, bench_standard, data)["Location"]
    form = {"certificate_number": long_number, "issuer": "Kalibrierfirma GmbH", "calibrated_on": "1957-08-13",
            "interval_days": "365", "expanded_uncertainty": "0.2", "uncertainty_basis": "pct_reading"}
    assert reviewer.post(location, form).status_code == 302
    bench_standard.refresh_from_db()
    assert bench_standard.certificate_number == long_number
    assert len(bench_standard.history.first().history_change_reason) <= 100


def test_confirm_form_refuses_bad_values_at_the_field(reviewer, bench_standard):
    location = upload(reviewer, bench_standard, example_bytes())["Location"]
    tomorrow = (dt.date.today() + dt.timedelta(days=2)).isoformat()
    response = reviewer.post(location, {"certificate_number": "X", "issuer": "Y", "calibrated_on": tomorrow,
                                        "interval_days": "0", "expanded_uncertainty": "-1",
                                        "uncertainty_basis": "pct_reading"})
    assert response.status_code == 400
    text = text_of(response)
    assert "is after today" in text
    assert "at least one day" in text
    assert "cannot be negative" in text
    bench_standard.refresh_from_db()
    assert bench_standard.certificate_number == "OLD-001"
    assert not StandardDcc.objects.get().confirmed


def test_invalid_dcc_names_location_and_reason_and_saves_nothing(reviewer, bench_standard):
    broken = example_bytes().replace(b"<dcc:beginPerformanceDate>1957-08-13", b"<dcc:beginPerformanceDate>13.08.1957")
    response = upload(reviewer, bench_standard, broken)
    assert response.status_code == 400
    message = re.search(r'id="dcc-error">(.*?)</p>', response.content.decode(), re.S).group(1)
    assert message.startswith("Not read, nothing saved: Line ")
    assert "beginPerformanceDate" in message and "13.08.1957" in message
    assert StandardDcc.objects.count() == 0
    not_xml = upload(reviewer, bench_standard, b"<dcc:digitalCalibrationCertificate>")
    assert "not well-formed XML" in text_of(not_xml) and StandardDcc.objects.count() == 0


@pytest.mark.parametrize("payload", [
    # an external entity (would read a local file) and a remote DTD: refused before anything reads them
    b'<?xml version="1.0"?><!DOCTYPE d [<!ENTITY x SYSTEM "file:///etc/passwd">]><d>&x;</d>',
    b'<?xml version="1.0"?><!DOCTYPE d SYSTEM "http://127.0.0.1:9/x.dtd"><d/>',
    # nested entities (an entity expansion bomb)
    b'<?xml version="1.0"?><!DOCTYPE d [<!ENTITY a "aaaa"><!ENTITY b "&a;&a;&a;&a;">]><d>&b;</d>',
])
def test_dtd_and_entities_are_refused(reviewer, bench_standard, payload):
    response = upload(reviewer, bench_standard, payload)
    assert response.status_code == 400
    assert "declares a DTD or entities" in text_of(response)
    assert StandardDcc.objects.count() == 0


def test_schema_location_in_the_file_is_not_followed(reviewer, bench_standard, monkeypatch):
    """The document names its schema by web address; validation uses the local files only (no socket opened)."""
    import socket

    def no_network(*args, **kwargs):
        raise AssertionError("network access while reading a DCC")

    monkeypatch.setattr(socket, "create_connection", no_network)
    monkeypatch.setattr(socket.socket, "connect", no_network)
    assert upload(reviewer, bench_standard, example_bytes()).status_code == 302


def test_changed_example_is_valid_but_its_signature_does_not_hold(reviewer, bench_standard):
    changed = example_bytes().replace(b"<dcc:content>Kalibrierfirma GmbH</dcc:content>",
                                      b"<dcc:content>Kalibrierfirma GmbH (edited)</dcc:content>", 1)
    location = upload(reviewer, bench_standard, changed)["Location"]
    assert "XML signature does not hold" in text_of(reviewer.get(location))


def test_technician_sees_standards_but_cannot_read_a_dcc(bench_standard):
    tech = Client()
    tech.force_login(user_with_role("technician", "tech"))
    assert tech.get("/calibrations/standards/").status_code == 200
    page = tech.get(f"/calibrations/standards/{bench_standard.pk}/")
    assert page.status_code == 200 and b"Read its DCC" not in page.content
    assert upload(tech, bench_standard, example_bytes()).status_code == 403
    assert StandardDcc.objects.count() == 0


def test_without_the_schema_files_the_upload_is_refused_naming_the_folder(reviewer, bench_standard, monkeypatch,
                                                                          tmp_path):
    data = example_bytes()
    monkeypatch.setenv(dcc_schema.ENV, str(tmp_path))
    response = upload(reviewer, bench_standard, data)
    assert response.status_code == 400
    assert f"are not in {tmp_path}" in text_of(response)
    assert StandardDcc.objects.count() == 0
