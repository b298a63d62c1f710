"""Drafts are put right before they are signed, or discarded with a reason; signed records stay locked.

The typo of the field finding: 150 typed for 1.50 on one as-found row. The entry saves a draft; its author (or a
reviewer) edits it at /calibrations/<id>/edit/ or discards it with a reason kept on the record and in its history.
"""
import pytest
from django.test import Client

from calibration.models import CalibrationEvent, CalibrationPoint, SignedRecordError
from reports import review
from tests.helpers import user_with_role
from tests.helpers import entry_data

pytestmark = pytest.mark.django_db
TYPO = [(4, 4.01), (10, 10.02), (20, 2005), (30, 29.97), (40, 40.04)]  # 2005 typed for 20.05
RIGHT = [(4, 4.01), (10, 10.02), (20, 20.05), (30, 29.97), (40, 40.04)]


def logged_in(role, name=None):
    user = user_with_role(role, name)
    client = Client()
    client.force_login(user)
    return client, user


@pytest.fixture
def author(device, standard):  # noqa: F811
    return logged_in("technician", "tech-a")


@pytest.fixture
def draft(author, device, standard):  # noqa: F811
    client, _ = author
    held = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, found=TYPO))
    assert held.status_code == 400 and "Check this value" in held.content.decode()  # tests/test_plausibility.py
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, found=TYPO,
                                                                        **{"ev-values_checked": "on"}))
    assert response.status_code == 302, response.content.decode()[:2000]
    event = CalibrationEvent.objects.get()
    assert event.as_found_in_tolerance is False  # the typo made a failure
    return event


def test_the_author_edits_the_draft_and_the_typo_is_gone(author, draft, standard):  # noqa: F811
    client, user = author
    page = client.get(f"/calibrations/{draft.pk}/").content.decode()
    assert 'id="edit-draft"' in page and 'id="discard-form"' in page
    form = client.get(f"/calibrations/{draft.pk}/edit/")
    assert form.status_code == 200
    assert f"Edit draft calibration {draft.pk}" in form.content.decode()
    assert 'value="2005.0"' in form.content.decode()  # filled with what was entered
    response = client.post(f"/calibrations/{draft.pk}/edit/", entry_data(standard, found=RIGHT))
    assert response.status_code == 302
    assert CalibrationEvent.objects.count() == 1  # the same record, rewritten
    draft.refresh_from_db()
    assert draft.is_draft and draft.created_by == user and draft.as_found_in_tolerance is True
    assert sorted(p.indicated_value for p in draft.points.filter(kind="as_found")) == [4.01, 10.02, 20.05, 29.97, 40.04]
    assert CalibrationPoint.objects.count() == 5
    assert draft.history.count() >= 2  # earlier values stay in its history
    draft.sign(by="Technician Tester", role="Technician")  # and it signs as any draft


def test_a_row_is_removed_with_its_tick(author, draft, standard):  # noqa: F811
    client, _ = author
    data = entry_data(standard, found=RIGHT)
    data["af-2-reference_value"] = data["af-2-indicated_value"] = ""  # blank: refused unless removed
    refused = client.post(f"/calibrations/{draft.pk}/edit/", data)
    assert refused.status_code == 400
    assert "Enter the reference flow at this point, or tick Remove on its row." in refused.content.decode()
    data["af-2-DELETE"] = "on"
    assert client.post(f"/calibrations/{draft.pk}/edit/", data).status_code == 302
    assert sorted(draft.points.values_list("nominal_pct", flat=True)) == [10, 25, 75, 100]


def test_only_the_author_or_a_reviewer_may_edit_or_discard(draft, standard):  # noqa: F811
    other, _ = logged_in("technician", "tech-b")
    assert other.get(f"/calibrations/{draft.pk}/edit/").status_code == 403
    assert other.post(f"/calibrations/{draft.pk}/discard/", {"discard_reason": "not mine"}).status_code == 403
    assert 'id="edit-draft"' not in other.get(f"/calibrations/{draft.pk}/").content.decode()  # no link to a 403
    reviewer, _ = logged_in("reviewer", "rev")
    assert reviewer.get(f"/calibrations/{draft.pk}/edit/").status_code == 200
    assert reviewer.post(f"/calibrations/{draft.pk}/edit/", entry_data(standard, found=RIGHT)).status_code == 302
    draft.refresh_from_db()
    assert draft.created_by.username == "tech-a"  # still the author's to sign


def test_discard_needs_a_reason_keeps_the_record_and_locks_it(author, draft):
    client, user = author
    refused = client.post(f"/calibrations/{draft.pk}/discard/", {"discard_reason": "  "})
    assert refused.status_code == 400 and "Say why the draft is discarded" in refused.content.decode()
    draft.refresh_from_db()
    assert draft.is_draft
    assert client.post(f"/calibrations/{draft.pk}/discard/",
                       {"discard_reason": "Entered against the wrong meter."}).status_code == 302
    draft.refresh_from_db()
    assert draft.is_discarded and draft.discard_reason == "Entered against the wrong meter."
    assert draft.discarded_by == user and draft.points.count() == 5  # kept, not deleted
    assert draft.history.filter(history_change_reason__startswith="discarded: Entered against").exists()
    page = client.get(f"/calibrations/{draft.pk}/").content.decode()
    assert "This draft was discarded" in page and "Entered against the wrong meter." in page
    assert 'id="sign"' not in page and 'id="edit-draft"' not in page
    with pytest.raises(SignedRecordError):
        draft.sign(by="Technician Tester", role="Technician")
    draft.refresh_from_db()
    with pytest.raises(SignedRecordError):
        draft.save()
    with pytest.raises(SignedRecordError):
        draft.points.first().save()
    assert client.get(f"/calibrations/{draft.pk}/edit/").status_code == 400
    assert not review.unsigned_drafts({}).filter(pk=draft.pk).exists()  # off the review's drafts list


def test_signed_records_are_not_edited_or_discarded(author, draft):
    client, _ = author
    draft.sign(by="Technician Tester", role="Technician")
    edit = client.get(f"/calibrations/{draft.pk}/edit/")
    assert edit.status_code == 400 and "put right by a correction" in edit.content.decode()
    assert client.post(f"/calibrations/{draft.pk}/discard/", {"discard_reason": "x"}).status_code == 400
    draft.refresh_from_db()
    assert draft.is_signed


def test_a_discarded_correction_frees_the_record_for_another(author, draft, standard):  # noqa: F811
    client, _ = author
    draft.sign(by="Technician Tester", role="Technician")
    data = entry_data(standard, found=RIGHT, **{"ev-correction_reason": "Typo in row 3."})
    assert client.post(f"/calibrations/{draft.pk}/correct/", data).status_code == 302
    correction = CalibrationEvent.objects.get(supersedes=draft)
    correction.discard("Started on the wrong record.", None)
    correction.refresh_from_db()
    assert correction.supersedes_id is None and "correction of calibration" in correction.discard_reason
    assert client.post(f"/calibrations/{draft.pk}/correct/", data).status_code == 302
    assert CalibrationEvent.objects.filter(supersedes=draft, state="draft").count() == 1
