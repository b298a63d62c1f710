"""A signed calibration as a Digital Calibration Certificate (DCC 3.2.0, PTB's XML schema; units in D-SI 2.1.0).

``build(content)`` takes the content frozen into the record at sign-off (calibration/signed_content.py) and returns
the XML document, nothing read from the register: the PDF renders from the same content, so the two always carry
the same numbers. Values are written with Python's shortest round-trip form (``repr`` of the float), so a parser
reads back exactly the float the content holds.

What goes where (DCC 3.2.0 element names):

* ``coreData``: uniqueIdentifier = certificate number; begin/end performance date = calibration date; issueDate =
  signing date (local); performanceLocation ``customer`` for a calibration at the position (in situ), ``laboratory``
  on the bench; identifications: the register number and the SHA-256 of the signed content (the one the PDF
  prints).
* ``items``: the device (maker, model, serial, register number, position tag) with its calibrated range.
* ``calibrationLaboratory``, ``customer`` (the site; a bench calibration without a site names the laboratory),
  ``respPersons`` (performed by, signed by as main signer, and a countersignature when there is one).
* ``statements``: as-found and as-left conformity (``basic_conformity``), the decision rule (ILAC-G8:09/2019) and
  its notes, a correction's reason and the certificate it replaces.
* ``measurementResults``: one result for as-found, one for as-left; per point a ``dcc:list`` holding the nominal
  (% of range), reference value, indicated value, error with its expanded uncertainty U (coverage factor k,
  coverage probability 0.95, normal distribution), the MPE, and the point's conformity; reference standards as
  signed (certificate number, issuer, due date, U) as measuring equipment; ambient and fluid temperature, line
  pressure and density as influence conditions.

refTypes: ``basic_*`` names are those the DCC's published examples use (e.g. basic_referenceValue,
basic_measuredValue, basic_measurementError, basic_conformity, basic_normalUsed, basic_uncertainty);
the rest carry the project's own prefix ``quenby_``.

Units: flow units map to D-SI strings (``D_SI``); US gallons and pounds have no D-SI unit and are written as
non-D-SI units marked with a leading ``|`` (the D-SI syntax for a unit outside the SI). Each string is checked
with the ``dsiunits`` package (``check_unit``).
"""
from __future__ import annotations

import math
import warnings
from functools import lru_cache

from lxml import etree

DCC_NS = "https://ptb.de/dcc"
SI_NS = "https://ptb.de/si"
XSI_NS = "http://www.w3.org/2001/XMLSchema-instance"
DS_NS = "http://www.w3.org/2000/09/xmldsig#"
NSMAP = {"dcc": DCC_NS, "si": SI_NS, "xsi": XSI_NS}
SCHEMA_VERSION = "3.2.0"
SCHEMA_LOCATION = "https://ptb.de/dcc https://ptb.de/dcc/v3.2.0/dcc.xsd"
PREFIX = "quenby_"
LANG = "en"

# Flow unit codes (plant/units.py) -> D-SI unit strings (D-SI 2.1.0; a leading "|" marks a non-SI unit).
D_SI = {
    "m3/h": r"\metre\tothe{3}\hour\tothe{-1}",
    "L/s": r"\litre\second\tothe{-1}",
    "L/min": r"\litre\minute\tothe{-1}",
    "USgpm": r"|USgallon\minute\tothe{-1}",
    "kg/h": r"\kilogram\hour\tothe{-1}",
    "kg/s": r"\kilogram\second\tothe{-1}",
    "t/h": r"\tonne\hour\tothe{-1}",
    "lb/h": r"|pound\hour\tothe{-1}",
    # gas volume at reference conditions: the volume unit, the reference conditions in the quantity's label
    "Nm3/h": r"\metre\tothe{3}\hour\tothe{-1}",
    "Sm3/h": r"\metre\tothe{3}\hour\tothe{-1}",
}
PERCENT = r"\percent"
CELSIUS = r"\degreecelsius"
BAR = r"\bar"
KG_PER_M3 = r"\kilogram\metre\tothe{-3}"

# Point decisions (calibration/decision.py) -> DCC conformity status (stringConformityStatementStatusType)
CONFORMITY = {"pass": "pass", "fail": "fail", "conditional pass": "conditionalPass",
              "conditional fail": "conditionalFail"}
CAMEL = {"as_found": "asFound", "as_left": "asLeft"}
KINDS = (("as_found", "As found", "beforeAdjustment"), ("as_left", "As left", "afterAdjustment"))


class DccError(ValueError):
    """Content that cannot be written as a DCC (an unknown unit), with the reason in words."""


@lru_cache(maxsize=None)
def check_unit(dsi: str) -> str:
    """`dsi` if the dsiunits package parses it as a D-SI unit (or a correctly marked non-SI one), else DccError."""
    from dsi_unit import DsiUnit

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        parsed = DsiUnit(dsi)
    if not parsed.valid:
        raise DccError(f"{dsi!r} is not a D-SI unit: {'; '.join(str(w) for w in parsed.warnings)}")
    return dsi


def dsi_flow_unit(code: str) -> str:
    """The D-SI unit string of a flow unit code (m3/h -> \\metre\\tothe{3}\\hour\\tothe{-1})."""
    try:
        return check_unit(D_SI[code])
    except KeyError:
        raise DccError(f"The flow unit {code!r} has no D-SI form here; known: {', '.join(D_SI)}.") from None


def error_dsi_unit(mpe_basis: str, device_units: str) -> str:
    """The unit errors, MPE and U are stated in: % (of reading or of span) or the flow unit for an absolute MPE."""
    return dsi_flow_unit(device_units) if mpe_basis == "absolute" else check_unit(PERCENT)


def uncertainty_dsi_unit(basis: str, units_code: str) -> str:
    """A reference standard's U: % of reading, or absolute in its own flow unit."""
    return dsi_flow_unit(units_code) if basis == "absolute" else check_unit(PERCENT)


def number(value) -> str:
    """The shortest text that reads back as the same float (D-SI decimalType accepts it)."""
    value = float(value)
    if not math.isfinite(value):
        raise DccError(f"{value} cannot be written as a D-SI number.")
    return repr(value)


# Element helpers ---------------------------------------------------------------------------------------------
def _q(ns, tag):
    return f"{{{ns}}}{tag}"


def sub(parent, tag, text=None, ns=DCC_NS, **attrs):
    element = etree.SubElement(parent, _q(ns, tag), {k: v for k, v in attrs.items() if v is not None})
    if text is not None:
        element.text = str(text)
    return element


def _clean(text) -> str:
    """Text for notEmptyStringType: runs of white space to one space, no leading or trailing space."""
    return " ".join(str(text or "").split())


def text(parent, tag, *contents, ref_type=None):
    """A textType/richContentType element with one English content per non-empty string."""
    element = sub(parent, tag, refType=ref_type)
    for content in contents:
        if _clean(content):
            sub(element, "content", str(content).strip(), lang=LANG)
    return element


def real(parent, value, unit, *, label=None, uncertainty=None, k=None, p=None):
    """si:real with an optional expanded uncertainty (JCGM 100:2008 §6: U = k·u_c at coverage probability p)."""
    element = sub(parent, "real", ns=SI_NS)
    if label:
        sub(element, "label", label, ns=SI_NS)
    sub(element, "value", number(value), ns=SI_NS)
    sub(element, "unit", check_unit(unit), ns=SI_NS)
    if uncertainty is not None and k is not None and p is not None:
        unc = sub(element, "expandedUnc", ns=SI_NS)
        sub(unc, "uncertainty", number(abs(uncertainty)), ns=SI_NS)
        sub(unc, "coverageFactor", number(k), ns=SI_NS)
        sub(unc, "coverageProbability", number(p), ns=SI_NS)
        sub(unc, "distribution", "normal", ns=SI_NS)
    return element


def quantity(parent, ref_type, name, value, unit, **kwargs):
    """dcc:quantity with a name and an si:real; nothing when the value is None."""
    if value is None:
        return None
    element = sub(parent, "quantity", refType=ref_type)
    text(element, "name", name)
    real(element, value, unit, **kwargs)
    return element


def identification(parent, issuer, value, name, ref_type=None):
    if not _clean(value):
        return None
    element = sub(parent, "identification", refType=ref_type)
    sub(element, "issuer", issuer)
    sub(element, "value", _clean(value))
    text(element, "name", name)
    return element


def contact(parent, tag, name, address, *, strict=True):
    element = sub(parent, tag)
    text(element, "name", name or "not recorded")
    if strict or _clean(address):
        location = sub(element, "location")
        lines = [line.strip() for line in str(address or "").splitlines() if line.strip()]
        text(location, "further", *(lines or ["address not recorded"]))
    return element


# The document ------------------------------------------------------------------------------------------------
def build(content: dict, *, countersignature: dict | None = None, country: str = "GB",
          software_release: str = "") -> bytes:
    """The DCC 3.2.0 document (UTF-8 bytes) of a signed calibration's frozen content.

    `countersignature`: {name, role, at} of the countersignature, a record made after signing (the PDF prints it
    too), or None. `country`: ISO 3166-1 code of the laboratory. Reads the content with .get so that keys added
    to it later are ignored."""
    root = etree.Element(_q(DCC_NS, "digitalCalibrationCertificate"), nsmap=NSMAP)
    root.set("schemaVersion", SCHEMA_VERSION)
    root.set(_q(XSI_NS, "schemaLocation"), SCHEMA_LOCATION)
    admin = sub(root, "administrativeData")
    _software(admin, content, software_release)
    _core_data(admin, content, country)
    _items(admin, content)
    lab = content.get("laboratory") or {}
    laboratory = sub(admin, "calibrationLaboratory")
    contact(laboratory, "contact", lab.get("name"), lab.get("address"))
    _persons(admin, content, countersignature)
    customer = content.get("customer") or {"site": lab.get("name"), "address": lab.get("address")}
    contact(admin, "customer", customer.get("site"), customer.get("address"))
    _statements(admin, content)
    _results(root, content)
    return etree.tostring(root, xml_declaration=True, encoding="UTF-8", pretty_print=True)


def _software(admin, content, release):
    software = sub(sub(admin, "dccSoftware"), "software")
    text(software, "name", content.get("product") or "Quenby")
    sub(software, "release", _clean(release) or "unknown")
    sub(software, "type", "application")


def _core_data(admin, content, country):
    core = sub(admin, "coreData")
    certificate = content.get("certificate") or {}
    calibration = content.get("calibration") or {}
    device = content.get("device") or {}
    sub(core, "countryCodeISO3166_1", country)
    sub(core, "usedLangCodeISO639_1", LANG)
    sub(core, "mandatoryLangCodeISO639_1", LANG)
    sub(core, "uniqueIdentifier", certificate.get("number"))
    ids = sub(core, "identifications")
    identification(ids, "calibrationLaboratory", str(certificate.get("event", "")), "Calibration record number",
                   ref_type=PREFIX + "recordNumber")
    from calibration.signed_content import digest  # the digest the PDF prints, of the same content

    identification(ids, "calibrationLaboratory", digest(content), "SHA-256 of the signed content",
                   ref_type=PREFIX + "contentSha256")
    if device.get("register_number") is not None:
        identification(ids, "customer", str(device["register_number"]), "Device register number")
    performed = calibration.get("performed_on")
    sub(core, "beginPerformanceDate", performed)
    sub(core, "endPerformanceDate", performed)
    sub(core, "performanceLocation", "customer" if content.get("position") else "laboratory")
    if certificate.get("issued_on"):
        sub(core, "issueDate", certificate["issued_on"])


def _items(admin, content):
    device = content.get("device") or {}
    position = content.get("position") or {}
    range_ = content.get("range") or {}
    item = sub(sub(admin, "items"), "item")
    principle = device.get("principle_display") or device.get("principle") or ""
    text(item, "name", f"Flow meter, {principle}".rstrip(", "))
    where = []
    if position:
        where.append(f"Installed at position {position.get('tag')}"
                     + (f", {position.get('area')}" if position.get("area") else "")
                     + (f", {position.get('site')}" if position.get("site") else "")
                     + (f", line size {position.get('line_size')}" if position.get("line_size") else "") + ".")
    else:
        where.append("Calibrated on the bench (not installed).")
    if content.get("service_fluid"):
        where.append(f"Service fluid: {content['service_fluid']}.")
    if device.get("wetted_material_display"):
        where.append(f"Wetted material: {device['wetted_material_display']}.")
    text(item, "description", *where)
    maker = sub(item, "manufacturer")
    text(maker, "name", device.get("maker") or "not recorded")
    if _clean(device.get("model")):
        sub(item, "model", _clean(device["model"]))
    ids = sub(item, "identifications")
    identification(ids, "manufacturer", device.get("serial"), "Serial number", ref_type=PREFIX + "serial")
    if device.get("register_number") is not None:
        identification(ids, "customer", str(device["register_number"]), "Device register number",
                       ref_type=PREFIX + "registerNumber")
    if position.get("tag"):
        identification(ids, "customer", position["tag"], "Position (tag)", ref_type=PREFIX + "positionTag")
    if range_.get("units") in D_SI and range_.get("max") is not None:
        unit = dsi_flow_unit(range_["units"])
        quantities = sub(item, "itemQuantities")
        for ref, label, value in (("basic_validityRangeMin", "Calibrated range, low", range_.get("min")),
                                  ("basic_validityRangeMax", "Calibrated range, high", range_.get("max"))):
            if value is not None:
                q = sub(quantities, "itemQuantity", refType=ref)
                text(q, "name", label)
                real(q, value, unit, label=range_.get("units_label"))


def _persons(admin, content, countersignature):
    persons = sub(admin, "respPersons")
    calibration = content.get("calibration") or {}
    signature = content.get("signature") or {}

    def person(name, role, main=False, ref=None):
        element = sub(persons, "respPerson", refType=ref)
        text(sub(element, "person"), "name", name or "not recorded")
        sub(element, "role", _clean(role))
        if main:
            sub(element, "mainSigner", "true")

    performed_role = "Performed the calibration" + (
        f" (outside contractor: {calibration['contractor']})" if calibration.get("contractor") else "")
    person(calibration.get("technician"), performed_role, ref=PREFIX + "performedBy")
    person(signature.get("signed_by"), f"Signed ({signature.get('signed_role') or 'signatory'}) "
           f"at {signature.get('signed_at') or 'signing'}", main=True, ref=PREFIX + "signedBy")
    if countersignature:
        person(countersignature.get("name"), f"Authorised: countersigned ({countersignature.get('role')}) "
               f"at {countersignature.get('at')}", ref=PREFIX + "authorisedBy")


def _verdict(in_tolerance):
    return {True: "pass", False: "fail"}.get(in_tolerance)


def _statements(admin, content):
    statements = sub(admin, "statements")
    decision = content.get("decision") or {}
    notes = decision.get("statements") or {}
    for key, label, verdict_key in (("as_found", "As found", "as_found_verdict"),
                                    ("as_left", "As left", "as_left_verdict")):
        statement = sub(statements, "statement", refType=f"basic_conformity {PREFIX}{CAMEL[key]}")
        text(statement, "declaration", f"{label}: {decision.get(verdict_key) or 'no verdict'}")
        status = _verdict(decision.get(f"{key}_in_tolerance"))
        if status:
            sub(statement, "conformity", status)
    rule = sub(statements, "statement", refType=PREFIX + "decisionRule")
    text(rule, "name", f"Decision rule: {decision.get('rule_display') or decision.get('rule') or ''}")
    sub(rule, "norm", "ILAC-G8:09/2019")
    text(rule, "declaration", notes.get("rule") or "")
    for key in ("guard_band", "u_above_mpe", "conditional_fail", "low_tur"):
        if notes.get(key):
            note = sub(statements, "statement", refType=PREFIX + key)
            text(note, "declaration", notes[key])
    calibration = content.get("calibration") or {}
    facts = [(label, calibration.get(key)) for key, label in (
        ("reason_display", "Reason for the calibration"), ("condition_received", "Condition as received"),
        ("deviations", "Deviations from the method"), ("notes", "Notes"))]
    facts.append(("Adjustment made", "yes" if calibration.get("adjusted") else "no"))
    for label, value in facts:
        if _clean(value):
            note = sub(statements, "statement", refType=PREFIX + "calibrationFact")
            text(note, "declaration", f"{label}: {value}")
    correction = content.get("correction")
    if correction:
        note = sub(statements, "statement", refType=PREFIX + "correction")
        sub(note, "norm", "ISO/IEC 17025:2017")
        sub(note, "reference", "7.8.8")
        text(note, "declaration",
             f"This certificate replaces certificate {correction.get('replaces_number')}"
             + (f" issued on {correction['replaces_issued_on']}" if correction.get("replaces_issued_on") else "")
             + f" (ISO/IEC 17025:2017 §7.8.8). Reason: {correction.get('reason') or 'not stated'}")


def _results(root, content):
    results = sub(root, "measurementResults")
    points = content.get("points") or {}
    for key, label, status in KINDS:
        chosen = points.get(key) or []
        if not chosen:
            continue
        result_set = sub(results, "measurementResult", refType=PREFIX + CAMEL[key])
        text(result_set, "name", f"{label}: errors of indication")
        _methods(result_set, content)
        _standards(result_set, content)
        _conditions(result_set, content, status if content.get("calibration", {}).get("adjusted") else None)
        result = sub(sub(result_set, "results"), "result", refType=PREFIX + "errorsOfIndication")
        text(result, "name", f"{label}: error of indication at each point")
        data = sub(result, "data")
        for point in chosen:
            _point(data, content, point)


def _methods(parent, content):
    methods = sub(parent, "usedMethods")
    calibration = content.get("calibration") or {}
    decision = content.get("decision") or {}
    method = sub(methods, "usedMethod", refType=PREFIX + "procedure")
    text(method, "name", "Method / procedure")
    text(method, "description", calibration.get("procedure") or "not recorded")
    unc = sub(methods, "usedMethod", refType="basic_uncertainty")
    text(unc, "name", "Expanded uncertainty")
    text(unc, "description",
         f"U is the expanded uncertainty for a coverage probability of {decision.get('coverage_pct', 95):g} %, with "
         "k from the t distribution at the effective degrees of freedom (Welch–Satterthwaite, JCGM 100:2008 G.4); "
         "with repeat readings the indication used is their mean.")
    sub(unc, "norm", "JCGM 100:2008")
    rule = sub(methods, "usedMethod", refType=PREFIX + "decisionRule")
    text(rule, "name", f"Decision rule: {decision.get('rule_display') or decision.get('rule') or ''}")
    text(rule, "description", (decision.get("statements") or {}).get("rule") or "")
    sub(rule, "norm", "ILAC-G8:09/2019")


def _standards(parent, content):
    standards = content.get("standards") or []
    if not standards:
        return
    equipment = sub(parent, "measuringEquipments")
    for s in standards:
        item = sub(equipment, "measuringEquipment", refType="basic_normalUsed")
        text(item, "name", f"{s.get('identification')}: {s.get('description') or 'reference standard'}")
        description = sub(item, "description")
        if s.get("issuer"):
            sub(description, "content", _clean(s["issuer"]), lang=LANG, refType=PREFIX + "issuer")
        if s.get("due_date"):
            sub(description, "content", s["due_date"], lang=LANG, refType=PREFIX + "dueDate")
        if len(description) == 0:
            sub(description, "content", "reference standard", lang=LANG)
        ids = sub(item, "identifications")
        identification(ids, "calibrationLaboratory", s.get("identification"), "Identification",
                       ref_type=PREFIX + "identification")
        identification(ids, "other", s.get("certificate_number"), "Certificate number",
                       ref_type=PREFIX + "certificateNumber")
        quantities = []
        if s.get("expanded_uncertainty") is not None and s.get("units") in D_SI:
            quantities.append(("basic_expandedUncertainty", f"Expanded uncertainty U (k = 2), "
                               f"{s.get('uncertainty_basis_display') or s.get('uncertainty_basis')}",
                               s["expanded_uncertainty"], uncertainty_dsi_unit(s.get("uncertainty_basis"), s["units"])))
        if s.get("units") in D_SI:
            for ref, label, key in (("basic_validityRangeMin", "Range, low", "range_min"),
                                    ("basic_validityRangeMax", "Range, high", "range_max")):
                if s.get(key) is not None:
                    quantities.append((ref, label, s[key], dsi_flow_unit(s["units"])))
        if quantities:
            block = sub(item, "measuringEquipmentQuantities")
            for ref, label, value, unit in quantities:
                q = sub(block, "measuringEquipmentQuantity", refType=ref)
                text(q, "name", label)
                real(q, value, unit)


def _conditions(parent, content, status):
    env = content.get("environment") or {}
    rows = [("basic_temperature", "Ambient temperature", env.get("ambient_temp_c"), CELSIUS, None),
            (PREFIX + "fluidTemperature", "Fluid temperature", env.get("fluid_temp_c"), CELSIUS, None),
            (PREFIX + "linePressure", "Line pressure (gauge)", env.get("pressure_bar"), BAR, "gauge"),
            (PREFIX + "density", "Fluid density at the calibration"
             + (" (used to convert the reference readings)" if env.get("density_used") else ""),
             env.get("density_kg_m3"), KG_PER_M3, None)]
    rows = [row for row in rows if row[2] is not None]
    if not rows:
        return
    conditions = sub(parent, "influenceConditions")
    for ref, name, value, unit, label in rows:
        condition = sub(conditions, "influenceCondition", refType=ref)
        text(condition, "name", name)
        if status:
            sub(condition, "status", status)
        quantity(sub(condition, "data"), ref, name, value, unit, label=label)


def _point(data, content, point):
    env = content.get("environment") or {}
    mpe = content.get("mpe") or {}
    device_units = env.get("device_units") or (content.get("range") or {}).get("units")
    flow = dsi_flow_unit(device_units)
    err_unit = error_dsi_unit(mpe.get("basis"), device_units)
    decision = content.get("decision") or {}
    p = (decision.get("coverage_pct") or 95) / 100
    nominal = point.get("nominal_pct")
    entry = sub(data, "list", refType=PREFIX + "point")
    text(entry, "name", f"{nominal:g} % of range" if nominal is not None else "point")
    quantity(entry, PREFIX + "nominal", "Nominal (% of range)", nominal, PERCENT)
    quantity(entry, "basic_referenceValue", "Reference value", point.get("reference_value"), flow,
             label=env.get("device_units_label"))
    if env.get("converted") and point.get("reference_entered") is not None:
        quantity(entry, PREFIX + "referenceEntered", "Reference value as read on the standard",
                 point.get("reference_entered"), dsi_flow_unit(env.get("entered_units")),
                 label=env.get("entered_units_label"))
    quantity(entry, "basic_measuredValue", "Indicated value" + (" (mean of repeats)" if point.get("repeats") else ""),
             point.get("indicated"), flow, label=env.get("device_units_label"))
    error = quantity(entry, "basic_measurementError", "Error of indication", point.get("error"), err_unit,
                     label=mpe.get("error_unit"), uncertainty=point.get("expanded_uncertainty"),
                     k=point.get("coverage_factor"), p=p)
    quantity(entry, PREFIX + "mpe", "Maximum permissible error (±)", point.get("mpe"), err_unit,
             label=mpe.get("error_unit"))
    status = CONFORMITY.get(point.get("decision") or "")
    if status and error is not None:
        meta = sub(sub(error, "measurementMetaData"), "metaData", refType="basic_conformity")
        text(meta, "declaration", f"Conformity: {point.get('decision')}")
        sub(meta, "conformity", status)
        if point.get("mpe") is not None:
            limits = sub(meta, "data")
            quantity(limits, "basic_acceptanceLimitLower", "Lower acceptance limit", -abs(point["mpe"]), err_unit)
            quantity(limits, "basic_acceptanceLimitUpper", "Upper acceptance limit", abs(point["mpe"]), err_unit)
