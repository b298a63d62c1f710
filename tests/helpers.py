"""Helpers shared by test modules (plain functions and constants, no fixtures: those are in the root conftest.py).

A test module imports from here, never from another test module (tests/test_layout.py checks that)."""
import csv
import datetime as dt
import io
import math
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from django.conf import settings
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import ManagementUtility
from django.db import connections
from django.test import Client
from django.utils import timezone
from PIL import Image

from calibration import dcc, dcc_schema
from calibration.models import CalibrationEvent, CalibrationPoint, Countersignature, ReferenceStandard
from maintenance.models import MaintenancePhoto, MaintenanceRecord, MaintenanceTask
from plant.installations import commission
from plant.models import Area, Fluid, Device, Site

# People ---------------------------------------------------------------------------------------------------------


def user_with_role(role, username=None):
    from django.contrib.auth.models import Group, User

    user = User.objects.create_user(username or role, password="pw", first_name=role.capitalize(), last_name="Tester")
    user.groups.add(Group.objects.get(name=role))
    if role == "administrator":
        user.is_staff = True
        user.save()
    return user


def send_twice_at_once(user, send_one):
    """Two logged-in clients of `user` call send_one(client) at the same moment; their status codes.

    The clients log in here, one after the other (two threads writing sessions at once would race on their
    own); a thread that dies fails the caller's assertion instead of leaving the other at the barrier."""
    import threading

    from django.db import connection

    barrier = threading.Barrier(2, timeout=60)
    statuses, failures = [], []
    clients = []
    for _ in range(2):
        client = Client()
        client.force_login(user)
        clients.append(client)

    def go(client):
        try:
            barrier.wait()
            statuses.append(send_one(client).status_code)
        except Exception as exc:
            failures.append(repr(exc))
            barrier.abort()
        finally:
            connection.close()

    threads = [threading.Thread(target=go, args=(c,)) for c in clients]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert failures == [] and not any(t.is_alive() for t in threads), failures
    return statuses


# The tablet's calibration form ----------------------------------------------------------------------------------
TODAY = dt.date(2026, 11, 20)  # the date the small worlds' calibrations are entered on
PROCEDURE = "WI-CAL-07 comparison against portable master meter, five points"  # the certificate world's


def entry_data(standard, adjusted=False, found=None, left=None, **event):
    """POST data of the tablet form: 5 as-found rows, 5 as-left rows; `event` overrides "ev-..." keys."""
    from calibration.forms import entry_post_data

    found = found if found is not None else [(4, 4.01), (10, 10.02), (20, 20.05), (30, 29.97), (40, 40.04)]
    left = left if left is not None else [("", "")] * 5
    header = {
        "performed_on": TODAY.isoformat(), "reference_standards": [standard.pk],
        "procedure": "Comparison against portable master meter, five points", "reason": "scheduled",
        "condition_received": "Installed, in service, no visible damage",
        "decision_rule": "simple", "ambient_temp_c": "18", "fluid_temp_c": "12", "pressure_bar": "3",
    }
    if adjusted:
        header["adjusted"] = "on"
    data = entry_post_data(header, found, left)
    data.update(event)
    return data


def certificate_entry_data(standard, performed_on=TODAY, **kwargs):
    """POST data of the tablet form, with the certificate world's procedure text and date."""
    return entry_data(standard, **{"ev-performed_on": performed_on.isoformat(), "ev-procedure": PROCEDURE, **kwargs})


def enter(client, device, standard, **kwargs):
    from calibration.models import CalibrationEvent

    before = set(CalibrationEvent.objects.values_list("pk", flat=True))
    response = client.post(f"/positions/{device.tag}/calibrate/", certificate_entry_data(standard, **kwargs))
    assert response.status_code == 302, response.content.decode()[:2000]
    return CalibrationEvent.objects.exclude(pk__in=before).get()


def sign(client, event, at, monkeypatch, by="B. Signatory", role="Technician"):
    with monkeypatch.context() as m:
        m.setattr(timezone, "now", lambda: at)
        response = client.post(f"/calibrations/{event.pk}/sign/", {"signed_by": by, "signed_role": role})
    assert response.status_code == 302
    event.refresh_from_db()
    assert event.is_signed
    return event


def at(day, hour=10):
    return dt.datetime.combine(day, dt.time(hour), tzinfo=dt.timezone.utc)


# Certificates ---------------------------------------------------------------------------------------------------
def pdf_text(content):
    from pypdf import PdfReader

    assert content[:5] == b"%PDF-"
    reader = PdfReader(io.BytesIO(content))
    return reader, "\n".join(page.extract_text() for page in reader.pages)


def flat(text):
    return re.sub(r"\s+", " ", text)


def has(text, *parts):
    """The parts appear in order, separated by nothing but (optional) whitespace: PDF text spacing varies."""
    return re.search(r"\s*".join(re.escape(part) for part in parts), text) is not None


# Guarded acceptance: one as-found point at 20 m³/h with a hand-worked error ---------------------------------------
GUARD_DAY = dt.date(2026, 11, 20)
# indicated value at a reference of 20 m³/h for each hand-worked error (% of reading)
INDICATED = {0.0: "20", 0.5: "20.1", 0.75: "20.15", 0.875: "20.175", 1.0: "20.2", 1.125: "20.225", 1.25: "20.25",
             -0.5: "19.9", -0.75: "19.85", -0.875: "19.825", -1.0: "19.8", -1.25: "19.75"}


def guarded_standard(U):
    """A standard whose certificate states U_ref at k = 2 such that the point's own U (the reference is its only
    component, nu_eff = inf, so k = 1.960 for 95 %, JCGM 100:2008 G.3.2) comes out as `U`: U_ref = U * 2 / 1.960."""
    from calibration.models import ReferenceStandard
    from calibration.uncertainty import coverage_factor

    u_ref = U * 2 / coverage_factor(math.inf)
    return ReferenceStandard.objects.create(identification=f"RS-U{U}", description="Master meter", range_min=0,
                                            range_max=50, certificate_number=f"C-{U}", due_date=dt.date(2027, 6, 1),
                                            expanded_uncertainty=u_ref, uncertainty_basis="pct_reading")


def calibrate(device, ref_standard, rule, errors, day=GUARD_DAY):
    """Record and sign one calibration with as-found points at 20 m³/h (50 %), or at several nominals."""
    from calibration.models import CalibrationEvent, CalibrationPoint

    event = CalibrationEvent.objects.create(device=device, performed_on=day, technician="A. Tester",
                                            procedure="Comparison against the master meter", decision_rule=rule)
    event.reference_standards.add(ref_standard)
    for i, error in enumerate(errors):
        CalibrationPoint.objects.create(event=event, kind="as_found", nominal_pct=50 + i, reference_value=20,
                                        indicated_value=float(INDICATED[error]))
    event.sign(by="A. Tester", role="Technician",
               at=dt.datetime.combine(day, dt.time(12), tzinfo=dt.timezone.utc))
    return event


# The browser tests ----------------------------------------------------------------------------------------------
CHROMIUM = Path("/usr/bin/chromium")
LAUNCH_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-quic",
               "--no-first-run", "--disable-component-update", "--disable-sync"]
TABLET = {"width": 820, "height": 1180}
ARTIFACTS = Path(settings.BASE_DIR) / "test-artifacts" / "browser"
# Smallest touch target we accept, in CSS px (common practice: Apple's HIG asks 44 pt, Material 48 dp).
MIN_TOUCH = 44
TIMEOUT_MS = 15_000


def assert_touch_size(locator, what):
    box = locator.bounding_box()
    assert box is not None, f"{what} is not displayed"
    assert box["height"] >= MIN_TOUCH, f"{what} is {box['height']:.0f} px high, below {MIN_TOUCH} px"


def assert_no_sideways_scroll(page, where):
    widths = page.evaluate("[document.documentElement.scrollWidth, document.documentElement.clientWidth]")
    assert widths[0] <= widths[1], f"{where}: page is {widths[0]} px wide in a {widths[1]} px tablet viewport"


def fill_points(page, prefix, rows):
    for i, (ref, ind) in enumerate(rows):
        page.locator(f'[name="{prefix}-{i}-reference_value"]').fill(str(ref))
        page.locator(f'[name="{prefix}-{i}-indicated_value"]').fill(str(ind))


# The register import --------------------------------------------------------------------------------------------
PRINCIPLES = ["electromagnetic", "coriolis", "vortex", "ultrasonic_clampon", "orifice", "turbine"]


def row(tag, n, **overrides):
    values = {
        "tag": tag, "principle": PRINCIPLES[n % len(PRINCIPLES)], "site": "North" if n % 3 else "South",
        "area": "Hall A" if n % 2 else "Pump house", "fluid": ["Water", "Brine", "Lime slurry"][n % 3],
        "line_size": "DN80", "internal_diameter_mm": "77.9", "range_min": "0", "range_max": str(50 + n),
        "flow_units": "m3/h", "normal_flow": "20", "min_flow": "2", "required_accuracy_pct": "1",
        "wetted_material": ["316L", "", "titanium"][n % 3], "material_details": "", "serial": f"SN-{tag}",
        "maker": "Invented Works", "model": "M1", "mpe_value": "0.5", "mpe_basis": "pct_reading",
        "base_interval_days": str(200 + n),
    }
    values.update(overrides)
    return values


# Maintenance records --------------------------------------------------------------------------------------------
def task_of(device, code):
    return MaintenanceTask.objects.get(device=device, code=code)


def post_data(chosen, **extra):
    data = {"performed_on": timezone.localdate().isoformat(), "task": str(chosen.pk), "condition": "blocked",
            "action": "Pulled the probe, rodded the ports clear, refitted.", "parts": "", "minutes_spent": "50",
            "notes": ""}
    data.update(extra)
    return data


# The review's lists ---------------------------------------------------------------------------------------------
def make_meter(tag, area, fluid, principle="electromagnetic", **due):
    # MISAPPLIED-1 is not fit for its duty on purpose: it goes in with a reason, as a reviewer would write one
    device = commission(tag=tag, principle=principle, area=area, fluid=fluid, line_size="DN50",
                       internal_diameter_mm=52.5, range_max=40, mpe_value=0.5, wetted_material="316L",
                       unfit_reason="Test plant: the review must list it as not fit.")
    if due:
        Device.objects.filter(pk=device.pk).update(**due)
    return device


def export(client, key, **params):
    response = client.get("/review/", {"export": key, **params})
    assert response.status_code == 200
    rows = list(csv.reader(io.StringIO(response.content.decode())))
    return rows[0], rows[1:]


# Every URL of the site ------------------------------------------------------------------------------------------
def url_patterns(resolver=None, prefix=""):
    """(route, pattern) for every URL of the site but Django's admin (which serves no files here)."""
    from django.urls import URLResolver, get_resolver

    for entry in (resolver or get_resolver()).url_patterns:
        route = prefix + str(entry.pattern)
        if isinstance(entry, URLResolver):
            if getattr(entry, "app_name", None) != "admin":
                yield from url_patterns(entry, route)
        else:
            yield route, entry


# The record chain: a small world with one of each signed record -------------------------------------------------
def png(colour):
    buffer = io.BytesIO()
    Image.new("RGB", (6, 4), colour).save(buffer, "PNG")
    return buffer.getvalue()


def draft_calibration(device, standard, tech, found=((4, 4.01), (20, 20.05), (40, 40.04))):
    event = CalibrationEvent.objects.create(
        device=device, performed_on=device.today(), technician="Tess Tester", performed_by=tech, created_by=tech,
        procedure="Comparison against the portable reference, three points", condition_received="In service")
    event.reference_standards.add(standard)
    for reference, indicated in found:
        CalibrationPoint.objects.create(event=event, kind="as_found", nominal_pct=reference / 40 * 100,
                                        reference_value=reference, indicated_value=indicated)
    return event


def draft_maintenance(device, tech, photos=()):
    task = MaintenanceTask.objects.filter(device=device).first()
    record = MaintenanceRecord.objects.create(device=device, task=task, performed_on=device.today(), technician="T",
                                              condition="light_deposit", action="Cleaned the electrodes.",
                                              minutes_spent=40, created_by=tech)
    for i, data in enumerate(photos):
        photo = MaintenancePhoto(record=record, content_type="image/png")
        photo.image.save(f"p{i}.png", SimpleUploadedFile(f"p{i}.png", data), save=False)
        photo.save()
    return record


def build_world():
    """An invented plant with one of each signed record (a calibration countersigned, a maintenance record with
    two photos) and a draft calibration; MEDIA_ROOT must point at a scratch folder."""
    site = Site.objects.create(name="Chain site")
    area = Area.objects.create(site=site, name="Hall")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=400)
    device = commission(tag="FT-L1", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                       internal_diameter_mm=52.5, range_max=40, mpe_value=0.5, wetted_material="316L")
    standard = ReferenceStandard.objects.create(identification="RS-L", description="ref", range_max=40,
                                                certificate_number="C-L", due_date=dt.date(2099, 1, 1),
                                                expanded_uncertainty=0.1)
    tech, reviewer = user_with_role("technician", "tech-l"), user_with_role("reviewer", "reviewer-l")
    signed = draft_calibration(device, standard, tech).sign(by="Tess Tester")
    counter = Countersignature.objects.create(event=signed, user=reviewer, name="Rev Tester", role="Reviewer")
    maintenance = draft_maintenance(device, tech, photos=[png((200, 10, 10)), png((10, 10, 200))]).sign(by="T")
    draft = draft_calibration(device, standard, tech, found=((10, 10.1),))
    return {"device": device, "standard": standard, "tech": tech, "reviewer": reviewer, "signed": signed,
            "counter": counter, "maintenance": maintenance, "draft": draft}


def run_manage(monkeypatch, *argv):
    """Run a management command as `manage.py` does; its exit status (0 when it returns normally)."""
    monkeypatch.setattr(connections, "close_all", lambda: None)  # the test's own transaction stays open
    try:
        ManagementUtility(["manage.py", *argv]).execute()
    except SystemExit as exc:
        return exc.code
    return 0


# Digital calibration certificates: an independent reading (ElementTree, by element and refType) -----------------
NS = {"dcc": "https://ptb.de/dcc", "si": "https://ptb.de/si", "ds": "http://www.w3.org/2000/09/xmldsig#"}


needs_schema = pytest.mark.skipif(
    not dcc_schema.schema_available(),
    reason=f"DCC schema files not found in {dcc_schema.schema_dir()} (set {dcc_schema.ENV}); schema validation skipped")


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
