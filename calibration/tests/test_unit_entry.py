"""Units at entry (issue 13): reference readings typed in the reference standard's units, converted to the meter's
before the error is computed; the density for mass against volume; refusals at the field; what the results page,
the certificate, the tablet's offline checks and the importer do with units; signed records keep it all locked.

Sources of the numbers checked here:
* mass flow = volume flow × density (the definition of mass density, kg/m³; BIPM SI Brochure, 9th ed., table 4);
  998.2 kg/m³ is the density of pure water at 20 °C as usually tabulated (quoted from memory);
* 1 L = 1e-3 m³ exactly (BIPM SI Brochure, 9th ed., table 8), so 1 L/s = 3.6 m³/h;
* U combined by root sum of squares and k = 1.960 for infinite degrees of freedom (JCGM 100:2008, 5.1.2 and
  table G.2; k quoted from memory).
"""
import datetime as dt
import html
import json
import uuid

import pytest
from django.db import connection
from django.test import Client
from django.test.utils import CaptureQueriesContext

from calibration.forms import CalibrationEntry, entry_post_data
from calibration.models import CalibrationEvent, CalibrationPoint, ReferenceStandard, SignedRecordError
from offline.rules import entry_rules
from plant import importer
from plant.models import Area, Fluid, Device, Position, Site
from plant.installations import commission
from reports.certificate import certificate_html
from tests.helpers import user_with_role

pytestmark = pytest.mark.django_db
TODAY = dt.date(2026, 11, 20)
WATER_20C = 998.2  # kg/m³, pure water at 20 °C (from memory)


@pytest.fixture
def plant():
    site = Site.objects.create(name="Test site")
    area = Area.objects.create(site=site, name="Hall A")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=500, density_kg_m3=998)
    gas = Fluid.objects.create(name="Natural gas", phase="gas")
    volume = commission(tag="FT-V", principle="electromagnetic", area=area, fluid=water, line_size="DN50",
                                  internal_diameter_mm=52.5, range_min=0, range_max=40, flow_units="m3/h",
                                  mpe_value=0.5, mpe_basis="pct_reading", wetted_material="316L")
    mass = commission(tag="FT-M", principle="thermal_mass", area=area, fluid=gas, line_size="DN50",
                                internal_diameter_mm=52.5, range_min=0, range_max=500, flow_units="kg/h",
                                mpe_value=1.0, mpe_basis="pct_reading", wetted_material="316L")
    gas_volume = commission(tag="FT-G", principle="turbine", area=area, fluid=gas, line_size="DN50",
                                      internal_diameter_mm=52.5, range_min=0, range_max=400, flow_units="m3/h",
                                      mpe_value=1.0, mpe_basis="pct_reading", wetted_material="316L")
    return {"area": area, "water": water, "volume": volume, "mass": mass, "gas_volume": gas_volume}


def standard(ident, units, range_max, basis="pct_reading", U=0.05, range_min=0, phase=""):
    return ReferenceStandard.objects.create(
        identification=ident, description="rig", range_min=range_min, range_max=range_max, units=units,
        certificate_number=f"C-{ident}", due_date=dt.date(2027, 6, 1), expanded_uncertainty=U,
        uncertainty_basis=basis, phase=phase)


@pytest.fixture
def weigh_tank():
    return standard("RS-WT", "kg/h", 50000)


def post(standards, found, density=None, **header):
    data = {
        "performed_on": TODAY.isoformat(), "reference_standards": [s.pk for s in standards],
        "procedure": "Gravimetric, diverter and weigh tank", "reason": "scheduled",
        "condition_received": "Installed, in service", "decision_rule": "simple", **header,
    }
    if density is not None:
        data["density_kg_m3"] = str(density)
    return entry_post_data(data, found)


def counts():
    return CalibrationEvent.objects.count(), CalibrationPoint.objects.count()


@pytest.fixture
def tech():
    client = Client()
    client.force_login(user_with_role("technician", "u-tech"))
    return client


def test_a_kg_h_reading_on_an_m3_h_meter_is_converted_with_the_density(tech, plant, weigh_tank):
    # 19964 kg/h / 998.2 kg/m³ = 20 m³/h exactly (hand-worked); indication 20.05 -> error 100 × 0.05/20 = 0.25 %
    device = plant["volume"]
    response = tech.post(f"/positions/{device.tag}/calibrate/", post([weigh_tank], [(19964, 20.05)], density=WATER_20C))
    assert response.status_code == 302, html.unescape(response.content.decode())[-3000:]
    event = CalibrationEvent.objects.get()
    assert (event.reference_units, event.meter_units, event.density_kg_m3) == ("kg/h", "m3/h", WATER_20C)
    assert event.converted and event.density_used
    point = event.points.get()
    assert point.reference_entered == 19964
    assert point.reference_value == pytest.approx(20.0, rel=1e-12)
    assert point.error == pytest.approx(0.25, abs=1e-9)
    # U: 0.05 % of reading at k = 2 only -> u = 0.025 %, U = 1.95996 × 0.025 = 0.0490 % (a % of reading U does not
    # depend on the unit)
    assert point.expanded_uncertainty == pytest.approx(0.0490, abs=1e-4) and point.decision == "pass"


def test_an_absolute_standard_uncertainty_is_converted_too(tech, plant):
    # U = 10 kg/h (k = 2) -> 10 / 998.2 = 0.0100180 m³/h; u = 0.0050090 m³/h at 20 m³/h = 0.0250451 % of reading;
    # U = 1.95996 × 0.0250451 = 0.049087 % (hand-worked)
    rig = standard("RS-ABS", "kg/h", 50000, basis="absolute", U=10)
    device = plant["volume"]
    assert tech.post(f"/positions/{device.tag}/calibrate/",
                     post([rig], [(19964, 20.05)], density=WATER_20C)).status_code == 302
    assert CalibrationPoint.objects.get().expanded_uncertainty == pytest.approx(0.049087, abs=2e-6)


def test_a_fixed_factor_needs_no_density(tech, plant):
    # 5.5 L/s × 3.6 = 19.8 m³/h (1 L = 1e-3 m³); indication 19.8 -> error 0
    prover = standard("RS-LS", "L/s", 12)
    device = plant["volume"]
    assert tech.post(f"/positions/{device.tag}/calibrate/", post([prover], [(5.5, 19.8)])).status_code == 302
    event = CalibrationEvent.objects.get()
    point = event.points.get()
    assert point.reference_value == pytest.approx(19.8, rel=1e-12) and point.error == pytest.approx(0, abs=1e-9)
    assert event.converted and not event.density_used and event.density_kg_m3 is None


def test_missing_density_is_refused_at_the_density_field_and_nothing_is_saved(tech, plant, weigh_tank):
    device = plant["volume"]
    response = tech.post(f"/positions/{device.tag}/calibrate/", post([weigh_tank], [(19964, 20.05)]))
    assert response.status_code == 400 and counts() == (0, 0)
    entry = CalibrationEntry(device, post([weigh_tank], [(19964, 20.05)]))
    assert not entry.is_valid()
    assert list(entry.event_form.errors) == ["density_kg_m3"]
    message = entry.event_form.errors["density_kg_m3"][0]
    assert message == ("The reference standard reads in kg/h and this meter in m³/h: enter the fluid density at the "
                       "conditions of the calibration, so the reference readings can be converted.")
    assert message in html.unescape(response.content.decode())
    assert not any(form.errors for form in entry.as_found.forms)  # the row is not judged in unknown units


@pytest.mark.parametrize("density", ["0", "-998.2", "nan", "abc"])
def test_a_density_that_is_not_above_zero_is_refused_at_its_field(tech, plant, weigh_tank, density):
    entry = CalibrationEntry(plant["volume"], post([weigh_tank], [(19964, 20.05)], density=density))
    assert not entry.is_valid()
    assert "density_kg_m3" in entry.event_form.errors and counts() == (0, 0)


def test_a_pair_the_form_cannot_convert_is_refused_at_the_standards_field(tech, plant):
    # Nm³/h against kg/h needs the gas density at the normal conditions; Nm³/h against actual m³/h needs the line's
    # absolute pressure and temperature (plant.units.conversion_needs): the form takes neither
    normal = standard("RS-N", "Nm3/h", 1000)
    for device, needs in ((plant["mass"], "the gas density at reference conditions"),
                         (plant["gas_volume"], "the line's absolute pressure and temperature")):
        response = tech.post(f"/positions/{device.tag}/calibrate/", post([normal], [(100, 100)], density=0.8))
        assert response.status_code == 400 and counts() == (0, 0)
        entry = CalibrationEntry(device, post([normal], [(100, 100)], density=0.8))
        assert not entry.is_valid()
        message = entry.event_form.errors["reference_standards"][0]
        assert message.startswith(f"Reference standard RS-N reads in Nm³/h (0 °C, 101.325 kPa) and this meter in "
                                  f"{'kg/h' if device.flow_units == 'kg/h' else 'm³/h'}: converting between them "
                                  f"needs {needs}")
        # not offered on the page either
        page = tech.get(f"/positions/{device.tag}/calibrate/").content.decode()
        assert f'name="ev-reference_standards" value="{normal.pk}"' not in page


def test_standards_of_different_units_ticked_together_are_refused(tech, plant, weigh_tank):
    prover = standard("RS-LS", "L/s", 12)
    entry = CalibrationEntry(plant["volume"], post([weigh_tank, prover], [(19964, 20.05)], density=WATER_20C))
    assert not entry.is_valid()
    assert "read in different units" in entry.event_form.errors["reference_standards"][0] and counts() == (0, 0)


def test_the_meter_range_is_checked_after_conversion_and_the_standard_range_in_its_own_unit(tech, plant):
    device = plant["volume"]
    small = standard("RS-SMALL", "kg/h", 10000)  # offered (its readings convert with the density) whatever its range
    entry = CalibrationEntry(device, post([small], [(49910, 50)], density=WATER_20C))  # 50 m³/h > 40
    assert not entry.is_valid()
    assert entry.as_found.forms[0].errors["reference_value"] == [
        "49910 kg/h (50 m³/h) is outside the meter's calibrated range 0–40 m³/h."]
    entry = CalibrationEntry(device, post([small], [(19964, 20.05)], density=WATER_20C))
    assert not entry.is_valid()
    assert entry.as_found.forms[0].errors["reference_value"] == [
        "Reference standard RS-SMALL is calibrated over 0–10000 kg/h and usable from 1000 kg/h (common practice: "
        "10 % of its range maximum when its range starts at 0); its uncertainty is not stated at 19964 kg/h. Use a "
        "standard whose range covers this point."]


def test_offered_standards_compare_ranges_after_a_fixed_factor_and_keep_the_page_queries_bounded(tech, plant):
    device = plant["volume"]  # 0–40 m³/h = 0–11.111 L/s
    wide = standard("RS-WIDE", "L/s", 11.2)
    narrow = standard("RS-NARROW", "L/s", 11)  # 39.6 m³/h: does not cover the meter
    exact = standard("RS-EXACT", "L/s", 40 / 3.6)  # exactly the meter's range high, after conversion
    rig = standard("RS-RIG", "kg/h", 100)  # needs the density: offered whatever its range
    gas = standard("RS-N", "Nm3/h", 1000)  # not convertible here: accepted (to say why) but not offered
    offered = set(ReferenceStandard.offered_for(device).values_list("identification", flat=True))
    assert offered == {"RS-WIDE", "RS-EXACT", "RS-RIG"}
    accepted = set(ReferenceStandard.offered_for(device, convertible_only=False).values_list("identification",
                                                                                            flat=True))
    assert accepted == {"RS-WIDE", "RS-EXACT", "RS-RIG", "RS-N"}
    page = tech.get(f"/positions/{device.tag}/calibrate/").content.decode()
    for s in (wide, exact, rig):
        assert f'name="ev-reference_standards" value="{s.pk}"' in page
    for s in (narrow, gas):
        assert f'name="ev-reference_standards" value="{s.pk}"' not in page
    with CaptureQueriesContext(connection) as few:
        tech.get(f"/positions/{device.tag}/calibrate/")
    for i, units in enumerate(["m3/h", "L/min", "USgpm", "kg/s", "t/h", "lb/h", "Sm3/h"] * 3):
        standard(f"RS-X{i}", units, 1e6)
    with CaptureQueriesContext(connection) as many:
        tech.get(f"/positions/{device.tag}/calibrate/")
    assert len(many) == len(few)


def _signed(tech, plant, weigh_tank):
    device = plant["volume"]
    tech.post(f"/positions/{device.tag}/calibrate/", post([weigh_tank], [(19964, 20.05), (29946, 30.0)],
                                                     density=WATER_20C))
    event = CalibrationEvent.objects.get()
    assert tech.post(f"/calibrations/{event.pk}/sign/").status_code == 302
    event.refresh_from_db()
    assert event.is_signed
    return event


def test_results_page_and_certificate_show_entered_and_converted_values_and_the_density(tech, plant, weigh_tank):
    event = _signed(tech, plant, weigh_tank)
    page = html.unescape(tech.get(f"/calibrations/{event.pk}/").content.decode())
    assert "Reference as entered<br>(kg/h)" in page and "Reference, converted<br>(m³/h)" in page
    assert "19964.0000" in page and "20.0000" in page and "29946.0000" in page and "30.0000" in page
    assert "998.2 kg/m³ (used to convert the reference readings)" in page
    assert "reference readings entered in kg/h, converted to the meter's m³/h" in page
    assert "0–50000 kg/h" in page  # the standard's range in its own unit
    cert = html.unescape(certificate_html(event))
    assert "Reference as entered<br>(kg/h)" in cert and "Reference value, converted<br>(m³/h)" in cert
    assert "19964.0000" in cert and "20.0000" in cert
    assert "998.2 kg/m³ (used to convert the reference readings)" in cert
    assert "Reference readings taken in kg/h (the reference standard's units) and converted to m³/h" in cert
    assert "0 to 40 m³/h" in cert and "0–50000 kg/h" in cert


def test_certificate_pdf_carries_the_conversion(tech, plant, weigh_tank):
    import io
    import re

    from pypdf import PdfReader

    event = _signed(tech, plant, weigh_tank)
    response = tech.get(f"/calibrations/{event.pk}/certificate.pdf")
    assert response.status_code == 200
    text = re.sub(r"\s+", " ", "\n".join(p.extract_text() for p in PdfReader(io.BytesIO(response.content)).pages))
    assert "Reference as entered" in text and "19964.0000" in text and "20.0000" in text
    assert "998.2 kg/m³" in text


def test_a_signed_record_keeps_its_density_and_entered_values(tech, plant, weigh_tank):
    event = _signed(tech, plant, weigh_tank)
    event.density_kg_m3 = 1000.0
    with pytest.raises(SignedRecordError):
        event.save()
    with pytest.raises(SignedRecordError):
        CalibrationEvent.objects.filter(pk=event.pk).update(density_kg_m3=1000.0)
    with pytest.raises(SignedRecordError):
        CalibrationEvent.objects.filter(pk=event.pk).update(reference_units="t/h")
    point = event.points.first()
    point.reference_entered = 1.0
    with pytest.raises(SignedRecordError):
        point.save()
    with pytest.raises(SignedRecordError):
        CalibrationPoint.objects.filter(event=event).update(reference_entered=1.0)
    event.refresh_from_db()
    assert event.density_kg_m3 == WATER_20C and event.reference_units == "kg/h"
    assert sorted(event.points.values_list("reference_entered", flat=True)) == [19964, 29946]


def test_an_entry_sent_from_the_tablet_queue_is_checked_the_same_way(tech, plant, weigh_tank):
    device = plant["volume"]

    def send(client_id, data):
        pairs = [[k, str(x)] for k, v in data.items() for x in (v if isinstance(v, list) else [v])]
        body = json.dumps({"kind": "calibration", "id": str(client_id), "target": device.tag, "data": pairs})
        return tech.post("/field/send/", body, content_type="application/json")

    cid = uuid.uuid4()
    refused = send(cid, post([weigh_tank], [(19964, 20.05)]))
    assert refused.status_code == 422 and counts() == (0, 0)
    assert list(refused.json()["errors"]) == ["ev-density_kg_m3"]
    saved = send(cid, post([weigh_tank], [(19964, 20.05)], density=WATER_20C))  # the density field travels
    assert saved.status_code == 201
    point = CalibrationPoint.objects.get()
    assert point.event.density_kg_m3 == WATER_20C and point.reference_value == pytest.approx(20.0, rel=1e-12)


def test_the_tablet_knows_each_standards_units_and_the_density_message(plant, weigh_tank):
    device = plant["volume"]
    prover = standard("RS-LS", "L/s", 12)
    rules = entry_rules(device)
    assert rules["meter_units"] == "m3/h"
    assert rules["standard_units"] == {str(weigh_tank.pk): "kg/h", str(prover.pk): "L/s"}
    entry = CalibrationEntry(device, post([weigh_tank], [(19964, 20.05)]))
    entry.is_valid()
    assert rules["messages"]["density_required"] == {str(weigh_tank.pk): entry.event_form.errors["density_kg_m3"][0]}


def test_unit_codes_on_the_models_and_the_importer(plant):
    from django.core.exceptions import ValidationError

    device = plant["volume"]
    device.flow_units = "m³/h"  # a spelling, not a code
    with pytest.raises(ValidationError) as refused:
        device.save()
    assert refused.value.message_dict["flow_units"][0].startswith('"m³/h" is not one of the flow units in use')
    with pytest.raises(ValidationError):
        standard("RS-BAD", "per meter's units", 10)
    header = ",".join(importer.METER_COLUMNS)

    def row(tag, units):
        values = {"tag": tag, "principle": "electromagnetic", "site": "Test site", "area": "Hall A",
                  "fluid": "Water", "line_size": "DN50", "internal_diameter_mm": "52.5", "range_min": "0",
                  "range_max": "40", "flow_units": units, "normal_flow": "", "min_flow": "",
                  "wetted_material": "316L", "material_details": "", "serial": "", "maker": "", "model": "",
                  "mpe_value": "0.5", "mpe_basis": "pct_reading", "base_interval_days": "365", "required_accuracy_pct": ""}
        return ",".join(values[c] for c in importer.METER_COLUMNS)

    content = "\n".join([header, row("FT-A", "gpm"), row("FT-B", "Nm³/h"), row("FT-C", "kg/h"),
                         row("FT-D", "furlongs/fortnight"), row("FT-E", "US gal/min")]) + "\n"
    plan = importer.plan_import("meters", importer.read_table(content.encode(), "meters.csv"))
    assert [(e.row_number, e.column) for e in plan.errors] == [(5, "flow_units")]
    assert plan.errors[0].message.startswith('"furlongs/fortnight" is not one of the flow units in use')
    content = "\n".join([header, row("FT-A", "gpm"), row("FT-B", "Nm³/h"), row("FT-C", "kg/h")]) + "\n"
    applied = importer.apply_import(importer.plan_import("meters", importer.read_table(content.encode(), "m.csv")))
    assert applied.applied
    assert dict(Device.objects.filter(position__tag__in=["FT-A", "FT-B", "FT-C"])
                .values_list("position__tag", "flow_units")) == {"FT-A": "USgpm", "FT-B": "Nm3/h", "FT-C": "kg/h"}
    # the position's flows are stated in the same unit as the row's device
    assert dict(Position.objects.filter(tag__in=["FT-A", "FT-B", "FT-C"]).values_list("tag", "flow_units")) == {
        "FT-A": "USgpm", "FT-B": "Nm3/h", "FT-C": "kg/h"}
