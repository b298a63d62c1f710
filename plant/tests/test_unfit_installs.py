"""A device not fit for a position's duty does not go in without a reviewer's written reason.

The demo plant's invented scenario: FT-404 measures vegetable oil (conductivity far below what an electromagnetic
meter needs); the spare SN730118 is an electromagnetic device, calibrated on the bench a month before the demo's
"today". The refusal comes from plant/risk.py's misapplied findings; the range sentences from plant/fit.py
(common practice figures, no published source).
"""
import pytest
from django.core.management import call_command

from plant import fit, installations
from plant.installations import InstallationError, Removal
from plant.models import Installation, Device, Position
from tests.helpers import user_with_role


@pytest.fixture
def oil(demo_maintenance):
    call_command("recompute_due_dates", verbosity=0)  # the spares' stored due dates, as the demo command sets them
    return Position.objects.get(tag="FT-404")


def em_spare():
    return Device.objects.get(serial="SN730118", position__isnull=True)


def swap(client, device, **extra):
    return client.post("/positions/FT-404/swap/", {"device": device.pk, "on_date": "2026-12-04",
                                                 "reason": "bearing noise", "removed_to": Removal.SHELF, **extra})


def nothing_moved(position, old, spare, installations_before):
    position.refresh_from_db()
    spare.refresh_from_db()
    assert position.installed_device() == old
    assert spare.position is None and spare.status == Device.Status.SPARE
    assert Installation.objects.count() == installations_before


def test_swap_page_says_per_spare_why_it_is_not_fit(client, oil):
    client.force_login(user_with_role("technician"))
    page = client.get("/positions/FT-404/swap/").content.decode()
    row = page[page.index(f'id="spare-{em_spare().pk}"'):]
    row = row[:row.index("</tr>")]
    assert "No: not fit for this duty." in row
    assert "Only a reviewer may install it, with a written reason." in row
    # its range against the position's flows: minimum 0.63 m³/h against a 0–30 m³/h electromagnetic device
    assert "Minimum flow 0.63 m³/h is below the usable minimum of this principle" in row
    assert "May it go in here? yes" not in page
    assert 'name="unfit_reason"' not in page  # a technician is not offered the override


def test_technician_swap_is_refused_and_changes_nothing(client, oil):
    client.force_login(user_with_role("technician"))
    old, spare, before = oil.installed_device(), em_spare(), Installation.objects.count()
    response = swap(client, spare, unfit_reason="trying anyway")
    assert response.status_code == 400
    body = response.content.decode()
    assert f"Device {spare.device_label} is not fit for the duty at FT-404" in body
    assert "Only a reviewer may install it" in body
    nothing_moved(oil, old, spare, before)


def test_reviewer_needs_a_written_reason(client, oil):
    client.force_login(user_with_role("reviewer"))
    old, spare, before = oil.installed_device(), em_spare(), Installation.objects.count()
    page = client.get("/positions/FT-404/swap/").content.decode()
    assert 'name="unfit_reason"' in page and "A reviewer may install it with a written reason." in page
    response = swap(client, spare, unfit_reason="   ")
    assert response.status_code == 400
    assert "To install it all the same, write why" in response.content.decode()
    nothing_moved(oil, old, spare, before)


def test_reviewer_with_reason_installs_and_the_position_page_shows_it(client, oil):
    reviewer = user_with_role("reviewer")
    client.force_login(reviewer)
    spare = em_spare()
    response = swap(client, spare, unfit_reason="Stop-gap for two weeks while the turbine is repaired; totaliser "
                                                "checked by dip daily.")
    assert response.status_code == 302, response.content.decode()[:3000]
    installation = Installation.objects.get(device=spare, until__isnull=True)
    assert installation.position == oil
    assert installation.unfit_findings == "EM_LOW_CONDUCTIVITY"
    assert installation.unfit_accepted_by == reviewer
    assert installation.unfit_reason.startswith("Stop-gap for two weeks")
    # kept in the audit trail too
    assert installation.history.filter(unfit_reason__startswith="Stop-gap").exists()
    page = client.get("/positions/FT-404/").content.decode()
    assert "Installed though not fit for this duty</strong>: Stop-gap for two weeks" in page
    assert "accepted by Reviewer Tester" in page


def test_a_fit_device_ignores_a_reason(demo_maintenance):
    """The reason is only for an unfit device: a fit one is installed with nothing recorded against it."""
    position = Position.objects.get(tag="FT-204")  # boiler makeup water, conductive: fit for the EM spare
    spare = em_spare()
    result = installations.swap(position, spare, position.area.site.today(), "electrode coated",
                                user_with_role("reviewer"), unfit_reason="not needed")
    assert result.installed.unfit_reason == "" and result.installed.unfit_accepted_by is None


def test_commission_applies_the_duty_rules(demo_maintenance):
    oil = Position.objects.get(tag="FT-404")
    fields = dict(area=oil.area, fluid=oil.fluid, line_size="DN25", internal_diameter_mm=25.0, range_min=0,
                  range_max=10, flow_units="m3/h", normal_flow=4, min_flow=1, principle="electromagnetic",
                  wetted_material="", serial="SN-UNFIT-1", mpe_value=0.5, mpe_basis="pct_reading")
    positions_before = Position.objects.count()
    with pytest.raises(InstallationError) as refused:
        installations.commission(tag="FT-499", **fields)
    assert "not fit for the duty at FT-499" in str(refused.value)
    assert Position.objects.count() == positions_before  # nothing half-saved
    device = installations.commission(tag="FT-499", unfit_reason="Trial of a coated-electrode design.", **fields)
    assert device.installations.get().unfit_reason == "Trial of a coated-electrode design."


# plant/fit.py: pure sentences on how the flows sit in the range (common practice figures) ---------------------
def test_range_fit_warnings_normal_flow_low_in_range():
    # 2.5 of 30 is 8.3 %: below the 10 % line (common practice)
    warnings = fit.range_fit_warnings("turbine", 30, 2.5, None, units_label="m³/h")
    assert warnings == ["Normal flow 2.5 m³/h is 8.3 % of the range high (30 m³/h), below 10 %: the device is sized "
                        "too large for this duty."]
    assert fit.range_fit_warnings("turbine", 30, 3.0, None) == []  # exactly 10 % is not below


def test_range_fit_warnings_minimum_below_the_principles_usable_minimum():
    # orifice: square law, about 4:1 usable (25 % of the range high)
    assert len(fit.range_fit_warnings("orifice", 100, 60, 20)) == 1
    assert fit.range_fit_warnings("orifice", 100, 60, 25) == []
    assert fit.range_fit_warnings("electromagnetic", 100, 60, 3.5) == []


@pytest.mark.parametrize("args, name", [
    (("turbine", float("nan"), 1, 1), "range_max"),
    (("turbine", 0, 1, 1), "range_max"),
    (("turbine", 10, float("inf"), 1), "normal_flow"),
    (("turbine", 10, 1, "1"), "min_flow"),
    (("steam_whistle", 10, 1, 1), "principle"),
])
def test_range_fit_warnings_refuse_nonsense(args, name):
    with pytest.raises(ValueError, match=name):
        fit.range_fit_warnings(*args)


def test_import_refuses_an_unfit_new_row_unless_a_reason_is_given(demo_maintenance):
    from plant import importer

    oil = Position.objects.get(tag="FT-404")
    row = {"tag": "FT-498", "principle": "electromagnetic", "site": oil.area.site.name, "area": oil.area.name,
           "fluid": oil.fluid.name, "line_size": "DN25", "internal_diameter_mm": "25", "range_max": "10",
           "flow_units": "m3/h", "normal_flow": "4", "min_flow": "1", "mpe_value": "0.5", "serial": "SN-IMP-1"}
    plan = importer.plan_import("meters", [row])
    assert [(e.row_number, e.column) for e in plan.errors] == [(2, "principle")]
    assert "is not fit for the duty at FT-498" in plan.errors[0].message
    assert "unfit_reason column" in plan.errors[0].message
    reviewer = user_with_role("reviewer")
    applied = importer.apply_rows("meters", [{**row, "unfit_reason": "Trial of a coated-electrode design."}],
                                  user=reviewer)
    assert applied.applied and not applied.warnings  # the optional column is not an "unknown column"
    installation = Installation.objects.get(position__tag="FT-498")
    assert installation.unfit_reason == "Trial of a coated-electrode design."
    assert installation.unfit_findings == "EM_LOW_CONDUCTIVITY" and installation.unfit_accepted_by == reviewer
