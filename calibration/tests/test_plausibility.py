"""A typo is held at its field, not saved as a failure; conditions outside physical bounds are refused.

The thresholds (10 × MPE, 150 % of the range) are common practice, no published source; the physical bounds
are absolute zero and the densest matter (osmium 22,590 kg/m³, from memory); the ambient bounds are common
practice from the record air temperatures (about −68 °C and +57 °C, from memory).
"""
import pytest

from calibration import plausibility
from calibration.models import CalibrationEvent
from tests.helpers import entry_data

RIGHT = [(4, 4.01), (10, 10.02), (20, 20.05), (30, 29.97), (40, 40.04)]


# pure -----------------------------------------------------------------------------------------------------------
def test_off_scale_indication_is_held():
    # the field finding: 150 typed for 1.50 on a 0–6 m³/h meter
    sentence = plausibility.reading_to_check(1.5, 150, 0, 6, 0.0075, "m³/h")
    assert sentence.startswith("Check this value: an indication of 150 m³/h is off the meter's scale (0–6 m³/h")


def test_error_beyond_ten_mpe_is_held_and_within_is_not():
    # MPE 0.5 % of reading at 20: 0.1 flow units; 1.01 off is 10.1 × the MPE, 0.99 off is 9.9 ×
    assert "10 times the MPE" in plausibility.reading_to_check(20, 21.01, 0, 40, 0.1)
    assert plausibility.reading_to_check(20, 20.99, 0, 40, 0.1) == ""
    assert plausibility.reading_to_check(20, 20.05, 0, 40, 0.1) == ""


@pytest.mark.parametrize("args, name", [
    ((float("nan"), 1, 0, 10, 0.1), "reference"),
    ((1, float("inf"), 0, 10, 0.1), "indicated"),
    ((1, 1, 10, 10, 0.1), "range_max"),
    ((1, 1, 0, 10, 0), "mpe_flow"),
    ((1, 1, 0, 10, "0.1"), "mpe_flow"),
])
def test_reading_to_check_refuses_nonsense(args, name):
    with pytest.raises(ValueError, match=name):
        plausibility.reading_to_check(*args)


def test_condition_bounds():
    assert plausibility.condition_out_of_bounds("ambient_temp_c", -80).startswith("-80 °C cannot be right here")
    assert plausibility.condition_out_of_bounds("ambient_temp_c", 18) == ""
    assert plausibility.condition_out_of_bounds("fluid_temp_c", -273.16) != ""  # below absolute zero
    assert plausibility.condition_out_of_bounds("fluid_temp_c", -196) == ""  # liquid nitrogen
    assert plausibility.condition_out_of_bounds("density_kg_m3", 13534) == ""  # mercury
    assert plausibility.condition_out_of_bounds("density_kg_m3", 0) == "A density must be above zero (0 kg/m³ entered)."
    with pytest.raises(ValueError, match="value"):
        plausibility.condition_out_of_bounds("ambient_temp_c", float("nan"))


# the tablet form ------------------------------------------------------------------------------------------------
@pytest.mark.django_db
def test_typo_is_held_then_saved_only_when_confirmed(client, device, standard):  # noqa: F811
    typo = [(4, 4.01), (10, 10.02), (20, 2005), (30, 29.97), (40, 40.04)]
    held = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, found=typo))
    assert held.status_code == 400
    body = held.content.decode()
    assert "Check this value: an indication of 2005 m³/h is off the meter&#x27;s scale" in body
    assert CalibrationEvent.objects.count() == 0  # nothing saved
    confirmed = client.post(f"/positions/{device.tag}/calibrate/",
                            entry_data(standard, found=typo, **{"ev-values_checked": "on"}))
    assert confirmed.status_code == 302
    assert CalibrationEvent.objects.get().as_found_in_tolerance is False  # saved as typed, because confirmed


@pytest.mark.django_db
def test_right_values_are_not_held(client, device, standard):  # noqa: F811
    assert client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, found=RIGHT)).status_code == 302


@pytest.mark.django_db
@pytest.mark.parametrize("field, value, message", [
    ("ambient_temp_c", "-80", "-80 °C cannot be right here"),
    ("fluid_temp_c", "1200", "1200 °C cannot be right here"),
    ("fluid_temp_c", "-300", "Temperature is below absolute zero."),  # the model's own message
])
def test_conditions_outside_bounds_are_refused(client, device, standard, field, value, message):  # noqa: F811
    response = client.post(f"/positions/{device.tag}/calibrate/", entry_data(standard, **{f"ev-{field}": value}))
    assert response.status_code == 400 and message in response.content.decode()
    assert CalibrationEvent.objects.count() == 0


@pytest.mark.django_db
def test_tablet_rules_carry_the_hold_and_the_bounds(device):  # noqa: F811
    from offline.rules import entry_rules

    rules = entry_rules(device)
    assert rules["hold"] == {"mpe_factor": 10.0, "range_factor": 1.5, "mpe_value": 0.5}
    low, high, message = rules["conditions"]["ev-ambient_temp_c"]
    assert (low, high) == (-60.0, 60.0)
    assert message.replace("{value}", "-80") == plausibility.condition_out_of_bounds("ambient_temp_c", -80)
    assert "Check this value" in rules["messages"]["check_value"]
