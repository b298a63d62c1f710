"""Conformity risk on the results page and the certificate (issue 31): per point p_c, the calibration's PFA of the
rule applied with the prior used, frozen at sign-off as signed content version 2; a record of version 1 prints
without them. Expected values are computed here from the stored point values with scipy's normal distribution
(JCGM 106:2012 §7) and with calibration.conformity.global_risks (checked against scipy dblquad in
test_conformity.py)."""
import datetime as dt

import pytest
from django.db import connection
from scipy import stats

from calibration import conformity
from calibration.models import CalibrationEvent, ReferenceStandard
from tests.helpers import at, enter, flat, pdf_text, sign

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("certificate")]


def expected_pc(point):
    u = point.expanded_uncertainty / point.coverage_factor
    return stats.norm.cdf((point.mpe - point.error) / u) - stats.norm.cdf((-point.mpe - point.error) / u)


def test_signed_content_version_2_keeps_p_c_pfa_and_the_prior(client, device, standard, monkeypatch):
    event = sign(client, enter(client, device, standard), at(dt.date(2026, 11, 23)), monkeypatch)
    content = CalibrationEvent.objects.get(pk=event.pk).signed_content
    assert content["version"] == 2
    risks = content["conformity"]
    # no fleet recompute has stored a prior of like devices: the stated default, in MPE units
    assert risks["prior"]["scope"] == "default"
    assert (risks["prior"]["mean"], risks["prior"]["sd"]) == (conformity.DEFAULT_PRIOR_MEAN,
                                                              conformity.DEFAULT_PRIOR_SD)
    assert risks["target_pfa"] == 0.02
    by_nominal = {p["nominal_pct"]: p for p in content["points"]["as_found"]}
    pfas = []
    for point in event.points.filter(kind="as_found"):
        frozen = by_nominal[point.nominal_pct]
        assert frozen["p_c"] == pytest.approx(expected_pc(point), abs=1e-12)
        u = point.expanded_uncertainty / point.coverage_factor
        mpe = point.mpe
        pfa = conformity.global_risks(0.0, 0.5 * mpe, u, -mpe, mpe, -mpe, mpe)["pfa"]   # simple acceptance
        assert frozen["pfa"] == pytest.approx(pfa, abs=1e-10)
        pfas.append(pfa)
    assert risks["pfa"] == pytest.approx(max(pfas), abs=1e-10)
    assert risks["pfa_above_target"] is False and risks["not_decided"] == []

    page = client.get(f"/calibrations/{event.pk}/").content.decode()
    assert 'id="conformity-risk"' in page and "As at sign-off" in page
    assert "Probability of false accept of the decision rule applied" in page
    point = event.points.get(kind="as_found", nominal_pct=10.0)
    assert expected_pc(point) > 0.9995 and "&gt; 99.9 %" in page   # TUR 5:1, error half the MPE

    _, raw = pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)
    text = flat(raw)
    assert "Probability of false accept of the decision rule applied" in text
    assert "stated default (mean +0.00 MPE, SD 0.50 MPE)" in text
    assert "> 99.9 %" in text


def test_weak_reference_gives_conformity_not_decided(client, device, monkeypatch):
    """The issue's field finding: errors inside the MPE that guarded acceptance cannot accept with a weak reference
    are 'conformity not decided (TUR x:1)', on the page and on the certificate."""
    weak = ReferenceStandard.objects.create(identification="RS-9", description="Older master meter", range_min=0,
                                            range_max=40, certificate_number="C-9", due_date=dt.date(2027, 6, 1),
                                            expanded_uncertainty=0.3, uncertainty_basis="pct_reading")
    event = enter(client, device, weak, **{"ev-decision_rule": "guarded"})
    in_band = [p for p in event.points.filter(kind="as_found") if p.decision == "conditional pass"]
    assert in_band, "the 0.25 % errors lie between MPE - U and the MPE"
    sign(client, event, at(dt.date(2026, 11, 23)), monkeypatch)
    content = CalibrationEvent.objects.get(pk=event.pk).signed_content
    tur = in_band[0].mpe / in_band[0].expanded_uncertainty
    expected = f"as found at {in_band[0].nominal_pct:g} % (TUR {tur:.1f}:1)"
    assert expected in content["conformity"]["not_decided"]
    page = client.get(f"/calibrations/{event.pk}/").content.decode()
    assert 'id="not-decided"' in page and expected in page
    pc = expected_pc(in_band[0])
    assert 0.5 < pc < 0.999 and f"{100 * pc:.1f} %" in page
    text = flat(pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)[1])
    assert "Conformity not decided" in text and "this is not a finding against the device" in text
    assert f"{100 * pc:.1f} %" in text


def test_version_1_record_prints_without_risks(client, device, standard, monkeypatch):
    event = sign(client, enter(client, device, standard), at(dt.date(2026, 11, 23)), monkeypatch)
    with connection.cursor() as cursor:   # stored as a record signed before content was frozen
        cursor.execute(f"UPDATE {CalibrationEvent._meta.db_table} SET signed_content = %s WHERE id = %s",
                       ["{}", event.pk])
    event = CalibrationEvent.objects.get(pk=event.pk)
    assert event.content_as_signed()["version"] == 1 and "conformity" not in event.content_as_signed()
    text = flat(pdf_text(client.get(f"/calibrations/{event.pk}/certificate.pdf").content)[1])
    assert "Probability of false accept" not in text and "Conformity not decided" not in text
    page = client.get(f"/calibrations/{event.pk}/").content.decode()
    assert "signed before conformity risks were kept" in page and "its certificate states none" in page


# The review's conformity lists (stored fields; values set here as the recompute would store them) -----------
def test_review_lists_pfa_above_target_and_low_p_c(admin_user, settings):
    from django.db import connection as db
    from django.test import Client
    from django.test.utils import CaptureQueriesContext

    client = Client()
    client.force_login(admin_user)

    from plant.models import Area, Fluid, Device, Site
    from tests.helpers import export, make_meter

    site = Site.objects.create(name="Risk site")
    area = Area.objects.create(site=site, name="Hall")
    water = Fluid.objects.create(name="Water", phase="liquid", conductivity_us_cm=400)
    stored = {"PFA-HIGH": dict(last_in_tolerance=True, conformity_pfa=0.031, conformity_min_pc=0.99),
              "PFA-HIGH-FAILED": dict(last_in_tolerance=False, conformity_pfa=0.05),   # not accepted
              "PFA-OK": dict(last_in_tolerance=True, conformity_pfa=0.019, conformity_min_pc=0.96),
              "PC-LOW": dict(last_in_tolerance=False, conformity_pfa=0.001, conformity_min_pc=0.62),
              "NO-RISK": dict(last_in_tolerance=True)}   # nothing stated: in neither list
    for tag in stored:
        make_meter(tag, area, water)
    with CaptureQueriesContext(db) as empty:
        assert client.get("/review/").status_code == 200
    for tag, values in stored.items():
        Device.objects.filter(position__tag=tag).update(**values)
    assert sorted(r[0] for r in export(client, "pfa_above")[1]) == ["PFA-HIGH"]
    header, rows = export(client, "low_pc")
    assert [r[0] for r in rows] == ["PC-LOW"]
    assert rows[0][header.index("Lowest p_c inside MPE")] == "62.0 %"
    body = client.get("/review/").content.decode()
    assert "Accepted with PFA above target (2 %)" in body and 'id="count-pfa_above">1<' in body
    assert 'id="count-low_pc">1<' in body
    settings.QUENBY_PFA_TARGET = 0.015   # the target is a setting
    assert sorted(r[0] for r in export(client, "pfa_above")[1]) == ["PFA-HIGH", "PFA-OK"]
    # counted with the other lists in one query (no query more while both lists are empty); a list with rows adds
    # its page reads, a fixed number whatever the fleet (test_review.py holds the page to 32 queries)
    with CaptureQueriesContext(db) as full:
        assert client.get("/review/").status_code == 200
    assert len(full.captured_queries) <= len(empty.captured_queries) + 6
