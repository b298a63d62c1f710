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
import xml.etree.ElementTree as ET
import zipfile

import pytest

from calibration import dcc, dcc_schema
from plant import units
from calibration.models import CalibrationEvent
from reports import certificate
from tests.test_certificate import at, client, enter, meter, pdf_text, sign, standard  # noqa: F401 (fixtures)

pytestmark = pytest.mark.django_db
NS = {"dcc": "https://ptb.de/dcc", "si": "https://ptb.de/si", "ds": "http://www.w3.org/2000/09/xmldsig#"}
needs_schema = pytest.mark.skipif(
    not dcc_schema.schema_available(),
    reason=f"DCC schema files not found in {dcc_schema.schema_dir()} (set {dcc_schema.ENV}); schema validation skipped")


# An independent reading of our DCC (ElementTree, by element and refType) ---------------------------------------
def _ref(element):
    return (element.get("refType") or "").split()


def _real(quantity):
    real = quantity.find("si:real", NS)
    out = {"value": float(real.find("si:value", NS).text), "unit": real.find("si:unit", NS).text}
    unc = real.find("si:expandedUnc", NS)
    if unc is not None:
        out.update(U=float(unc.find("si:uncertainty", NS).text), k=float(unc.find("si:coverageFactor", NS).text),
                   p=float(unc.find("si:coverageProbability", NS).text))
    return out


def read_back(xml: bytes) -> dict:
    root = ET.fromstring(xml)
    core = root.find("dcc:administrativeData/dcc:coreData", NS)
    out = {
        "number": core.find("dcc:uniqueIdentifier", NS).text,
        "performed_on": core.find("dcc:beginPerformanceDate", NS).text,
        "issued_on": core.find("dcc:issueDate", NS).text,
        "digest": next(i.find("dcc:value", NS).text for i in core.iterfind("dcc:identifications/dcc:identification", NS)
                       if "quenby_contentSha256" in _ref(i)),
        "serial": next((i.find("dcc:value", NS).text for i in root.iterfind(
            "dcc:administrativeData/dcc:items/dcc:item/dcc:identifications/dcc:identification", NS)
            if i.find("dcc:issuer", NS).text == "manufacturer"), ""),
        "persons": {(_ref(p) or [""])[0]: p.find("dcc:person/dcc:name/dcc:content", NS).text
                    for p in root.iterfind("dcc:administrativeData/dcc:respPersons/dcc:respPerson", NS)},
        "verdicts": {}, "points": {}, "standards": [], "conditions": {},
    }
    for statement in root.iterfind("dcc:administrativeData/dcc:statements/dcc:statement", NS):
        refs = _ref(statement)
        if "basic_conformity" in refs:
            status = statement.find("dcc:conformity", NS)
            key = "as_found" if "quenby_asFound" in refs else "as_left"
            out["verdicts"][key] = status.text if status is not None else None
        if "quenby_decisionRule" in refs:
            out["rule_text"] = statement.find("dcc:declaration/dcc:content", NS).text
    for result_set in root.iterfind("dcc:measurementResults/dcc:measurementResult", NS):
        kind = "as_found" if "quenby_asFound" in _ref(result_set) else "as_left"
        rows = []
        for point in result_set.iterfind("dcc:results/dcc:result/dcc:data/dcc:list", NS):
            row = {}
            for q in point.iterfind("dcc:quantity", NS):
                row[_ref(q)[0]] = _real(q)
                status = q.find("dcc:measurementMetaData/dcc:metaData/dcc:conformity", NS)
                if status is not None:
                    row["conformity"] = status.text
            rows.append(row)
        out["points"][kind] = rows
        if kind == "as_found":
            for equipment in result_set.iterfind("dcc:measuringEquipments/dcc:measuringEquipment", NS):
                ids = {_ref(i)[0]: i.find("dcc:value", NS).text
                       for i in equipment.iterfind("dcc:identifications/dcc:identification", NS)}
                notes = {_ref(c)[0]: c.text for c in equipment.iterfind("dcc:description/dcc:content", NS) if _ref(c)}
                quantities = {_ref(q)[0]: _real(q) for q in equipment.iterfind(
                    "dcc:measuringEquipmentQuantities/dcc:measuringEquipmentQuantity", NS)}
                out["standards"].append({"identification": ids.get("quenby_identification"),
                                         "certificate_number": ids.get("quenby_certificateNumber"),
                                         "due_date": notes.get("quenby_dueDate"), "issuer": notes.get("quenby_issuer"),
                                         "U": quantities.get("basic_expandedUncertainty")})
            for condition in result_set.iterfind("dcc:influenceConditions/dcc:influenceCondition", NS):
                out["conditions"][_ref(condition)[0]] = _real(condition.find("dcc:data/dcc:quantity", NS))
    return out


CONFORMITY = {"pass": "pass", "fail": "fail", "conditional pass": "conditionalPass",
              "conditional fail": "conditionalFail"}


def assert_matches_content(xml: bytes, content: dict):
    """Every value the certificate prints, read back from the XML, equals the frozen content (exact floats)."""
    from calibration.signed_content import digest

    got = read_back(xml)
    assert got["number"] == content["certificate"]["number"]
    assert got["issued_on"] == content["certificate"]["issued_on"]
    assert got["performed_on"] == content["calibration"]["performed_on"]
    assert got["digest"] == digest(content)
    assert got["serial"] == (content["device"]["serial"] or "")
    assert got["persons"]["quenby_performedBy"] == content["calibration"]["technician"]
    assert got["persons"]["quenby_signedBy"] == content["signature"]["signed_by"]
    decision = content["decision"]
    assert got["rule_text"] == decision["statements"]["rule"]
    for kind in ("as_found", "as_left"):
        expected = {True: "pass", False: "fail", None: None}[decision[f"{kind}_in_tolerance"]]
        assert got["verdicts"][kind] == expected
    env = content["environment"]
    percent = content["mpe"]["basis"] != "absolute"
    for kind in ("as_found", "as_left"):
        points = content["points"][kind]
        assert len(got["points"].get(kind, [])) == len(points)
        for row, point in zip(got["points"].get(kind, []), points):
            assert row["quenby_nominal"]["value"] == point["nominal_pct"]
            assert row["basic_referenceValue"]["value"] == point["reference_value"]
            assert row["basic_referenceValue"]["unit"] == dcc.D_SI[env["device_units"]]
            assert row["basic_measuredValue"]["value"] == point["indicated"]
            error = row["basic_measurementError"]
            assert error["value"] == point["error"]
            assert error["U"] == point["expanded_uncertainty"]
            assert error["k"] == point["coverage_factor"]
            assert error["p"] == 0.95  # JCGM 100:2008 §6.2: the coverage probability of the stated U
            assert error["unit"] == (r"\percent" if percent else dcc.D_SI[env["device_units"]])
            assert row["quenby_mpe"]["value"] == point["mpe"]
            assert row.get("conformity") == CONFORMITY.get(point["decision"])
            if env["converted"]:
                assert row["quenby_referenceEntered"]["value"] == point["reference_entered"]
                assert row["quenby_referenceEntered"]["unit"] == dcc.D_SI[env["entered_units"]]
    assert [(s["identification"], s["certificate_number"], s["due_date"], s["U"]["value"]) for s in got["standards"]] \
        == [(s["identification"], s["certificate_number"], s["due_date"], s["expanded_uncertainty"])
            for s in content["standards"]]
    for ref, key in (("basic_temperature", "ambient_temp_c"), ("quenby_fluidTemperature", "fluid_temp_c"),
                     ("quenby_linePressure", "pressure_bar"), ("quenby_density", "density_kg_m3")):
        if env[key] is None:
            assert ref not in got["conditions"]
        elif content["points"]["as_found"]:
            assert got["conditions"][ref]["value"] == env[key]


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
def signed(client, meter, standard, monkeypatch):  # noqa: F811
    event = enter(client, meter, standard, adjusted=True,
                  left=[(4, 4.0), (10, 10.01), (20, 20.0), (30, 30.01), (40, 40.0)])
    return sign(client, event, at(dt.date(2026, 11, 23)), monkeypatch)


def test_download_of_a_signed_calibration_and_refusal_for_a_draft(client, signed, meter, standard):  # noqa: F811
    response = client.get(f"/calibrations/{signed.pk}/certificate.xml")
    assert response.status_code == 200
    assert response["Content-Type"].startswith("application/xml")
    assert f'filename="{certificate.certificate_number(signed)}.xml"' in response["Content-Disposition"]
    assert_matches_content(response.content, signed.content_as_signed())
    assert read_back(response.content)["persons"]["quenby_signedBy"] == "B. Signatory"
    draft = enter(client, meter, standard)
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

    from tests.conftest import user_with_role

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
