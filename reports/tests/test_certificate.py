"""Calibration certificates (ISO/IEC 17025:2017 §7.8.2.1 / §7.8.4.1): single PDF and the batch ZIP."""
import datetime as dt
import io
import re
import zipfile

import pytest
from django.urls import reverse
from django.utils import timezone

from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard
from plant.models import Device
from reports.certificate import DEFAULT_LAB, certificate_number, drift_history
from reports.charts import drift_chart_svg
from tests.helpers import at, certificate_entry_data as entry_data, enter, flat, has, pdf_text, sign

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("certificate")]
TODAY = dt.date(2026, 11, 20)
FOUND = [(4, 4.01), (10, 10.02), (20, 20.05), (30, 29.97), (40, 40.04)]  # tablet_entry's default rows


def test_certificate_contains_every_required_element(client, signed_event, standard):
    url = reverse("reports:certificate", args=[signed_event.pk])
    assert url == f"/calibrations/{signed_event.pk}/certificate.pdf"
    response = client.get(url)
    assert response.status_code == 200
    assert response["Content-Type"] == "application/pdf"
    number = f"MWP-CAL-2026-{signed_event.pk:06d}"
    assert number in response["Content-Disposition"]
    reader, raw = pdf_text(response.content)
    text = flat(raw)
    assert "Calibration certificate" in text
    assert DEFAULT_LAB["name"] in text and DEFAULT_LAB["address"] in text
    assert has(text, "Certificate number:", number)
    pages = len(reader.pages)
    for i, page in enumerate(reader.pages, start=1):
        assert f"Page {i} of {pages}" in flat(page.extract_text())
        assert number in page.extract_text()  # identified on every page
    assert "Page 1 of" in text
    # customer / location
    assert "Marrowfield Works" in text and "1 Brine Street" in text and "Pickling hall" in text
    # item
    assert "FT-101" in text and "SN-778812" in text and "Electromagnetic" in text and "DN50" in text
    assert "Ternwell Flow / TW-300" in text and has(text, "Calibrated range", "0 to 40 m³/h")
    # dates: calibration and issue (= signing date)
    assert has(text, "Date of calibration", "2026-11-20")
    assert has(text, "Date of issue", "2026-11-23")
    # method and conditions, the item as received and deviations (ISO/IEC 17025 §7.8.2.1, §7.8.3.1 a)
    assert has(text, "Condition as received", "Installed, in service, no visible damage")
    assert has(text, "Deviations from the method", "None")
    assert "WI-CAL-07 comparison against portable master meter, five points" in text
    assert has(text, "Ambient temperature", "18 °C") and has(text, "Fluid temperature", "12 °C")
    assert has(text, "Line pressure", "3 bar g")
    assert has(text, "Adjustment made", "Yes")
    # results with units, each point's reference value, in both tables
    assert "Results — as found" in text and "Results — as left" in text
    assert "(m³/h)" in text and "(% of reading)" in text and "U, 95 %" in text
    for ref, _ in FOUND:
        assert text.count(f"{ref:.4f}") >= 2, ref
    found_20 = signed_event.points.get(kind="as_found", reference_value=20)
    # no repeats: nu_eff = inf, k = 1.96; U = 1.96 x 0.05 % = 0.098 %, TUR = 0.5 / 0.098 = 5.1:1 (Z540.3)
    assert has(text, "20.0000 20.0500", f"{found_20.error:.3f} 0.500 0.098", "1.96 (∞)", "5.1:1", "pass")
    # statement of conformity with the decision rule
    assert signed_event.get_decision_rule_display() in text
    assert "Simple acceptance (ILAC-G8, w = 0)" in text
    assert has(text, "As found", "IN TOLERANCE") and has(text, "As left", "IN TOLERANCE")
    # traceability: reference standard, its certificate number and due date
    assert has(text, "RS-7") and has(text, standard.certificate_number + ",", "issuer not recorded", "2027-06-01")
    # signatory
    # ISO/IEC 17025:2017 §7.8.2.1 k: the technician signs off; the authoriser is a reviewer who countersigns
    assert has(text, "Signed off by", "B. Signatory (Technician), 2026-11-23")
    assert has(text, "Authorised by", "— (not yet countersigned by a reviewer)")
    assert f"Drift history of device S/N {signed_event.device.serial}" in text
    assert "supersedes" not in text
    assert f"End of certificate {number}" in text


def test_lab_identity_comes_from_settings_at_sign_off(client, device, standard, settings, monkeypatch):
    """The laboratory named is the one of the settings when the record was signed (ISO/IEC 17025:2017 §7.8.2.1 b);
    a later change of the settings does not reach an issued certificate."""
    settings.CALIBRATION_LAB = {"name": "Test Lab Ltd", "address": "9 Test Road, Testville"}
    event = sign(client, enter(client, device, standard), at(TODAY), monkeypatch)
    _, text = pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)
    assert "Test Lab Ltd" in text and "9 Test Road, Testville" in text
    assert DEFAULT_LAB["name"] not in text
    settings.CALIBRATION_LAB = {"name": "Other Lab Ltd", "address": "1 Elsewhere"}
    _, again = pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)
    assert again == text


def test_draft_has_no_certificate(client, device, standard):
    draft = enter(client, device, standard)
    assert client.get(f"/calibrations/{draft.pk}/certificate.pdf").status_code == 404
    assert client.get("/calibrations/999999/certificate.pdf").status_code == 404


def test_out_of_tolerance_guarded_and_no_adjustment(client, device, standard, monkeypatch):
    found = [(10, 10.05), (20, 20.2)]
    event = enter(client, device, standard, found=found, **{"ev-decision_rule": "guarded"})
    sign(client, event, at(TODAY), monkeypatch)
    _, raw = pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)
    text = flat(raw)
    assert "Guarded acceptance (ILAC-G8, w = U)" in text
    assert "conditional pass" in text and "fail" in text
    assert has(text, "As found", "OUT OF TOLERANCE")
    assert has(text, "Adjustment made", "No")
    assert "no adjustment was made, so the as-left condition is the as-found condition" in text


def test_correction_says_what_it_supersedes(client, device, standard, signed_event, monkeypatch):
    correction = CalibrationEvent.objects.create(
        device=device, performed_on=TODAY, technician="A. Fieldtech", procedure="Re-entry of WI-CAL-07 results",
        supersedes=signed_event, created_by=signed_event.created_by,
        correction_reason="As-found indications entered against the wrong nominal points",
    )
    correction.reference_standards.add(standard)
    for i, (ref, ind) in enumerate(FOUND):
        CalibrationPoint.objects.create(event=correction, kind="as_found", nominal_pct=[10, 25, 50, 75, 100][i],
                                        reference_value=ref, indicated_value=ind)
    sign(client, correction, at(dt.date(2026, 11, 25)), monkeypatch)
    _, text = pdf_text(client.get(f"/calibrations/{correction.pk}/certificate.pdf").content)
    text = flat(text)
    assert f"supersedes certificate {certificate_number(signed_event)}" in text
    assert "Reason for the correction: As-found indications entered against the wrong nominal points" in text
    # the corrected event is replaced by its correction in the drift history
    assert [row[0] for row in drift_history(correction)] == [TODAY]


def test_drift_history_and_chart(client, device, standard, monkeypatch):
    first = sign(client, enter(client, device, standard, performed_on=dt.date(2025, 11, 20),
                               found=[(10, 10.02), (20, 20.02)]), at(dt.date(2025, 11, 21)), monkeypatch)
    second = sign(client, enter(client, device, standard, performed_on=TODAY, adjusted=True,
                                found=[(10, 10.09), (20, 19.9)], left=[(10, 10.01), (20, 20.0)]),
                  at(TODAY), monkeypatch)
    enter(client, device, standard, performed_on=dt.date(2026, 11, 30))  # draft: not in the history
    history = drift_history(second)
    assert [row[0] for row in history] == [first.performed_on, second.performed_on]
    assert history[0][1] == pytest.approx(0.2) and history[0][2] == pytest.approx(0.2)  # no as-left: as found
    assert history[1][1] == pytest.approx(0.9) and history[1][2] == pytest.approx(0.1)
    assert [row[0] for row in drift_history(first)] == [first.performed_on]
    svg = drift_chart_svg(history, 0.5, 640, 230, unit="% of reading")
    assert svg.startswith("<svg") and svg.endswith("</svg>")
    assert svg.count("<circle") == 3  # two as-found markers + legend
    assert "2025-11-20" in svg and "2026-11-20" in svg and "+MPE 0.5" in svg
    assert "<svg" in drift_chart_svg([], 1.0, 300, 150) and "No signed calibrations" in drift_chart_svg([], 1.0, 300, 150)
    with pytest.raises(ValueError):
        drift_chart_svg(history, 0, 300, 150)


def test_zip_has_one_certificate_per_event_signed_in_range(client, device, standard, monkeypatch):
    before = sign(client, enter(client, device, standard, performed_on=dt.date(2026, 10, 1)),
                  at(dt.date(2026, 10, 2)), monkeypatch)
    inside_a = sign(client, enter(client, device, standard, performed_on=dt.date(2026, 11, 2)),
                    at(dt.date(2026, 11, 3), hour=0), monkeypatch)
    inside_b = sign(client, enter(client, device, standard, performed_on=dt.date(2026, 11, 10)),
                    at(dt.date(2026, 11, 30), hour=23), monkeypatch)
    after = sign(client, enter(client, device, standard, performed_on=dt.date(2026, 11, 30)),
                 at(dt.date(2026, 12, 1)), monkeypatch)
    enter(client, device, standard, performed_on=dt.date(2026, 11, 15))  # draft in range: no certificate
    response = client.get("/certificates.zip?start=2026-11-03&end=2026-11-30")
    assert response.status_code == 200
    assert response["Content-Type"] == "application/zip"
    archive = zipfile.ZipFile(io.BytesIO(response.content))
    names = sorted(archive.namelist())
    assert names == sorted(f"{certificate_number(e)}.{kind}" for e in (inside_a, inside_b) for kind in ("pdf", "xml"))
    for event in (inside_a, inside_b):
        _, text = pdf_text(archive.read(f"{certificate_number(event)}.pdf"))
        assert certificate_number(event) in text
    assert f"{certificate_number(before)}.pdf" not in names and f"{certificate_number(after)}.pdf" not in names
    empty = zipfile.ZipFile(io.BytesIO(client.get("/certificates.zip?start=2020-01-01&end=2020-12-31").content))
    assert empty.namelist() == []


@pytest.mark.parametrize("query,message", [
    ("", "Missing 'start' date"),
    ("?start=2026-11-01", "Missing 'end' date"),
    ("?start=2026-11-01&end=tomorrow", "'end' must be a real date written YYYY-MM-DD"),
    ("?start=2026-02-30&end=2026-03-01", "'start' must be a real date"),
    ("?start=20261101&end=2026-11-30", "'start' must be a real date"),
    ("?start=2026-12-01&end=2026-11-01", "'start' (2026-12-01) is after 'end' (2026-11-01)"),
])
def test_zip_rejects_bad_dates(client, query, message):
    response = client.get(f"/certificates.zip{query}")
    assert response.status_code == 400
    assert message in response.content.decode()


def test_certificate_prints_the_standards_as_they_were_at_sign_off(client, signed_event, standard):
    """Issue 15 item 6: a reprint cites the standard's certificate, issuer, U and due date of the day of sign-off."""
    assert signed_event.standards_snapshot[0]["certificate_number"] == "UKAS-0042-7781"
    standard.certificate_number, standard.due_date, standard.issuer = "NEW-2028-1", dt.date(2028, 6, 1), "Other Lab"
    standard.expanded_uncertainty = 0.2
    standard.save()
    _, raw = pdf_text(client.get(f"/calibrations/{signed_event.pk}/certificate.pdf").content)
    text = flat(raw)
    assert has(text, "UKAS-0042-7781,", "issuer not recorded", "2027-06-01") and "0.1 % of reading" in text
    assert "NEW-2028-1" not in text and "2028-06-01" not in text and "Other Lab" not in text
    page = client.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert "UKAS-0042-7781" in page and "NEW-2028-1" not in page


def test_record_signed_before_snapshots_prints_the_audit_trail_version(client, signed_event, standard):
    """A record signed before snapshots were kept prints each standard's audit-trail version as of its signing."""
    from django.db import connection

    with connection.cursor() as cursor:  # as such a record is stored: no snapshot (the model refuses the change)
        cursor.execute(f"UPDATE {CalibrationEvent._meta.db_table} SET standards_snapshot = %s WHERE id = %s",
                       ["[]", signed_event.pk])
    ReferenceStandard.history.filter(id=standard.pk).update(history_date=at(dt.date(2026, 11, 1)))
    standard.certificate_number = "NEW-2028-1"
    standard.save()
    event = CalibrationEvent.objects.get(pk=signed_event.pk)
    assert event.standards_snapshot == []
    assert [s["certificate_number"] for s in event.standards_as_signed()] == ["UKAS-0042-7781"]
    _, raw = pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)
    assert "UKAS-0042-7781" in flat(raw) and "NEW-2028-1" not in flat(raw)


def test_performed_by_authorised_by_and_countersignature(client, signed_event, monkeypatch):
    """Issue 15 item 7: performer = the logged-in technician; after a reviewer's countersignature the certificate
    names the reviewer as authorising, apart from the performer, with the countersignature."""
    from django.test import Client

    from tests.helpers import user_with_role

    assert signed_event.performed_by == signed_event.created_by and signed_event.contractor == ""
    _, raw = pdf_text(client.get(f"/calibrations/{signed_event.pk}/certificate.pdf").content)
    text = flat(raw)
    assert has(text, "Performed by", "B. Signatory") and has(text, "Authorised by", "— (not yet countersigned")
    assert "Countersigned" not in text
    reviewer = Client()
    reviewer.force_login(user_with_role("reviewer", "c-reviewer"))
    assert reviewer.post(f"/calibrations/{signed_event.pk}/countersign/").status_code == 302
    countersigned_on = timezone.localdate(signed_event.countersignature.at).isoformat()
    _, raw = pdf_text(client.get(f"/calibrations/{signed_event.pk}/certificate.pdf").content)
    text = flat(raw)
    assert has(text, "Performed by", "B. Signatory")
    assert has(text, "Signed off by", "B. Signatory (Technician), 2026-11-23")
    assert has(text, "Authorised by", "Reviewer Tester", "Role", "Reviewer", "Countersigned", countersigned_on)
    page = client.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert "Countersigned by Reviewer Tester (Reviewer)" in page


def test_outside_contractor_is_marked(client, device, standard, monkeypatch):
    event = enter(client, device, standard, **{"ev-contractor": "C. Outside, Flowfix Services"})
    assert event.performed_by is None and event.technician == "C. Outside, Flowfix Services"
    assert event.created_by.username == "b-signatory"
    sign(client, event, at(TODAY), monkeypatch)
    _, raw = pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)
    text = flat(raw)
    assert has(text, "Performed by", "C. Outside, Flowfix Services (outside contractor)")
    assert has(text, "Signed off by", "B. Signatory") and has(text, "Authorised by", "—")
    page = html_text(client.get(f"/calibrations/{event.pk}/").content.decode())
    assert "C. Outside, Flowfix Services (outside contractor)" in page and "Entered by B. Signatory" in page


def html_text(body):
    import html

    return flat(html.unescape(re.sub(r"<[^>]+>", " ", body)))


def test_k_from_repeats_and_low_tur_on_certificate(client, device, standard, monkeypatch, tmp_path):
    """Issue 17 item 1 and issue 15 item 5 on the certificate: k from the t distribution, TUR below 4:1 marked.

    Meter MPE 0.5 % of reading; point 20 m³/h with repeats 20.00, 20.04, 20.08 (indication 20.04, the mean):
    s = 0.04, u_rep = 0.04/sqrt(3) = 0.0230940 m³/h, nu = 2 (GUM 4.2.3, G.3.3); u_ref = 0.1 % x 20 / 2 = 0.01 m³/h
    (Type B, nu = inf); u_c^2 = 0.000533333 + 0.0001 = 0.000633333, u_c = 0.0251661;
    nu_eff = u_c^4 / (u_rep^4 / 2) = 2 x (0.000633333 / 0.000533333)^2 = 2 x 1.1875^2 = 2.8203 (GUM G.2b);
    k = t_0.975(2.8203) = 3.3003 (between 4.30 at nu = 2 and 3.18 at nu = 3 of GUM Table G.2, from memory);
    U = 3.3003 x 0.0251661 = 0.083055 m³/h = 0.41528 % of reading; TUR = 0.5 / 0.41528 = 1.20:1 < 4:1.
    The policy (require_guarded) needs guarded acceptance for that: error 0.2 % > MPE - U = 0.0847 % and
    <= MPE -> conditional pass (ILAC-G8 §4.2.2)."""
    found = [(20, "")]
    data = entry_data(standard, found=found, **{"ev-decision_rule": "guarded", "af-0-repeats": "20.00 20.04 20.08"})
    response = client.post(f"/positions/{device.tag}/calibrate/", data)
    assert response.status_code == 302, response.content.decode()[:3000]
    event = CalibrationEvent.objects.get()
    point = event.points.get()
    assert point.indicated_value == pytest.approx(20.04)
    assert point.dof_effective == pytest.approx(2.8203, abs=1e-4)
    assert point.coverage_factor == pytest.approx(3.3003, abs=1e-4)
    assert point.expanded_uncertainty == pytest.approx(0.41528, abs=1e-4)
    assert point.tur == pytest.approx(1.204, abs=1e-3)
    assert point.decision == "conditional pass"
    sign(client, event, at(TODAY), monkeypatch)
    content = client.get(f"/calibrations/{event.pk}/certificate.pdf").content
    (tmp_path / "low-tur.pdf").write_bytes(content)
    _, raw = pdf_text(content)
    text = flat(raw)
    assert has(text, "20.0000 20.0400 (mean of 3)", "0.200 0.500 0.415", "3.30 (2.8)", "1.2:1", "below 4:1",
               "conditional pass")
    assert "Test uncertainty ratio below 4:1 at the points marked" in text and "guarded acceptance (w = U) was applied" in text
