"""Certificates reproduce exactly what was signed (ISO/IEC 17025:2017 §7.8.2.1: what a certificate states; §7.8.8:
an issued certificate is not changed, a correction is a new certificate naming the one it replaces and why).

The content the certificate prints is frozen into the record at sign-off (calibration/signed_content.py); a reprint
after the register was edited is the same certificate, and it prints the SHA-256 of that content."""
import copy
import datetime as dt
import hashlib
import html
import json
import re

import pytest
from django.core.management import call_command
from django.db import connection
from django.db.migrations.executor import MigrationExecutor
from django.test import Client

from calibration import signed_content
from scheduling import fleet
from calibration.models import CalibrationEvent, CalibrationPoint, SignedRecordError
from plant.models import Area, Fluid, Device, Position, Site
from reports import certificate
from tests.helpers import user_with_role
from tests.helpers import TODAY, at, enter, flat, pdf_text, sign

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("certificate")]


def sha256_of(content):
    """The digest as a reader would recompute it from the stored JSON: sorted keys, no spaces, UTF-8."""
    return hashlib.sha256(json.dumps(content, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
                          .encode("utf-8")).hexdigest()


def html_of(event):
    return certificate.certificate_html(certificate.load_event(event.pk))


def pdf_of(client, event):
    response = client.get(f"/calibrations/{event.pk}/certificate.pdf")
    assert response.status_code == 200
    return flat(pdf_text(response.content)[1])


def text_of(body):
    return flat(html.unescape(re.sub(r"<[^>]+>", " ", body)))


def edit_the_register(device, standard, settings):
    """Everything the certificate names, changed after signing: device, position, area, site, fluid, standard, lab."""
    edited = Device.objects.get(pk=device.pk)
    edited.serial, edited.maker, edited.model = "SN-NEW-999", "Otherco", "OC-1"
    edited.range_min, edited.range_max, edited.mpe_value, edited.mpe_basis = 5, 80, 1.0, "pct_span"
    edited.principle, edited.wetted_material = "vortex", "alloy C-276"
    edited.save()
    position = Position.objects.get(pk=device.position_id)
    old_fluid = position.fluid
    old_fluid.name = "Renamed water"
    old_fluid.save()
    other_site = Site.objects.create(name="Other Works", address="2 New Road")
    position.tag, position.line_size = "FT-999", "DN80"
    position.area = Area.objects.create(site=other_site, name="New hall")
    position.fluid = Fluid.objects.create(name="Syrup", phase="liquid", conductivity_us_cm=300)
    position.save()
    Area.objects.filter(pk=device.area.pk).update(name="Renamed hall")
    Site.objects.filter(pk=device.area.site_id).update(name="Renamed Works", address="99 Changed Street")
    standard.certificate_number, standard.expanded_uncertainty, standard.due_date = "NEW-1", 0.3, dt.date(2029, 1, 1)
    standard.save()
    settings.CALIBRATION_LAB = {"name": "Another Lab", "address": "Elsewhere"}


def test_reprint_after_register_edits_is_the_same_certificate(client, device, standard, signed_event, settings):
    """HTML byte for byte and PDF text: the register edits after signing reach no issued certificate."""
    before_html = html_of(signed_event)
    before_pdf = pdf_of(client, signed_event)
    for shown in ("SN-778812", "Ternwell Flow / TW-300", "FT-101", "Marrowfield Works", "Pickling hall",
                  "Process water", "0 to 40 m³/h", "± 0.5 % of reading", "UKAS-0042-7781"):
        assert shown in before_pdf, shown
    edit_the_register(device, standard, settings)
    assert Device.objects.get(pk=device.pk).serial == "SN-NEW-999"  # the register did change
    after_html = html_of(signed_event)
    # ISO/IEC 17025:2017 §7.8.8: an issued certificate is not changed; §7.8.2.1: what it states is that of the item
    # as calibrated (identity, range, specification, location, standards, results)
    assert after_html == before_html
    assert pdf_of(client, signed_event) == before_pdf
    for new in ("SN-NEW-999", "Otherco", "FT-999", "Other Works", "Renamed", "Syrup", "NEW-1", "Another Lab",
                "80 m³/h", "% of span"):
        assert new not in after_html, new


def test_reprint_keeps_the_fluid_served_on_the_day(client, device, standard, monkeypatch):
    """The service fluid printed is the one of the duty on the day of calibration, frozen with the record."""
    event = sign(client, enter(client, device, standard), at(TODAY), monkeypatch)
    assert event.signed_content["service_fluid"] == "Process water"
    position = Position.objects.get(pk=device.position_id)
    position.fluid = Fluid.objects.create(name="Cane syrup", phase="liquid", conductivity_us_cm=300)
    position.save()
    assert "Cane syrup" not in html_of(event) and "Process water" in html_of(event)


def test_printed_digest_is_the_sha256_of_the_stored_content(client, signed_event):
    stored = CalibrationEvent.objects.get(pk=signed_event.pk).signed_content
    assert stored["version"] == signed_content.VERSION and stored["frozen"]["how"] == signed_content.AT_SIGN_OFF
    expected = sha256_of(stored)
    # what sign-off computed before the content went through the database is what is read back (jsonb included)
    assert signed_content.digest(signed_event.signed_content) == expected
    assert f'id="digest">{expected}<' in html_of(signed_event)
    assert expected in pdf_of(client, signed_event).replace(" ", "")
    page = client.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert expected in page and f"Certificate {signed_content.certificate_number(signed_event)} prints what was signed" in page


def test_frozen_content_cannot_be_changed(signed_event):
    event = CalibrationEvent.objects.get(pk=signed_event.pk)
    original = copy.deepcopy(event.signed_content)
    event.signed_content["device"]["serial"] = "FORGED"
    with pytest.raises(SignedRecordError):
        event.save()
    with pytest.raises(SignedRecordError):
        CalibrationEvent.objects.filter(pk=event.pk).update(signed_content={})
    assert CalibrationEvent.objects.get(pk=event.pk).signed_content == original
    assert CalibrationEvent._meta.get_field("signed_content").editable is False  # no form or admin field for it


def test_countersignature_is_printed_from_its_own_record_and_changes_nothing_signed(client, signed_event):
    before = CalibrationEvent.objects.get(pk=signed_event.pk).signed_content
    reviewer = Client()
    reviewer.force_login(user_with_role("reviewer", "c-reviewer"))
    assert reviewer.post(f"/calibrations/{signed_event.pk}/countersign/").status_code == 302
    after = CalibrationEvent.objects.get(pk=signed_event.pk)
    assert after.signed_content == before and after.content_digest() == sha256_of(before)
    text = text_of(html_of(after))
    assert "Authorised by Reviewer Tester" in text and sha256_of(before) in text
    assert "The countersignature is a separate, later record printed from itself" in text


# Corrections (ISO/IEC 17025:2017 §7.8.8) -------------------------------------------------------------------------
REASON = "Indication at 20 m³/h was typed as 20.05; the tablet photo shows 20.02"


def correct(client, original, reason=REASON, **changes):
    """The correction form as the page fills it from the signed record, with `changes` and the reason."""
    page = client.get(f"/calibrations/{original.pk}/correct/")
    assert page.status_code == 200
    form = page.context["entry"]
    data = {}
    for f in [form.event_form, *form.as_found.forms, *form.as_left.forms]:
        for field in f:
            value = field.value()
            if value is None or value is False:
                continue
            if isinstance(value, list):
                data[field.html_name] = [str(v) for v in value]
            elif value is True:
                data[field.html_name] = "on"
            else:
                data[field.html_name] = str(value)
    for grid in (form.as_found, form.as_left):
        data.update({f"{grid.prefix}-TOTAL_FORMS": str(grid.total_form_count()), f"{grid.prefix}-INITIAL_FORMS": "0",
                     f"{grid.prefix}-MIN_NUM_FORMS": "0", f"{grid.prefix}-MAX_NUM_FORMS": "20"})
    data["ev-correction_reason"] = reason
    data.update(changes)
    return client.post(f"/calibrations/{original.pk}/correct/", data)


def test_correction_from_the_results_page(client, device, standard, signed_event, monkeypatch):
    page = client.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert f'href="/calibrations/{signed_event.pk}/correct/"' in page and "Correct this calibration" in page
    filled = client.get(f"/calibrations/{signed_event.pk}/correct/").content.decode()
    assert f"Correction of calibration {signed_event.pk}" in filled
    assert 'value="20.05"' in filled and "WI-CAL-07" in filled  # the signed values, to correct what was wrong
    assert 'name="offline-kind"' not in filled  # entered online: the tablet queue knows no corrections

    counts = CalibrationEvent.objects.count(), CalibrationPoint.objects.count()
    refused = correct(client, signed_event, reason="")
    assert refused.status_code == 400 and "State why the calibration is corrected" in refused.content.decode()
    assert (CalibrationEvent.objects.count(), CalibrationPoint.objects.count()) == counts  # nothing half-saved

    index = next(i for i in range(5) if client.get(f"/calibrations/{signed_event.pk}/correct/").context["entry"]
                 .as_found.forms[i].initial["reference_value"] == 20)
    response = correct(client, signed_event, **{f"af-{index}-indicated_value": "20.02"})
    assert response.status_code == 302, response.content.decode()[:3000]
    draft = CalibrationEvent.objects.get(supersedes=signed_event)
    assert draft.correction_reason == REASON and draft.device_id == signed_event.device_id
    assert draft.position_id == signed_event.position_id and draft.performed_on == signed_event.performed_on
    assert draft.technician == signed_event.technician  # the same calibration, restated
    assert draft.points.get(kind="as_found", reference_value=20).indicated_value == 20.02
    # a correction already started is reused, not started twice
    again = client.get(f"/calibrations/{signed_event.pk}/correct/")
    assert again.status_code == 302 and again["Location"] == f"/calibrations/{draft.pk}/"

    # while in draft it replaces nothing: the signed record still counts for due dates and drift
    assert signed_event.pk in set(fleet.signed_events()["id"])
    page = client.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert "a correction in draft" in page and "Correct this calibration" not in page
    original_html = html_of(signed_event)
    assert "Replaced." not in original_html

    corrected = sign(client, draft, at(dt.date(2026, 11, 26)), monkeypatch)
    assert signed_event.pk not in set(fleet.signed_events()["id"])
    new_text = pdf_of(client, corrected)
    number = signed_content.certificate_number(signed_event)
    assert f"This certificate supersedes certificate {number} (calibration {signed_event.pk} of 2026-11-20, " \
           f"issued 2026-11-23), which is withdrawn." in new_text
    assert f"Reason for the correction: {REASON}" in new_text  # ISO/IEC 17025:2017 §7.8.8: names it and says why
    assert corrected.signed_content["correction"]["reason"] == REASON

    # the replaced certificate stays retrievable and says it was replaced (ISO/IEC 17025:2017 §7.8.8); its signed
    # content and digest are untouched
    old_text = pdf_of(client, signed_event)
    assert f"This certificate was replaced on 2026-11-26 by certificate {signed_content.certificate_number(corrected)}" \
           in old_text
    assert "not part of the content signed here nor of its SHA-256" in old_text
    replaced_html = html_of(signed_event)
    notice = re.search(r'<p class="notice" id="replaced-by">.*?</p>', replaced_html, re.S).group(0)
    assert flat(replaced_html.replace(notice, "")) == flat(original_html)  # the notice is all that was added
    assert sha256_of(CalibrationEvent.objects.get(pk=signed_event.pk).signed_content) in replaced_html
    page = client.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert f"calibration {corrected.pk}</a> (certificate {signed_content.certificate_number(corrected)}), signed 2026-11-26" in page


def test_reviewer_is_told_how_a_correction_is_made(signed_event):
    reviewer = Client()
    reviewer.force_login(user_with_role("reviewer", "r-1"))
    page = reviewer.get(f"/calibrations/{signed_event.pk}/").content.decode()
    assert "Correct this calibration" not in page and "a technician starts it from this page" in page
    assert reviewer.get(f"/calibrations/{signed_event.pk}/correct/").status_code == 403


def test_a_draft_cannot_be_corrected(client, device, standard):
    draft = enter(client, device, standard)
    response = client.get(f"/calibrations/{draft.pk}/correct/")
    assert response.status_code == 400 and "only a signed calibration can be corrected" in response.content.decode()
    assert not CalibrationEvent.objects.filter(supersedes=draft).exists()


# Records without frozen content: rebuilt from the audit trail as of their signing --------------------------------
def _backdate_trail(*objects, day=dt.date(2026, 11, 1)):
    for obj in objects:
        type(obj).history.filter(id=obj.pk).update(history_date=at(day))


def _forget_content(event):
    with connection.cursor() as cursor:  # as a record signed before content was frozen is stored
        cursor.execute(f"UPDATE {CalibrationEvent._meta.db_table} SET signed_content = %s WHERE id = %s",
                       ["{}", event.pk])


def test_a_record_without_content_prints_the_audit_trail_as_of_its_signing(client, device, standard, signed_event,
                                                                             settings):
    frozen = CalibrationEvent.objects.get(pk=signed_event.pk).signed_content
    position = Position.objects.get(pk=device.position_id)
    _backdate_trail(Device.objects.get(pk=device.pk), position, position.fluid, standard)
    edit_the_register(device, standard, settings)
    _forget_content(signed_event)
    event = CalibrationEvent.objects.get(pk=signed_event.pk)
    rebuilt = event.content_as_signed()
    for part in ("device", "range", "mpe", "standards", "decision", "drift_history", "calibration",
                 "environment", "signature", "certificate", "service_fluid"):
        assert rebuilt[part] == frozen[part], part
    # version 2 adds each point's p_c and PFA and a conformity section; a rebuilt record is version 1 without them
    # (the prior of its signing time was never kept), the rest of each point the same
    added = ("p_c", "pfa", "acceptance_limit")
    without_risks = {kind: [{k: v for k, v in p.items() if k not in added} for p in rows]
                     for kind, rows in frozen["points"].items()}
    assert rebuilt["points"] == without_risks
    assert frozen["version"] == 2 and "conformity" in frozen
    assert rebuilt["version"] == signed_content.VERSION_WITHOUT_CONFORMITY == 1 and "conformity" not in rebuilt
    assert rebuilt["position"]["tag"] == "FT-101"
    # areas, sites and the settings keep no history: taken from the register now, and the content says so
    assert rebuilt["frozen"] == {"how": signed_content.FROM_AUDIT_TRAIL,
                                 "from_current_register": ["area", "laboratory", "site"]}
    assert rebuilt["customer"]["site"] == "Renamed Works"
    text = text_of(html_of(event))
    assert "taken from the register as it stood when rebuilt (no earlier version kept): area, laboratory, site" in text
    assert "The record stores no content: it was rebuilt for this printing." in text


def test_a_record_without_content_or_trail_names_every_part_taken_from_the_register(client, signed_event):
    _forget_content(signed_event)
    rebuilt = CalibrationEvent.objects.get(pk=signed_event.pk).content_as_signed()
    # the snapshot of the standards was kept at sign-off; the register objects have no version by then
    assert rebuilt["frozen"]["from_current_register"] == ["area", "device", "laboratory", "position", "service fluid",
                                                          "site"]


BEFORE = [("calibration", "0009_signed_content_and_correction_reason")]
AFTER = [("calibration", "0010_freeze_signed_content")]



@pytest.mark.django_db(transaction=True)
def test_migration_fills_records_signed_before_from_the_audit_trail(client, device, standard, monkeypatch, settings):
    first = sign(client, enter(client, device, standard, performed_on=dt.date(2025, 11, 20)),
                 at(dt.date(2025, 11, 21)), monkeypatch)
    second = sign(client, enter(client, device, standard), at(dt.date(2026, 11, 23)), monkeypatch)
    frozen = {e.pk: CalibrationEvent.objects.get(pk=e.pk).signed_content for e in (first, second)}
    position = Position.objects.get(pk=device.position_id)
    _backdate_trail(Device.objects.get(pk=device.pk), position, position.fluid, standard, day=dt.date(2025, 1, 1))
    draft = enter(client, device, standard, performed_on=dt.date(2026, 11, 30), found=[(10, 10.01)])
    edit_the_register(device, standard, settings)
    for event in (first, second):
        _forget_content(event)
    try:
        executor = MigrationExecutor(connection)
        executor.migrate(BEFORE)
        executor = MigrationExecutor(connection)
        executor.loader.build_graph()
        executor.migrate(AFTER)
        # only the content column is read: at AFTER the table has none of the fields later migrations add
        def content_of(pk):
            return CalibrationEvent.objects.filter(pk=pk).values_list("signed_content", flat=True).get()

        for event in (first, second):
            stored = content_of(event.pk)
            assert stored["frozen"]["how"] == signed_content.FROM_AUDIT_TRAIL
            for part in ("device", "mpe", "standards", "decision", "drift_history", "service_fluid"):
                assert stored[part] == frozen[event.pk][part], (event.pk, part)
            # rebuilt: version 1, without the risks of version 2 (no prior of that time was kept)
            assert stored["version"] == 1 and "conformity" not in stored
            added = ("p_c", "pfa", "acceptance_limit")
            assert stored["points"] == {kind: [{k: v for k, v in p.items() if k not in added} for p in rows]
                                        for kind, rows in frozen[event.pk]["points"].items()}
            assert stored["device"]["serial"] == "SN-778812" and stored["position"]["tag"] == "FT-101"
        assert [row[0] for row in content_of(second.pk)["drift_history"]] == ["2025-11-20", "2026-11-20"]
        assert content_of(draft.pk) == {}  # drafts have none until signed
    finally:
        call_command("migrate", verbosity=0)


def test_demo_records_carry_the_content_frozen_at_their_sign_off(demo_history):
    """The demo fixture is built by signing (build_demo_history): its records hold their frozen content."""
    events = list(CalibrationEvent.objects.filter(state="signed"))
    assert events and all(e.signed_content["frozen"]["how"] == signed_content.AT_SIGN_OFF for e in events)
    assert all(e.signed_content["certificate"]["number"] == signed_content.certificate_number(e) for e in events)


def test_fill_missing_stores_what_a_reprint_would_have_rebuilt(client, device, standard, monkeypatch):
    """The migration's filler, in batches smaller than the records: each gets the content its reprint rebuilt."""
    from django.apps import apps

    events = [sign(client, enter(client, device, standard, performed_on=day), at(day), monkeypatch)
              for day in (dt.date(2026, 11, 2), dt.date(2026, 11, 9), dt.date(2026, 11, 16))]
    for event in events[:2]:
        _forget_content(event)
    expected = {e.pk: CalibrationEvent.objects.get(pk=e.pk).content_as_signed() for e in events}
    assert signed_content.fill_missing(apps, batch=1) == 2
    for event in events:
        stored = CalibrationEvent.objects.get(pk=event.pk).signed_content
        assert stored == expected[event.pk]
    assert [CalibrationEvent.objects.get(pk=e.pk).signed_content["frozen"]["how"] for e in events] == [
        signed_content.FROM_AUDIT_TRAIL, signed_content.FROM_AUDIT_TRAIL, signed_content.AT_SIGN_OFF]
