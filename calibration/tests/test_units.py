"""Flow-unit conversions (plant/units.py) against published factors and hand-worked gas corrections."""
import math

import pytest

from plant import units
from plant.units import UnitError, convert


# NIST SP 811 (2008), appendix B.8, factors quoted from memory to the 7 significant digits printed there.
@pytest.mark.parametrize("value, src, dst, expected, rel", [
    (1.0, "USgpm", "L/s", 6.309020e-02, 1e-6),     # gallon [U.S.] per minute to litre per second
    (1.0, "USgpm", "m3/h", 6.309020e-05 * 3600, 1e-6),  # gpm to m³/s, × 3600 s/h
    (1.0, "lb/h", "kg/s", 1.259979e-04, 1e-6),     # pound per hour to kilogram per second
    (1.0, "t/h", "kg/h", 1.0e+03, 1e-12),          # ton, metric to kilogram
    (1.0, "L/s", "m3/h", 3.6, 1e-12),              # litre = 1e-3 m³ (BIPM SI Brochure, 9th ed., table 8)
    (60.0, "L/min", "L/s", 1.0, 1e-12),
    (3.6, "kg/h", "kg/s", 1.0e-03, 1e-12),
])
def test_fixed_factors_match_nist_sp811(value, src, dst, expected, rel):
    assert convert(value, src, dst) == pytest.approx(expected, rel=rel)


def test_round_trip_is_exact_to_float_precision():
    for a in units.FLOW_UNITS:
        for b in units.FLOW_UNITS:
            kw = dict(density_kg_m3=998.2, reference_density_kg_m3=1.2923, line_pressure_kpa_abs=500.0,
                      line_temp_c=20.0)
            there = convert(123.456, a, b, **kw)
            assert convert(there, b, a, **kw) == pytest.approx(123.456, rel=1e-12), (a, b)


def test_volume_to_mass_with_the_stated_density():
    # water at 20 °C: 998.2 kg/m³ (handbook value, quoted from memory); 10 m³/h × 998.2 = 9982 kg/h
    assert convert(10.0, "m3/h", "kg/h", density_kg_m3=998.2) == pytest.approx(9982.0, rel=1e-12)
    # and 9982 kg/h = 2.772778 kg/s; 1 t/h of that water is 1000/998.2 = 1.001803 m³/h
    assert convert(1.0, "t/h", "m3/h", density_kg_m3=998.2) == pytest.approx(1.0018032458425165, rel=1e-12)


def test_normal_to_standard_cubic_metres_by_the_ideal_gas_law():
    # Reference conditions: normal 0 °C / 101.325 kPa (DIN 1343), standard 15 °C / 101.325 kPa (ISO 13443);
    # ideal gas at equal pressure: V_s = V_n · T_s / T_n = 288.15 / 273.15 = 1.054914...
    assert convert(1000.0, "Nm3/h", "Sm3/h") == pytest.approx(1000.0 * 288.15 / 273.15, rel=1e-12)
    assert convert(1000.0, "Nm3/h", "Sm3/h") == pytest.approx(1054.914, abs=1e-3)


def test_normal_volume_to_actual_volume_at_line_conditions():
    # hand-worked: 1000 Nm³/h at 500 kPa(a) and 20 °C, Z = 1:
    # 1000 × (101.325 / 500) × (293.15 / 273.15) = 1000 × 0.20265 × 1.0732198 = 217.488 m³/h
    assert convert(1000.0, "Nm3/h", "m3/h", line_pressure_kpa_abs=500.0, line_temp_c=20.0) == \
        pytest.approx(217.488, abs=1e-3)
    # compressibility enters as a factor on the actual volume
    assert convert(1000.0, "Nm3/h", "m3/h", line_pressure_kpa_abs=500.0, line_temp_c=20.0, compressibility=0.99) == \
        pytest.approx(217.488 * 0.99, abs=1e-3)


def test_normal_volume_to_mass_with_the_density_at_normal_conditions():
    # dry air at 0 °C, 101.325 kPa: 1.2923 kg/m³ (handbook value, quoted from memory)
    assert convert(1000.0, "Nm3/h", "kg/h", reference_density_kg_m3=1.2923) == pytest.approx(1292.3, rel=1e-12)


@pytest.mark.parametrize("src, dst, kwargs, words", [
    ("m3/h", "kg/h", {}, "needs the fluid density"),
    ("kg/h", "L/s", {"density_kg_m3": 0.0}, "density must be above zero"),
    ("Nm3/h", "m3/h", {}, "absolute pressure and temperature"),
    ("Nm3/h", "m3/h", {"line_pressure_kpa_abs": -1.0, "line_temp_c": 20.0}, "above zero"),
    ("Nm3/h", "kg/h", {"density_kg_m3": 998.0}, "density at the normal conditions"),
    ("m3/h", "furlongs/fortnight", {}, "not one of the flow units"),
])
def test_refusals_say_what_is_missing(src, dst, kwargs, words):
    with pytest.raises(UnitError, match=words):
        convert(1.0, src, dst, **kwargs)


def test_legacy_spellings_map_to_codes_and_unknowns_are_refused():
    assert units.code_for("m³/h") == "m3/h"
    assert units.code_for("l/min") == "L/min"
    assert units.code_for("LB/HR") == "lb/h"
    with pytest.raises(UnitError, match="not one of the flow units"):
        units.code_for("bbl/d")


def test_what_each_conversion_needs():
    assert units.conversion_needs("m3/h", "USgpm") == set()
    assert units.conversion_needs("m3/h", "kg/h") == {"density"}
    assert units.conversion_needs("Sm3/h", "m3/h") == {"line_conditions"}
    assert units.conversion_needs("Sm3/h", "t/h") == {"reference_density"}
    assert units.conversion_needs("Nm3/h", "Sm3/h") == set()
    assert math.isclose(convert(5.0, "kg/s", "kg/s"), 5.0)
