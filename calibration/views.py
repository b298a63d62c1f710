import math

from django.contrib.auth.decorators import permission_required
from django.core.exceptions import PermissionDenied, ValidationError
from django.db import IntegrityError, transaction
from django.shortcuts import get_object_or_404, redirect, render
from django.views.decorators.http import require_POST

from calibration import dcc_sign, decision
from calibration.errors import error_unit
from calibration.forms import CalibrationEntry
from calibration.models import (
    CalibrationEvent,
    CalibrationPoint,
    Countersignature,
    ReferenceStandard,
    SignedRecordError,
)
from calibration import conformity_fleet, signed_content
from calibration.signed_content import certificate_number, digest
from plant.db_failures import nothing_saved_page
from plant.entry_device import device_mismatch
from plant.models import Device
from plant.roles import role_of


def installed_at(tag):
    """The device installed at the position `tag` (404 when there is no such position or it is vacant)."""
    return get_object_or_404(Device.objects.select_related("position__area__site", "position__fluid"),
                             position__tag=tag)


@permission_required("calibration.add_calibrationevent", raise_exception=True)
def new_calibration(request, tag):
    return _calibration_entry(request, installed_at(tag))


@permission_required("calibration.add_calibrationevent", raise_exception=True)
def new_bench_calibration(request, pk):
    """A spare calibrated on the bench (no position): the record follows the device."""
    device = get_object_or_404(Device.objects.select_related("position__area__site", "position__fluid"), pk=pk,
                              status=Device.Status.SPARE)
    if device.position_id:
        return redirect(device.calibrate_url())
    return _calibration_entry(request, device)


def _calibration_entry(request, device, corrects=None, draft=None):
    entry = CalibrationEntry(device, request.POST if request.method == "POST" else None, user=request.user,
                             corrects=corrects, draft=draft)
    swapped = (device_mismatch(device, request.POST) if request.method == "POST" and corrects is None and draft is None
               else "")
    if swapped:
        entry.non_field_errors.append(swapped)
    if request.method == "POST" and not swapped and entry.is_valid():
        try:
            event = entry.save()
        except ValidationError as exc:  # the record to correct changed meanwhile (the model's own checks)
            entry.non_field_errors.extend(exc.messages)
        except SignedRecordError as exc:  # the draft was signed or discarded meanwhile
            entry.non_field_errors.append(str(exc))
        except IntegrityError:  # another correction of it was saved at the same moment: that one is used
            started = CalibrationEvent.objects.filter(supersedes=corrects).first() if corrects is not None else None
            if started is None:
                raise
            return redirect(started)
        else:
            return redirect(event)
    status = 400 if request.method == "POST" else 200
    return render(request, "calibration/entry.html", {
        "device": device, "entry": entry, "corrects": entry.corrects, "draft": draft,
        "corrects_number": certificate_number(entry.corrects) if entry.corrects is not None else ""}, status=status)


def _can_edit_draft(user, event):
    """A draft is edited or discarded by the technician who entered it, or by a reviewer."""
    return event.is_draft and ((event.created_by_id == user.pk and user.has_perm("calibration.add_calibrationevent"))
                               or user.has_perm("calibration.countersign_calibration"))


@permission_required("calibration.view_calibrationevent", raise_exception=True)
def edit_draft(request, pk):
    """Correct a draft before it is signed: the tablet form filled with its values; saving rewrites the draft."""
    event = get_object_or_404(CalibrationEvent.objects.select_related(
        "device__position__area__site", "device__position__fluid", "supersedes"), pk=pk)
    if not event.is_draft:
        return event_detail(request, pk, sign_error=(
            "Only a draft can be edited; a signed calibration is put right by a correction." if event.is_signed
            else "This draft was discarded; enter a new calibration."))
    if not _can_edit_draft(request.user, event):
        raise PermissionDenied("Only the technician who entered this draft, or a reviewer, can edit it.")
    return _calibration_entry(request, event.device, draft=event)


@require_POST
@permission_required("calibration.view_calibrationevent", raise_exception=True)
def discard_draft(request, pk):
    event = get_object_or_404(CalibrationEvent, pk=pk)
    if not event.is_draft:
        return event_detail(request, pk, sign_error="Only a draft can be discarded.")
    if not _can_edit_draft(request.user, event):
        raise PermissionDenied("Only the technician who entered this draft, or a reviewer, can discard it.")
    try:
        event.discard(request.POST.get("discard_reason", ""), request.user)
    except ValidationError as exc:
        return event_detail(request, pk, sign_error=" ".join(exc.messages))
    except SignedRecordError as exc:
        return event_detail(request, pk, sign_error=str(exc))
    return redirect(event)


@permission_required("calibration.add_calibrationevent", raise_exception=True)
def correct_event(request, pk):
    """A correction of a signed calibration (ISO/IEC 17025:2017 §7.8.8): a new record, filled with the signed one's
    values, that states why and replaces it when signed. A correction already started is reused."""
    original = get_object_or_404(CalibrationEvent.objects.select_related(
        "device__position__area__site", "device__position__fluid"), pk=pk)
    existing = CalibrationEvent.objects.filter(supersedes=original).exclude(
        state=CalibrationEvent.State.DISCARDED).first()
    if existing is not None:
        return redirect(existing)
    if not original.is_signed:
        return event_detail(request, pk, sign_error="A draft is not corrected: it is signed or left as it is; "
                                                    "only a signed calibration can be corrected.")
    return _calibration_entry(request, original.device, corrects=original)


def _result_rows(points, risks=None):
    """Each point with its test uncertainty ratio (ANSI/NCSL Z540.3: MPE over the point's own 95 % U), any
    warning below 4:1 and its conformance probability p_c (JCGM 106 §7; None without a stated U); all from the
    stored error, MPE, U and k, so a signed record shows what was signed."""
    rows = []
    for k, p in enumerate(points):
        tur = p.tur
        pc = risks["points"][k]["p_c"] if risks else None
        rows.append((p, tur if tur is not None and math.isfinite(tur) else None, p.tur_warning, pc))
    return rows


def _conformity(event, points, content):
    """The calibration's conformity risk: as frozen at sign-off (content version 2), else computed now with the
    stored prior of like devices (a draft, or a record signed before risks were kept: the page says so)."""
    contents = [dict(signed_content.point_content(p), acceptance_limit=p.acceptance_limit) for p in points]
    prior = conformity_fleet.prior_for_meter(event.device)
    now = conformity_fleet.event_conformity(contents, event.decision_rule, prior)
    frozen = (content or {}).get("conformity")
    return now, frozen


@permission_required("calibration.view_calibrationevent", raise_exception=True)
def event_detail(request, pk, sign_error=None):
    event = get_object_or_404(
        CalibrationEvent.objects.select_related("device__position__area__site", "device__position__fluid", "position", "supersedes", "performed_by",
                                                "created_by", "superseded_by"), pk=pk
    )
    correction = getattr(event, "superseded_by", None)
    content = event.content_as_signed() if event.is_signed else None
    points = list(event.points.all())
    risks_now, risks_signed = _conformity(event, points, content)
    rows = _result_rows(points, risks_now)
    standards = event.standards_as_signed() if event.is_signed else [s.snapshot() for s in event.reference_standards.all()]
    pages = dict(ReferenceStandard.objects.filter(identification__in=[s["identification"] for s in standards])
                 .values_list("identification", "pk"))  # each standard's own page, by its unique identification
    standards = [dict(s, pk=pages.get(s["identification"])) for s in standards]
    found = [p.decision for p in points if p.kind == CalibrationPoint.Kind.AS_FOUND]
    left = [p.decision for p in points if p.kind == CalibrationPoint.Kind.AS_LEFT] or found
    return render(request, "calibration/event_detail.html", {
        "event": event,
        "as_found_verdict": decision.verdict_text_for(event.decision_rule, event.as_found_in_tolerance, found),
        "as_left_verdict": decision.verdict_text_for(event.decision_rule, event.as_left_in_tolerance, left),
        "as_found": [r for r in rows if r[0].kind == CalibrationPoint.Kind.AS_FOUND],
        "as_left": [r for r in rows if r[0].kind == CalibrationPoint.Kind.AS_LEFT],
        "low_tur": any(warning for _, _, warning, _ in rows),
        "risks": risks_signed or risks_now, "risks_frozen": risks_signed is not None,
        # a signed record states its errors in the unit it was signed with
        "error_unit": content["mpe"]["error_unit"] if content else error_unit(event.device),
        "standards": standards,
        "countersignature": getattr(event, "countersignature", None),
        "problems": [] if event.is_signed else event.problems(),
        "sign_error": sign_error,
        "can_sign": _can_sign(request.user, event),
        "can_edit": _can_edit_draft(request.user, event),
        "can_countersign": _can_countersign(request.user, event),
        "number": certificate_number(event),
        "dcc_signed": dcc_sign.configured(),
        "digest": digest(content) if content else "",
        "correction": correction,
        "correction_number": certificate_number(correction) if correction is not None else "",
        "supersedes_number": certificate_number(event.supersedes) if event.supersedes_id else "",
        "can_correct": (event.is_signed and correction is None
                        and request.user.has_perm("calibration.add_calibrationevent")),
    }, status=400 if sign_error else 200)


def _can_sign(user, event):
    return (event.is_draft and user.has_perm("calibration.sign_calibration")
            and event.created_by_id == user.pk)


def _can_countersign(user, event):
    return (event.is_signed and user.has_perm("calibration.countersign_calibration")
            and event.created_by_id != user.pk and not hasattr(event, "countersignature"))


@require_POST
@permission_required("calibration.sign_calibration", raise_exception=True)
@nothing_saved_page("sign-off", back="calibration:event-detail")
def sign_event(request, pk):
    event = get_object_or_404(CalibrationEvent, pk=pk)
    if event.created_by_id != request.user.pk:
        raise PermissionDenied("Only the technician who entered a calibration can sign it.")
    try:
        event.sign(by=request.user.get_full_name() or request.user.username, role=role_of(request.user) or "Technician")
    except ValidationError as exc:
        return event_detail(request, pk, sign_error=" ".join(exc.messages))
    except SignedRecordError as exc:
        return event_detail(request, pk, sign_error=str(exc))
    # a database failure (SQLite still locked after sign()'s retries, a server gone): nothing_saved_page
    return redirect(event)


@require_POST
@permission_required("calibration.countersign_calibration", raise_exception=True)
@nothing_saved_page("countersignature", back="calibration:event-detail")
def countersign_event(request, pk):
    event = get_object_or_404(CalibrationEvent, pk=pk)
    if not event.is_signed:
        return event_detail(request, pk, sign_error="Only a signed calibration can be countersigned.")
    if event.created_by_id == request.user.pk:
        raise PermissionDenied("A calibration cannot be countersigned by the person who entered it.")
    try:
        with transaction.atomic():
            Countersignature.objects.create(event=event, user=request.user,
                                            name=request.user.get_full_name() or request.user.username,
                                            role=role_of(request.user) or "Reviewer")
    except IntegrityError:
        return event_detail(request, pk, sign_error="This calibration is already countersigned.")
    return redirect(event)
