"""Signed calibrations as Digital Calibration Certificates (DCC 3.2.0, D-SI 2.1.0): schema-valid, and read back by
an independent parse (the standard library's ElementTree, not the lxml the builder writes with) equal to the signed
content the PDF prints.

The schema files are not part of the project: they are looked for in ../shared/dcc-schema (or $QUENBY_DCC_SCHEMA_DIR);
the tests that need them skip, saying so, when they are absent.
"""
import datetime as dt
import io
import math
import warnings
import zipfile

import pytest

from calibration import dcc, dcc_schema
from plant import units
from calibration.models import CalibrationEvent
from reports import certificate
from tests.helpers import assert_matches_content, at, enter, needs_schema, pdf_text, read_back, sign

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("certificate")]


# An independent reading of our DCC (ElementTree, by element and refType) ---------------------------------------


# Units --------------------------------------------------------------------------------------------------------
def test_every_flow_unit_has_a_d_si_string_that_dsiunits_accepts():
    assert set(dcc.D_SI) == set(units.FLOW_UNITS)
    for code in units.FLOW_UNITS:
        assert dcc.dsi_flow_unit(code) == dcc.D_SI[code]
    for fixed in (dcc.PERCENT, dcc.CELSIUS, dcc.BAR, dcc.KG_PER_M3):
        assert dcc.check_unit(fixed) == fixed
    with pytest.raises(dcc.DccError, match="not a D-SI unit"):
        dcc.check_unit(r"\gallon\minute\tothe{-1}")  # no such D-SI unit: a US gallon must be marked non-SI
    with pytest.raises(dcc.DccError, match="no D-SI form"):
        dcc.dsi_flow_unit("furlongs/fortnight")


@pytest.mark.parametrize("a,b", [("L/min", "m3/h"), ("L/s", "m3/h"), ("kg/h", "kg/s"), ("t/h", "kg/h")])
def test_d_si_strings_mean_the_same_units_as_ours(a, b):
    """dsiunits' own scale factor between the two D-SI strings (an independent computation) equals pint's factor
    in plant/units.py, so each code maps to the unit it names."""
    from dsi_unit import DsiUnit

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        factor = DsiUnit(dcc.D_SI[a]).get_scale_factor(DsiUnit(dcc.D_SI[b]))  # factor · 1 a = 1 b
    assert math.isclose(1 / factor, units.convert(1.0, a, b), rel_tol=1e-12)


# Every demo certificate -----------------------------------------------------------------------------------------
@needs_schema
def test_every_demo_certificate_is_a_valid_dcc_that_reads_back_as_signed(demo_history):
    events = list(certificate.signed_events().select_related("countersignature"))
    assert len(events) > 200  # the demo history's signed calibrations
    seen_units = set()
    for event in events:
        xml = certificate.certificate_xml(event)
        root = dcc_schema.parse_untrusted(xml)
        assert dcc_schema.errors(root) == [], event.pk
        content = event.content_as_signed()
        assert_matches_content(xml, content)
        seen_units.add((content["environment"]["entered_units"], content["environment"]["device_units"]))
    assert ("kg/h", "m3/h") in seen_units  # converted readings (density) are among those checked


def test_reading_tolerates_keys_added_to_the_signed_content(demo_history):
    event = certificate.signed_events().first()
    content = event.content_as_signed()
    extended = {**content, "extra_section": {"anything": 1},
                "calibration": {**content["calibration"], "new_field": "x"}}
    points = {kind: [{**p, "new_point_field": 2} for p in rows] for kind, rows in content["points"].items()}
    extended["points"] = points
    # the digest differs (the content differs), everything else is written the same way
    assert dcc.build(extended).replace(extended_digest(extended), b"") == \
        dcc.build(content).replace(extended_digest(content), b"")


def extended_digest(content):
    from calibration.signed_content import digest

    return digest(content).encode()


# The download ----------------------------------------------------------------------------------------------------
@pytest.fixture
def signed(client, device, standard, monkeypatch):  # noqa: F811
    event = enter(client, device, standard, adjusted=True,
                  left=[(4, 4.0), (10, 10.01), (20, 20.0), (30, 30.01), (40, 40.0)])
    return sign(client, event, at(dt.date(2026, 11, 23)), monkeypatch)


def test_download_of_a_signed_calibration_and_refusal_for_a_draft(client, signed, device, standard):  # noqa: F811
    response = client.get(f"/calibrations/{signed.pk}/certificate.xml")
    assert response.status_code == 200
    assert response["Content-Type"].startswith("application/xml")
    assert f'filename="{certificate.certificate_number(signed)}.xml"' in response["Content-Disposition"]
    assert_matches_content(response.content, signed.content_as_signed())
    assert read_back(response.content)["persons"]["quenby_signedBy"] == "B. Signatory"
    draft = enter(client, device, standard)
    refused = client.get(f"/calibrations/{draft.pk}/certificate.xml")
    assert refused.status_code == 404
    with pytest.raises(ValueError, match="signed calibrations only"):
        certificate.certificate_xml(draft)


def test_xml_and_pdf_state_the_same_certificate_and_content(client, signed):
    """The PDF prints the certificate number and the SHA-256 of the content; the XML carries the same two, and its
    values read back equal to that content (assert_matches_content)."""
    xml = client.get(f"/calibrations/{signed.pk}/certificate.xml").content
    _, text = pdf_text(client.get(f"/calibrations/{signed.pk}/certificate.pdf").content)
    got = read_back(xml)
    flat = "".join(text.split())
    assert got["number"] in flat and got["digest"] in flat
    first = signed.content_as_signed()["points"]["as_found"][0]
    assert f"{first['reference_value']:g}" in text


def test_countersignature_is_named_as_authorising_person(client, signed):
    from django.test import Client

    from tests.helpers import user_with_role

    reviewer = user_with_role("reviewer", "r-one")
    other = Client()
    other.force_login(reviewer)
    assert other.post(f"/calibrations/{signed.pk}/countersign/").status_code == 302
    signed.refresh_from_db()
    xml = client.get(f"/calibrations/{signed.pk}/certificate.xml").content
    assert read_back(xml)["persons"]["quenby_authorisedBy"] == signed.countersignature.name


def test_a_user_without_calibration_rights_gets_no_xml(signed):
    from django.test import Client

    anonymous = Client()
    assert anonymous.get(f"/calibrations/{signed.pk}/certificate.xml").status_code in (302, 403)


def test_zip_holds_each_xml_beside_its_pdf(client, signed):
    day = signed.signed_at.date().isoformat()
    archive = zipfile.ZipFile(io.BytesIO(client.get(f"/certificates.zip?start={day}&end={day}").content))
    number = certificate.certificate_number(signed)
    assert sorted(archive.namelist()) == [f"{number}.pdf", f"{number}.xml"]
    assert_matches_content(archive.read(f"{number}.xml"), signed.content_as_signed())


def test_results_page_links_the_xml_beside_the_pdf(client, signed):
    page = client.get(f"/calibrations/{signed.pk}/").content.decode()
    pdf_at = page.index(f"/calibrations/{signed.pk}/certificate.pdf")
    xml_at = page.index(f"/calibrations/{signed.pk}/certificate.xml")
    assert 0 < xml_at - pdf_at < 400
    assert "unsigned" in page  # no laboratory key configured in the test settings
    assert CalibrationEvent.objects.filter(pk=signed.pk, state="signed").exists()
