"""What a calibration certificate prints, frozen into the signed record (ISO/IEC 17025:2017 §7.8.2.1, §7.8.8).

At sign-off (CalibrationEvent.at_signature, in the one sign path of ledger/signed.py) everything the certificate
prints is copied from the register as it stands that moment into plain JSON (``at_sign_off``), with a version
number, and stored on the locked record; a certificate renders from that alone, so editing the device, the position,
its area, site or fluid, or a reference standard afterwards never changes an issued certificate. The SHA-256 of its
canonical JSON lets two copies be compared (``digest``).

Records signed before this was kept get theirs rebuilt from the audit trail as of their signing time
(``rebuilt``, used by migration 0010 and, for a record stored without sign-off, at printing); what the audit trail
does not hold is taken from the register as it stands then, and the content says which parts.

Everything here reads model fields only (no model methods), so the same code runs on the app's models and on the
historical models of a migration. Nothing here imports the reports app: reports depends on calibration, not back.
"""
from __future__ import annotations

import hashlib
import json
import math

from django.conf import settings
from django.db.models import Q
from django.utils import timezone

from calibration import decision, uncertainty
from plant import units

#: 1: the content as first kept; 2: adds "conformity" (issue 31: per point p_c and PFA, the calibration's PFA of the
#: rule applied, the prior used and the PFA target, as they stood at sign-off). Content rebuilt from the audit trail
#: for a record signed before sign-off kept it is version 1: the prior of that time was never kept, so it states none.
VERSION = 2
VERSION_WITHOUT_CONFORMITY = 1

SIGNED = "signed"
AS_FOUND, AS_LEFT = "as_found", "as_left"

DEFAULT_LAB = {
    "name": "Marrowfield Preserves — Instrument Workshop",
    "address": "Unit 4, Gullet Lane, Marrowfield (invented)",
}

# How the content came to be (content["frozen"]["how"])
AT_SIGN_OFF = "at sign-off"
FROM_AUDIT_TRAIL = "rebuilt from the audit trail as of the signing time"


def laboratory() -> dict:
    lab = dict(DEFAULT_LAB)
    lab.update(getattr(settings, "CALIBRATION_LAB", None) or {})
    return {"name": lab["name"], "address": lab["address"]}


def certificate_number(event) -> str:
    return f"MWP-CAL-{event.performed_on:%Y}-{event.pk:06d}"


# Canonical form and digest -----------------------------------------------------------------------------
def canonical_json(content) -> bytes:
    """Sorted keys, no spaces, UTF-8: the same content always gives the same bytes."""
    return json.dumps(content, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False).encode("utf-8")


def digest(content) -> str:
    """SHA-256 (hex) of the canonical JSON of the content."""
    return hashlib.sha256(canonical_json(content)).hexdigest()


# Small helpers on fields ---------------------------------------------------------------------------------
def _num(value):
    """A finite number as a float, else None (JSON has no infinity: an infinite TUR is printed as none)."""
    if value is None or isinstance(value, bool):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _label(obj, field, value=None):
    """The display label of a choice field, read from the field (works on historical models too)."""
    value = getattr(obj, field) if value is None else value
    return str(dict(obj._meta.get_field(field).flatchoices).get(value, value))


def _local_date(moment) -> str:
    return timezone.localdate(moment).isoformat()


def nominal_list(nominals) -> str:
    """"10 %, 50 % and 100 %" for the nominals, in order."""
    values = [f"{n:g} %" for n in sorted(nominals)]
    return values[0] if len(values) == 1 else ", ".join(values[:-1]) + " and " + values[-1]


def error_unit(mpe_basis, basis_label, device_units) -> str:
    """The unit errors, MPE and U are stated in: the MPE basis, or the flow units for an absolute MPE."""
    return units.label_for(device_units) if mpe_basis == "absolute" else basis_label


def unit_facts(entered_code, device_code, density):
    """(converted, density used) for readings entered in `entered_code` on a meter in `device_code`."""
    converted = entered_code != device_code
    if not converted or density is None:
        return converted, False
    try:
        return converted, "density" in units.conversion_needs(entered_code, device_code)
    except units.UnitError:
        return converted, False


def standard_snapshot(standard) -> dict:
    """What a record keeps of a reference standard, as it is in `standard` (a standard or a historical version)."""
    return {
        "identification": standard.identification, "description": standard.description,
        "certificate_number": standard.certificate_number, "issuer": standard.issuer,
        "expanded_uncertainty": standard.expanded_uncertainty, "uncertainty_basis": standard.uncertainty_basis,
        "uncertainty_basis_display": _label(standard, "uncertainty_basis"),
        "range_min": standard.range_min, "range_max": standard.range_max, "units": standard.units,
        "due_date": standard.due_date.isoformat(),
    }


# Points, verdicts and statements ---------------------------------------------------------------------------
def point_content(point) -> dict:
    repeats = [float(v) for v in (point.repeats or [])]
    indicated = sum(repeats) / len(repeats) if repeats else point.indicated_value
    tur = None
    if point.mpe is not None and point.expanded_uncertainty is not None:
        tur = uncertainty.test_uncertainty_ratio(abs(point.mpe), point.expanded_uncertainty)
    return {
        "kind": point.kind, "nominal_pct": _num(point.nominal_pct),
        "reference_entered": _num(point.reference_value if point.reference_entered is None
                                  else point.reference_entered),
        "reference_value": _num(point.reference_value), "indicated": _num(indicated), "repeats": repeats,
        "resolution": _num(point.resolution), "error": _num(point.error), "mpe": _num(point.mpe),
        "expanded_uncertainty": _num(point.expanded_uncertainty), "coverage_factor": _num(point.coverage_factor),
        "dof_effective": _num(point.dof_effective), "tur": _num(tur),
        "low_tur": tur is not None and uncertainty.tur_warning(tur) is not None, "decision": point.decision,
    }


def _labelled(points, wanted) -> str:
    """"as found at 10 % and 50 %; as left at 50 %" for the points whose decision passes `wanted`."""
    groups = []
    for kind, label in ((AS_FOUND, "as found"), (AS_LEFT, "as left")):
        chosen = [p["nominal_pct"] for p in points if p["kind"] == kind and wanted(p)]
        if chosen:
            groups.append(f"{label} at {nominal_list(chosen)}")
    return "; ".join(groups)


def conformity_notes(points) -> dict:
    """Which points the statement of conformity must name beyond the verdicts (ILAC-G8:09/2019 §4.2.2).

    guard_band: points in the guard band (conditional pass); conditional_fail: conditional fails; u_above_mpe:
    points whose U exceeds the MPE, where the guarded rule has no "pass" zone at all."""
    return {
        "guard_band": _labelled(points, lambda p: p["decision"] == decision.CONDITIONAL_PASS),
        "conditional_fail": _labelled(points, lambda p: p["decision"] == decision.CONDITIONAL_FAIL),
        "u_above_mpe": _labelled(points, lambda p: p["expanded_uncertainty"] is not None and p["mpe"] is not None
                                 and p["expanded_uncertainty"] > p["mpe"]),
    }


def statements(rule, mpe_value, unit, points) -> dict:
    """The statement of conformity in words (ILAC-G8:09/2019 §4.2.1 simple, §4.2.2 guarded acceptance)."""
    guarded = rule == "guarded"
    notes = conformity_notes(points)
    spec = f"± {mpe_value:.6g} {unit}"
    if rule == "risk":
        rule_text = (f"The error at each point is compared with the specification {spec}, with an acceptance limit "
                     "set so that the probability of false accept stays within the target given the prior of like "
                     "devices and the point's uncertainty (risk-based acceptance, JCGM 106:2012 §8-§9; target and "
                     "prior stated below). The item is in tolerance when every point passes; a point within the MPE "
                     "but beyond its acceptance limit leaves conformity not decided.")
    elif guarded:
        rule_text = (f"The error at each point is compared with the specification {spec}, with a guard band equal "
                     "to the expanded uncertainty U of the point: a point passes when its error is within the MPE "
                     "reduced by U. The item is in tolerance when every point passes; a point in the guard band "
                     "(conditional pass) does not show conformity and counts as not conforming.")
    else:
        rule_text = (f"The error at each point is compared with the specification {spec}; the measurement "
                     "uncertainty is reported but not deducted (guard band w = 0). The item is in tolerance when "
                     "every point passes.")
    out = {"rule": rule_text, "guard_band": "", "u_above_mpe": "", "conditional_fail": "", "low_tur": ""}
    if notes["guard_band"] and rule == "risk":
        out["guard_band"] = (
            f"Conformity not decided ({notes['guard_band']}): the measured error is within the MPE but beyond the "
            "acceptance limit that keeps the probability of false accept within the target; a calibration with a "
            "smaller uncertainty would decide it.")
    elif notes["guard_band"]:
        out["guard_band"] = (
            f"Guard band ({notes['guard_band']}): the measured error is within the MPE but less than U from it "
            "(conditional pass). With U at k = 2, a coverage probability of about 95 % for a normal distribution, the "
            "probability that the true error lies beyond the MPE at such a point is more than about 2.5 %, and about "
            "50 % where the measured error equals the MPE, so conformity cannot be stated; under guarded acceptance "
            "these points count as not conforming (ILAC-G8:09/2019).")
    if guarded and notes["u_above_mpe"]:
        out["u_above_mpe"] = (
            f"The expanded uncertainty U exceeds the MPE ({notes['u_above_mpe']}): with a guard band w = U no "
            "measured error there can show conformity, whatever its value; the measurement cannot decide "
            "conformity with this tolerance.")
    if notes["conditional_fail"]:
        out["conditional_fail"] = (
            f"Conditional fail ({notes['conditional_fail']}): the measured error is beyond the MPE by less than U; "
            "the probability that the true error lies within the MPE is less than about 50 %, so the point counts "
            "as out of tolerance (ILAC-G8:09/2019).")
    if any(p["low_tur"] for p in points):
        limit = f"{uncertainty.TUR_WARNING:.6g}"
        applied = ("guarded acceptance (w = U) was applied" if guarded else
                   "risk-based acceptance (PFA within the target) was applied" if rule == "risk" else
                   "simple acceptance was applied")
        out["low_tur"] = (
            f"Test uncertainty ratio below {limit}:1 at the points marked “below {limit}:1”: the uncertainty of the "
            f"calibration is large against the tolerance there, so the risk of a false accept is higher; {applied}.")
    return out


# Drift history as it stood at signing ------------------------------------------------------------------------
def _worst(errors):
    errors = [e for e in errors if e is not None]
    return max(errors, key=abs) if errors else None


def device_key(model) -> str:
    """The name of `model`'s foreign key to its device: `device`; `meter` in the historical models of the migrations
    before Meter was renamed Device (issue 28), which calibration 0010 rebuilds signed content through."""
    return "device" if any(f.name == "device" for f in model._meta.get_fields()) else "meter"  # rename: keep


def device_id_of(record) -> int | None:
    return getattr(record, f"{device_key(type(record))}_id")


def drift_rows(Event, Point, event, own_points) -> list:
    """[date, worst as-found, worst as-left] of the device's signed calibrations up to and including `event`.

    Those signed no later than `event` and performed no later than it; one replaced by a correction signed in that
    window (or by `event` itself) is left out. With no as-left points the as-left condition is the as-found one.
    `Event`/`Point`: the models (the app's, or a migration's); `own_points`: `event`'s point contents, so the
    rows can be built while it is being signed."""
    others = (Event.objects.filter(**{f"{device_key(Event)}_id": device_id_of(event)}, state=SIGNED,
                                   signed_at__lte=event.signed_at, performed_on__lte=event.performed_on)
              .exclude(pk=event.pk))
    replaced = set(Event.objects.filter(supersedes__in=others, state=SIGNED, signed_at__lte=event.signed_at)
                   .values_list("supersedes_id", flat=True))
    if event.supersedes_id:
        replaced.add(event.supersedes_id)
    errors = {}
    for event_id, kind, error in (Point.objects.filter(event__in=others).order_by()
                                  .values_list("event_id", "kind", "error")):
        errors.setdefault(event_id, {AS_FOUND: [], AS_LEFT: []})[kind].append(error)
    rows = [(event.performed_on, {AS_FOUND: [p["error"] for p in own_points if p["kind"] == AS_FOUND],
                                  AS_LEFT: [p["error"] for p in own_points if p["kind"] == AS_LEFT]}, event.pk)]
    for pk, day in others.order_by().values_list("pk", "performed_on"):
        if pk not in replaced:
            rows.append((day, errors.get(pk, {AS_FOUND: [], AS_LEFT: []}), pk))
    out = []
    for day, by_kind, pk in sorted(rows, key=lambda row: (row[0], row[2])):
        found, left = _worst(by_kind[AS_FOUND]), _worst(by_kind[AS_LEFT])
        out.append([day.isoformat(), _num(found), _num(found if left is None else left)])
    return out


# The content ------------------------------------------------------------------------------------------------
def build(event, *, points, device, position, area, site, fluid, standards, history, lab, product,
          supersedes=None, how=AT_SIGN_OFF, from_current_register=(), conformity=None) -> dict:
    """The certificate's content as plain JSON-able data. Every argument is a model instance (the app's or a
    historical version) or None, except `points` (point_content dicts), `standards` (standard_snapshot dicts),
    `history` (drift_rows), `lab` ({name, address}) and `product`; `conformity` (conformity_fleet.event_conformity,
    version 2) or None (version 1: no conformity section, nothing said about risks)."""
    device_units = event.meter_units or device.flow_units
    entered_units = event.reference_units or device_units
    converted, density_used = unit_facts(entered_units, device_units, event.density_kg_m3)
    basis_label = _label(device, "mpe_basis")
    unit = error_unit(device.mpe_basis, basis_label, device_units)
    found = [p for p in points if p["kind"] == AS_FOUND]
    left = [p for p in points if p["kind"] == AS_LEFT]
    left_or_found = left or found  # no as-left points: the as-left condition is the as-found one
    correction = None
    if supersedes is not None:
        correction = {"replaces_event": supersedes.pk, "replaces_number": certificate_number(supersedes),
                      "replaces_performed_on": supersedes.performed_on.isoformat(),
                      "replaces_issued_on": _local_date(supersedes.signed_at) if supersedes.signed_at else None,
                      "reason": event.correction_reason}
    content = {
        "version": VERSION if conformity is not None else VERSION_WITHOUT_CONFORMITY,
        "frozen": {"how": how, "from_current_register": sorted(from_current_register)},
        "product": product,
        "certificate": {"number": certificate_number(event), "issued_on": _local_date(event.signed_at),
                        "event": event.pk},
        "laboratory": dict(lab),
        "customer": {"site": site.name, "address": site.address} if site is not None else None,
        "position": ({"tag": position.tag, "area": area.name if area is not None else None,
                      "site": site.name if site is not None else None, "line_size": position.line_size}
                     if position is not None else None),
        "service_fluid": fluid.name if fluid is not None else None,
        "device": {
            "register_number": device.id, "serial": device.serial, "maker": device.maker, "model": device.model,
            "principle": device.principle, "principle_display": _label(device, "principle"),
            "wetted_material": device.wetted_material,
            "wetted_material_display": _label(device, "wetted_material") if device.wetted_material else "",
            "material_details": device.material_details,
            "label": f"S/N {device.serial}" if device.serial else f"device #{device.id}",
        },
        "range": {"min": _num(device.range_min), "max": _num(device.range_max), "units": device_units,
                  "units_label": units.label_for(device_units)},
        "mpe": {"value": _num(device.mpe_value), "basis": device.mpe_basis, "basis_display": basis_label,
                "error_unit": unit, "specification": f"± {device.mpe_value:.6g} {unit}"},
        "calibration": {
            "performed_on": event.performed_on.isoformat(), "reason": event.reason,
            "reason_display": _label(event, "reason"), "technician": event.technician,
            "contractor": event.contractor, "condition_received": event.condition_received,
            "deviations": event.deviations, "procedure": event.procedure, "adjusted": bool(event.adjusted),
            "notes": event.notes,
        },
        "environment": {
            "ambient_temp_c": _num(event.ambient_temp_c), "fluid_temp_c": _num(event.fluid_temp_c),
            "pressure_bar": _num(event.pressure_bar), "density_kg_m3": _num(event.density_kg_m3),
            "density_used": density_used, "converted": converted,
            "entered_units": entered_units, "entered_units_label": units.label_for(entered_units),
            "device_units": device_units, "device_units_label": units.label_for(device_units),
        },
        "standards": list(standards),
        "points": {"as_found": found, "as_left": left},
        "decision": {
            "rule": event.decision_rule, "rule_display": _label(event, "decision_rule"),
            "as_found_in_tolerance": event.as_found_in_tolerance,
            "as_left_in_tolerance": event.as_left_in_tolerance,
            "as_found_verdict": decision.verdict_text_for(event.decision_rule, event.as_found_in_tolerance,
                                                          [p["decision"] for p in found]),
            "as_left_verdict": decision.verdict_text_for(event.decision_rule, event.as_left_in_tolerance,
                                                         [p["decision"] for p in left_or_found]),
            "low_tur": any(p["low_tur"] for p in points), "tur_limit": uncertainty.TUR_WARNING,
            "coverage_pct": uncertainty.COVERAGE_PROBABILITY * 100,
            "statements": statements(event.decision_rule, device.mpe_value, unit, points),
        },
        "drift_history": history,
        "signature": {"signed_by": event.signed_by, "signed_role": event.signed_role,
                      "signed_at": event.signed_at.isoformat() if event.signed_at else None},
        "correction": correction,
    }
    if conformity is not None:
        # each point's p_c and PFA beside its other values, the calibration's figures in their own section
        for p, risk in zip(points, conformity["points"]):   # the same points, in the same order
            p["p_c"], p["pfa"] = risk["p_c"], risk["pfa"]
        content["conformity"] = {key: value for key, value in conformity.items() if key != "points"}
    return content


def _ordered_points(points):
    return [point_content(p) for p in sorted(points, key=lambda p: (p.kind, p.nominal_pct, p.pk or 0))]


def served_fluid_id(DutyPeriod, device_id, position_id, day):
    """The fluid the device served at the position on `day` (its duty history), or None when none is recorded."""
    duty = (DutyPeriod.objects.filter(**{f"{device_key(DutyPeriod)}_id": device_id}, position_id=position_id,
                                      since__lte=day)
            .filter(Q(until__isnull=True) | Q(until__gte=day)).order_by("-since", "-id")
            .values_list("fluid_id", flat=True).first())
    return duty


def at_sign_off(event, points) -> dict:
    """The content of `event` being signed now (state, signer and signing time already set on it, not saved):
    everything from the register as it stands, the standards from event.standards_snapshot."""
    from calibration.models import CalibrationEvent, CalibrationPoint
    from plant.models import DutyPeriod, Fluid

    device, position = event.device, event.position
    area = position.area if position is not None else None
    site = area.site if area is not None else None
    fluid = None
    if position is not None:
        fluid_id = served_fluid_id(DutyPeriod, event.device_id, position.pk, event.performed_on)
        fluid = Fluid.objects.get(pk=fluid_id) if fluid_id else position.fluid
    from calibration.conformity_fleet import event_conformity, prior_for_meter

    ordered = sorted(points, key=lambda p: (p.kind, p.nominal_pct, p.pk or 0))
    own = [point_content(p) for p in ordered]
    # the prior of like devices as stored by the last fleet recompute, and the PFA target now (issue 31); the
    # acceptance limit each point was decided with (version 2)
    for content, point in zip(own, ordered):
        content["acceptance_limit"] = _num(point.acceptance_limit)
    conformity = event_conformity(own, event.decision_rule, prior_for_meter(device))
    return build(event, points=own, device=device, position=position, area=area, site=site, fluid=fluid,
                 standards=event.standards_snapshot,
                 history=drift_rows(CalibrationEvent, CalibrationPoint, event, own),
                 lab=laboratory(), product=settings.PRODUCT_NAME, supersedes=event.supersedes,
                 conformity=conformity)


def _as_of(History, pk, moment):
    """The audit-trail version of object `pk` current at `moment`, or None when the trail has none by then."""
    if pk is None or moment is None:
        return None
    return (History.objects.filter(id=pk, history_date__lte=moment).order_by("-history_date", "-history_id")
            .first())


def rebuilt(event, apps) -> dict:
    """The content of a record signed without it, from the audit trail (django-simple-history) as of its signing
    time: the device's, position's, fluid's and standards' versions then; the register as it stands where the
    trail holds no version (areas and sites keep none), and the content lists those parts.
    `apps`: the app registry (django.apps.apps) or a migration's."""
    get = apps.get_model
    at = event.signed_at
    current = set()

    def version(app, model, pk, part):
        found = _as_of(get(app, f"Historical{model}"), pk, at)
        if found is None and pk is not None:
            current.add(part)
            return get(app, model).objects.get(pk=pk)
        return found

    device_model = "Device" if device_key(type(event)) == "device" else "Meter"  # rename: keep
    device = version("plant", device_model, device_id_of(event), "device")
    position = version("plant", "Position", event.position_id, "position")
    area = site = fluid = None
    if position is not None:
        area = get("plant", "Area").objects.get(pk=position.area_id)
        site = get("plant", "Site").objects.get(pk=area.site_id)
        current.update({"area", "site"})  # neither keeps an audit trail
        fluid_id = served_fluid_id(get("plant", "DutyPeriod"), device_id_of(event), event.position_id,
                                   event.performed_on) or position.fluid_id
        fluid = version("plant", "Fluid", fluid_id, "service fluid")
    standards = list(event.standards_snapshot or [])
    if not standards:
        for standard in event.reference_standards.order_by("identification"):
            found = _as_of(get("calibration", "HistoricalReferenceStandard"), standard.pk, at)
            if found is None:
                current.add("reference standards")
            standards.append(standard_snapshot(found or standard))
    current.add("laboratory")  # settings keep no history
    own = _ordered_points(event.points.all())
    supersedes = get("calibration", "CalibrationEvent").objects.get(pk=event.supersedes_id) \
        if event.supersedes_id else None
    return build(event, points=own, device=device, position=position, area=area, site=site, fluid=fluid,
                 standards=standards,
                 history=drift_rows(get("calibration", "CalibrationEvent"), get("calibration", "CalibrationPoint"),
                                    event, own),
                 lab=laboratory(), product=settings.PRODUCT_NAME, supersedes=supersedes, how=FROM_AUDIT_TRAIL,
                 from_current_register=current)


def fill_missing(apps, batch=500) -> int:
    """Store the rebuilt content on every signed record that has none; returns how many. Writes through the
    base manager of `apps`' model, without the lock of the app's manager: it fills a field no signature covered."""
    Event = apps.get_model("calibration", "CalibrationEvent")
    # the ids first, then batches: SQLite does not isolate a running read from writes to the same table
    ids = list(Event.objects.filter(state=SIGNED).order_by("pk").values_list("pk", flat=True))
    done = 0
    for start in range(0, len(ids), batch):
        pending = [event for event in Event.objects.filter(pk__in=ids[start:start + batch]) if not event.signed_content]
        for event in pending:
            event.signed_content = rebuilt(event, apps)
        Event._base_manager.bulk_update(pending, ["signed_content"])
        done += len(pending)
    return done
