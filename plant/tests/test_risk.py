"""Tests for plant.risk (pure Python, no DB, no Django).

Each test comment says where its expectation comes from: "common practice"
(trade rule of thumb, no source) or a named source; "from memory" marks
numbers recalled but not checked against a document.
"""

import math
import os
import sys

import pytest

# Make the project root importable however pytest is invoked.
sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))

from plant.risk import (  # noqa: E402
    PRINCIPLES,
    Finding,
    FluidProps,
    assess,
    interval_factor,
    reynolds_number,
)


def codes(findings):
    return {f.code for f in findings}


def by_code(findings, code):
    return next(f for f in findings if f.code == code)


TOWN_WATER = FluidProps(phase="liquid", conductivity_us_cm=500,
                        density_kg_m3=998.2, viscosity_mpa_s=1.002)
DEMIN_WATER = FluidProps(phase="liquid", conductivity_us_cm=1,
                         density_kg_m3=998.2, viscosity_mpa_s=1.002)
BRINE = FluidProps(phase="liquid", conductivity_us_cm=50000, chlorides=True)
CLEAN_GAS = FluidProps(phase="gas", density_kg_m3=1.2, viscosity_mpa_s=0.018)


# ---------------------------------------------------------------- Reynolds

def test_reynolds_worked_example_water_dn50():
    # Water at 20 °C: rho = 998.2 kg/m3, mu = 1.002 mPa·s (handbook values,
    # e.g. CRC Handbook / standard water tables - from memory).
    # Q = 10 m3/h = 0.0027778 m3/s; DN50, D = 52.5 mm = 0.0525 m.
    # A = pi * 0.0525^2 / 4 = 0.00216475 m2
    # v = Q / A = 0.0027778 / 0.00216475 = 1.28318 m/s
    # Re = rho v D / mu = 998.2 * 1.28318 * 0.0525 / 1.002e-3
    #    = 67.2457 / 1.002e-3 = 67,112 (approx)
    assert reynolds_number(998.2, 1.002, 10, 52.5) == pytest.approx(67112, rel=1e-3)


def test_reynolds_matches_formula():
    # Independent restatement of Re = rho v D / mu with v = Q / (pi D^2 / 4).
    rho, mu, q, d = 850.0, 100.0, 5.0, 52.5
    v = (q / 3600) / (math.pi * (d / 1000) ** 2 / 4)
    expected = rho * v * (d / 1000) / (mu / 1000)
    assert reynolds_number(rho, mu, q, d) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("args", [
    (0, 1.0, 10, 50), (998.2, 0, 10, 50), (998.2, 1.0, 0, 50),
    (998.2, 1.0, 10, 0), (-1, 1.0, 10, 50), (998.2, 1.0, -10, 50),
    (None, 1.0, 10, 50), (998.2, 1.0, 10, float("nan")),
])
def test_reynolds_rejects_non_positive(args):
    # API contract: non-positive / missing inputs raise ValueError.
    with pytest.raises(ValueError):
        reynolds_number(*args)


# ---------------------------------------------------------------- general

def test_unknown_principle_raises():
    # API contract.
    with pytest.raises(ValueError):
        assess("magic", "316L", TOWN_WATER)


def test_unknown_phase_raises():
    # API contract: phase must be liquid/gas/steam/slurry.
    with pytest.raises(ValueError):
        assess("coriolis", "316L", FluidProps(phase="plasma"))


@pytest.mark.parametrize("principle", PRINCIPLES)
def test_every_principle_returns_findings_list(principle):
    # API contract: every listed principle is handled.
    out = assess(principle, "316L", TOWN_WATER, min_flow_m3_h=5, diameter_mm=52.5)
    assert isinstance(out, list)
    assert all(isinstance(f, Finding) for f in out)
    assert all(f.severity in ("misapplied", "high", "medium", "low") for f in out)
    assert all(0 < f.interval_factor <= 1.0 for f in out)
    assert all(f.reason for f in out)


def test_interval_factor_smallest_and_default():
    # API contract: smallest factor wins; no findings -> 1.0.
    fs = [Finding("A", "low", "a", 0.9), Finding("B", "misapplied", "b", 0.25),
          Finding("C", "medium", "c", 0.75)]
    assert interval_factor(fs) == 0.25
    assert interval_factor([]) == 1.0
    assert interval_factor(iter(fs)) == 0.25


def test_misapplied_factor_small():
    # Common practice scale used by this tool: misapplied ~0.25.
    f = by_code(assess("electromagnetic", "316L", DEMIN_WATER), "EM_LOW_CONDUCTIVITY")
    assert f.interval_factor <= 0.3


# ---------------------------------------------------------------- electromagnetic

def test_em_town_water_no_conductivity_finding():
    # Common practice: EM minimum conductivity about 5 µS/cm; 500 µS/cm is fine.
    out = assess("electromagnetic", "316L", TOWN_WATER)
    assert "EM_LOW_CONDUCTIVITY" not in codes(out)
    assert out == []


def test_em_demin_water_misapplied():
    # Common practice: ~5 µS/cm minimum; demineralised water at 1 µS/cm is below.
    f = by_code(assess("electromagnetic", "316L", DEMIN_WATER), "EM_LOW_CONDUCTIVITY")
    assert f.severity == "misapplied"


def test_em_slurry_low_conductivity_misapplied():
    # Common practice: the conductivity limit applies to slurries too.
    fl = FluidProps(phase="slurry", conductivity_us_cm=2)
    assert "EM_LOW_CONDUCTIVITY" in codes(assess("electromagnetic", "316L", fl))


@pytest.mark.parametrize("phase", ["gas", "steam"])
def test_em_gas_or_steam_misapplied(phase):
    # Common practice: magmeters need a conductive liquid.
    f = by_code(assess("electromagnetic", "316L", FluidProps(phase=phase)), "EM_NOT_LIQUID")
    assert f.severity == "misapplied"
    assert "EM_NOT_LIQUID" not in codes(assess("electromagnetic", "316L", TOWN_WATER))


def test_em_brine_attacks_stainless_electrodes():
    # Common practice: chlorides pit 316L electrodes.
    f = by_code(assess("electromagnetic", "316L", BRINE), "EM_CHLORIDES")
    assert f.severity == "high"
    assert "EM_CHLORIDES" not in codes(assess("electromagnetic", "316L", TOWN_WATER))


@pytest.mark.parametrize("material", ["alloy C-276", "titanium", "tantalum", "platinum-iridium"])
def test_em_brine_resistant_electrodes_mitigated(material):
    # Common practice: Ni-Cr-Mo alloy C-276, Ti, Ta, Pt-Ir are the usual brine electrode choices.
    out = assess("electromagnetic", material, BRINE)
    assert "EM_CHLORIDES" not in codes(out)
    f = by_code(out, "EM_CHLORIDES_MITIGATED")
    assert f.severity == "low" and f.interval_factor == 1.0


def test_em_sticky_coats_electrodes():
    # Common practice: coating insulates electrodes.
    fl = FluidProps(phase="liquid", conductivity_us_cm=500, sticky=True)
    assert "EM_ELECTRODE_COATING" in codes(assess("electromagnetic", "316L", fl))
    assert "EM_ELECTRODE_COATING" not in codes(assess("electromagnetic", "316L", TOWN_WATER))


# ---------------------------------------------------------------- coriolis

def test_coriolis_chlorides_scc():
    # Common practice: chloride stress corrosion cracking of stainless tubes.
    assert by_code(assess("coriolis", "316L", BRINE), "CORIOLIS_CHLORIDES").severity == "high"
    assert "CORIOLIS_CHLORIDES" not in codes(assess("coriolis", "316L", TOWN_WATER))
    assert "CORIOLIS_CHLORIDES" not in codes(assess("coriolis", "alloy C-22", BRINE))


def test_coriolis_slurry_erosion():
    # Common practice: abrasive solids erode Coriolis tubes.
    assert "CORIOLIS_EROSION" in codes(assess("coriolis", "316L", FluidProps(phase="slurry")))
    assert "CORIOLIS_EROSION" in codes(assess("coriolis", "316L", FluidProps(phase="liquid", solids=True)))
    assert "CORIOLIS_EROSION" not in codes(assess("coriolis", "316L", TOWN_WATER))


# ---------------------------------------------------------------- turbine / PD

def test_turbine_solids_wear_and_moving_parts_note():
    # Common practice: solids wear turbine bearings/rotor; moving parts note.
    dirty = FluidProps(phase="liquid", solids=True)
    out = assess("turbine", "316L", dirty)
    assert "TURBINE_SOLIDS_WEAR" in codes(out)
    clean = assess("turbine", "316L", TOWN_WATER)
    assert "TURBINE_SOLIDS_WEAR" not in codes(clean)
    note = by_code(clean, "TURBINE_MOVING_PARTS")
    assert note.severity == "low"


def test_pd_sticky_and_moving_parts_note():
    # Common practice: sticky fluid builds up in PD meter clearances.
    fl = FluidProps(phase="liquid", sticky=True)
    assert "PD_STICKY" in codes(assess("positive_displacement", "cast iron", fl))
    clean = assess("positive_displacement", "cast iron", TOWN_WATER)
    assert "PD_STICKY" not in codes(clean)
    assert by_code(clean, "PD_MOVING_PARTS").severity == "low"


def test_moving_parts_note_only_on_mechanical_meters():
    # Common practice: only turbine and PD have moving parts in the flow.
    for p in PRINCIPLES:
        has_note = any(c.endswith("_MOVING_PARTS") for c in codes(
            assess(p, "316L", TOWN_WATER, min_flow_m3_h=5, diameter_mm=52.5)))
        assert has_note == (p in ("turbine", "positive_displacement")), p


# ---------------------------------------------------------------- DP meters

@pytest.mark.parametrize("principle,prefix", [("orifice", "ORIFICE"), ("venturi", "VENTURI")])
@pytest.mark.parametrize("flag", ["scaling", "biofouling", "solids"])
def test_dp_impulse_lines_block(principle, prefix, flag):
    # Common practice: impulse lines block with scale, slime or solids.
    fl = FluidProps(phase="liquid", **{flag: True})
    assert f"{prefix}_IMPULSE_LINE_BLOCKING" in codes(assess(principle, "316L", fl))
    assert f"{prefix}_IMPULSE_LINE_BLOCKING" not in codes(assess(principle, "316L", TOWN_WATER))


def test_orifice_edge_wear():
    # Common practice (ISO 5167 assumes a sharp square edge): solids round it.
    fl = FluidProps(phase="liquid", solids=True)
    assert "ORIFICE_EDGE_WEAR" in codes(assess("orifice", "316L", fl))
    assert "ORIFICE_EDGE_WEAR" not in codes(assess("orifice", "316L", TOWN_WATER))
    # Venturi has no sharp edge rule.
    assert "ORIFICE_EDGE_WEAR" not in codes(assess("venturi", "316L", fl))


# ---------------------------------------------------------------- pitot

@pytest.mark.parametrize("principle,prefix", [("pitot", "PITOT"), ("averaging_pitot", "AVG_PITOT")])
@pytest.mark.parametrize("flag", ["scaling", "biofouling", "solids", "sticky"])
def test_pitot_ports_block(principle, prefix, flag):
    # Common practice: small sensing ports block with deposits.
    fl = FluidProps(phase="liquid", **{flag: True})
    assert f"{prefix}_PORT_BLOCKING" in codes(assess(principle, "316L", fl))
    assert assess(principle, "316L", TOWN_WATER) == []


# ---------------------------------------------------------------- vortex

def test_vortex_viscous_oil_low_min_flow_flagged():
    # From memory / common practice: vortex linearity limit Re ~10k-20k; we
    # use 20,000. Oil rho 850 kg/m3, mu 100 mPa·s, min flow 5 m3/h, D 52.5 mm:
    # v = 0.0013889 / 0.00216475 = 0.6416 m/s;
    # Re = 850 * 0.6416 * 0.0525 / 0.1 = 286  -> far below 20,000.
    oil = FluidProps(phase="liquid", density_kg_m3=850, viscosity_mpa_s=100)
    out = assess("vortex", "316L", oil, normal_flow_m3_h=20, min_flow_m3_h=5, diameter_mm=52.5)
    f = by_code(out, "VORTEX_LOW_RE")
    assert f.severity == "high"
    assert "286" in f.reason


def test_vortex_water_ok():
    # Same threshold; water 10 m3/h in DN50 gives Re ~67,100 (worked example
    # above) -> no low-Re finding.
    out = assess("vortex", "316L", TOWN_WATER, min_flow_m3_h=10, diameter_mm=52.5)
    assert "VORTEX_LOW_RE" not in codes(out)
    assert "VORTEX_RE_UNKNOWN" not in codes(out)
    assert out == []


def test_vortex_threshold_edge():
    # Threshold 20,000 (from memory / common practice). Choose flow so that
    # Re is just above / just below: Re scales linearly with Q, so
    # Q = 10 * 20000 / 67112 = 2.980 m3/h gives Re ~20,000.
    above = assess("vortex", "316L", TOWN_WATER, min_flow_m3_h=3.0, diameter_mm=52.5)
    below = assess("vortex", "316L", TOWN_WATER, min_flow_m3_h=2.95, diameter_mm=52.5)
    assert "VORTEX_LOW_RE" not in codes(above)
    assert "VORTEX_LOW_RE" in codes(below)


@pytest.mark.parametrize("kwargs,fluid", [
    ({"diameter_mm": 52.5}, TOWN_WATER),                       # no min flow
    ({"min_flow_m3_h": 5}, TOWN_WATER),                        # no diameter
    ({"min_flow_m3_h": 5, "diameter_mm": 52.5}, FluidProps(phase="liquid")),  # no rho/mu
])
def test_vortex_re_unknown_when_data_missing(kwargs, fluid):
    # Common practice: cannot check Re without the data -> low note.
    f = by_code(assess("vortex", "316L", fluid, **kwargs), "VORTEX_RE_UNKNOWN")
    assert f.severity == "low"


def test_vortex_slurry_and_sticky():
    # Common practice: solids erode / deposits change the bluff body.
    base = dict(min_flow_m3_h=10, diameter_mm=52.5)
    slurry = FluidProps(phase="slurry", density_kg_m3=1200, viscosity_mpa_s=2)
    sticky = FluidProps(phase="liquid", density_kg_m3=998.2, viscosity_mpa_s=1.002, sticky=True)
    assert "VORTEX_SLURRY" in codes(assess("vortex", "316L", slurry, **base))
    assert "VORTEX_COATING" in codes(assess("vortex", "316L", sticky, **base))
    clean = codes(assess("vortex", "316L", TOWN_WATER, **base))
    assert "VORTEX_SLURRY" not in clean and "VORTEX_COATING" not in clean


# ---------------------------------------------------------------- thermal mass

def test_thermal_on_liquid_misapplied():
    # Common practice: thermal mass meters are for gases.
    f = by_code(assess("thermal_mass", "316L", TOWN_WATER), "THERMAL_NOT_GAS")
    assert f.severity == "misapplied"
    assert assess("thermal_mass", "316L", CLEAN_GAS) == []


@pytest.mark.parametrize("fluid", [
    FluidProps(phase="gas", sticky=True),
    FluidProps(phase="gas", biofouling=True),
    FluidProps(phase="steam"),  # condensate droplets wet the sensor
])
def test_thermal_sensor_coating(fluid):
    # Common practice: coating/wetting of the heated sensor changes heat transfer.
    assert "THERMAL_SENSOR_COATING" in codes(assess("thermal_mass", "316L", fluid))


def test_thermal_chlorides_corrosion():
    # Common practice: corrosive gas attacks the thin sensor sheath.
    fl = FluidProps(phase="gas", chlorides=True)
    assert "THERMAL_CHLORIDES" in codes(assess("thermal_mass", "316L", fl))
    assert "THERMAL_CHLORIDES" not in codes(assess("thermal_mass", "alloy C-276", fl))
    assert "THERMAL_CHLORIDES" not in codes(assess("thermal_mass", "316L", CLEAN_GAS))


# ---------------------------------------------------------------- ultrasonic

@pytest.mark.parametrize("fluid", [
    FluidProps(phase="liquid", solids=True),
    FluidProps(phase="liquid", entrained_gas=True),
    FluidProps(phase="slurry"),
])
def test_ultrasonic_transit_signal_loss(fluid):
    # Common practice: solids and bubbles scatter the ultrasonic signal.
    assert "USONIC_SIGNAL_LOSS" in codes(assess("ultrasonic_transit", "316L", fluid))


def test_ultrasonic_transit_clean_liquid_ok():
    # Common practice: clean liquid is the ideal transit-time application.
    assert assess("ultrasonic_transit", "316L", TOWN_WATER) == []


def test_clampon_corrosive_low_risk_note():
    # Common practice: clamp-on has nothing wetted, so it is the low-risk option.
    f = by_code(assess("ultrasonic_clampon", "n/a", BRINE), "CLAMPON_CORROSIVE_OK")
    assert f.severity == "low" and f.interval_factor == 1.0
    assert "CLAMPON_CORROSIVE_OK" not in codes(assess("ultrasonic_clampon", "n/a", TOWN_WATER))
    assert interval_factor(assess("ultrasonic_clampon", "n/a", BRINE)) == 1.0


# ---------------------------------------------------------------- combined

def test_interval_factor_over_assess_picks_worst():
    # Common practice scale: misapplied 0.25 < high 0.5 < medium 0.75.
    fl = FluidProps(phase="liquid", conductivity_us_cm=1, chlorides=True, sticky=True, temperature_c=20)
    out = assess("electromagnetic", "316L", fl)
    assert codes(out) == {"EM_LOW_CONDUCTIVITY", "EM_CHLORIDES", "EM_ELECTRODE_COATING"}
    assert interval_factor(out) == pytest.approx(0.25)


# ------------------------------------------------------- rules that read the whole duty (issue 17 item 7)

from plant import materials  # noqa: E402
from plant.risk import FACTOR_NOTE, NOT_FIT, TITLES, recommendation  # noqa: E402

HOT_BRINE = FluidProps(phase="liquid", conductivity_us_cm=50000, chlorides=True, temperature_c=80)


def test_em_liquid_without_conductivity_asks_for_it():
    # Common practice: the ~5 µS/cm minimum can only be checked with a recorded conductivity, so a missing
    # value is a finding of its own (low, factor 0.9: 365 d × 0.9 = 328.5 d).
    out = assess("electromagnetic", "316L", FluidProps(phase="liquid", temperature_c=20))
    f = by_code(out, "EM_CONDUCTIVITY_UNKNOWN")
    assert (f.severity, f.interval_factor) == ("low", 0.9)
    assert "conductivity" in f.reason.lower() and "record" in f.reason.lower()
    assert 365 * interval_factor(out) == pytest.approx(328.5)
    assert "EM_CONDUCTIVITY_UNKNOWN" in codes(assess("electromagnetic", "316L", FluidProps(phase="slurry")))
    # recorded (500 µS/cm) -> nothing to ask; gas -> already misapplied, no request for a conductivity
    assert "EM_CONDUCTIVITY_UNKNOWN" not in codes(assess("electromagnetic", "316L", TOWN_WATER))
    assert codes(assess("electromagnetic", "316L", CLEAN_GAS)) == {"EM_NOT_LIQUID"}


@pytest.mark.parametrize("principle, code, severity, factor", [
    # Common practice: a magmeter counts bubbles as liquid and bubbles at the electrodes make noise (medium).
    ("electromagnetic", "EM_ENTRAINED_GAS", "medium", 0.75),
    # Common practice: gas decouples in vibrating tubes; mass flow and density both go wrong (high).
    ("coriolis", "CORIOLIS_ENTRAINED_GAS", "high", 0.5),
    # Common practice: bubbles damp the vortices and disturb the shedding frequency (medium).
    ("vortex", "VORTEX_ENTRAINED_GAS", "medium", 0.75),
])
def test_entrained_gas_flagged(principle, code, severity, factor):
    gassy = FluidProps(phase="liquid", conductivity_us_cm=500, density_kg_m3=998.2, viscosity_mpa_s=1.002,
                       entrained_gas=True, temperature_c=20)
    f = by_code(assess(principle, "316L", gassy, min_flow_m3_h=20, diameter_mm=52.5), code)
    assert (f.severity, f.interval_factor) == (severity, factor)
    clean = FluidProps(phase="liquid", conductivity_us_cm=500, density_kg_m3=998.2, viscosity_mpa_s=1.002)
    assert code not in codes(assess(principle, "316L", clean, min_flow_m3_h=20, diameter_mm=52.5))
    # "entrained gas" in a gas duty means nothing: no finding
    gas = FluidProps(phase="gas", density_kg_m3=1.2, viscosity_mpa_s=0.018, entrained_gas=True)
    assert code not in codes(assess(principle, "316L", gas, min_flow_m3_h=200, diameter_mm=52.5))


def test_coriolis_on_gassy_water_halves_the_interval():
    # Common practice (high = 0.5): base 360 d × 0.5 = 180 d; nothing else applies to clean water at 20 °C.
    gassy = FluidProps(phase="liquid", conductivity_us_cm=500, entrained_gas=True, temperature_c=20)
    out = assess("coriolis", "316L", gassy)
    assert codes(out) == {"CORIOLIS_ENTRAINED_GAS"}
    assert round(360 * interval_factor(out)) == 180


@pytest.mark.parametrize("principle, code, severity, factor", [
    # Common practice: chloride stress-corrosion cracking of austenitic stainless above about 60 °C.
    ("electromagnetic", "EM_CHLORIDE_CRACKING", "high", 0.5),
    ("vortex", "VORTEX_CHLORIDE_CRACKING", "high", 0.5),
    ("orifice", "ORIFICE_CHLORIDE_CRACKING", "high", 0.5),
    # Common practice: thin vibrating stainless tubes are the wrong choice for hot chloride service.
    ("coriolis", "CORIOLIS_CHLORIDE_CRACKING", "misapplied", 0.25),
])
def test_hot_chlorides_crack_austenitic_stainless(principle, code, severity, factor):
    f = by_code(assess(principle, "316L", HOT_BRINE), code)
    assert (f.severity, f.interval_factor) == (severity, factor)
    assert "80 °C" in f.reason and "60 °C" in f.reason


def test_chloride_cracking_threshold_and_materials():
    # Common practice: "above about 60 °C" - 61 °C is above, 60 °C is not.
    def brine(t):
        return FluidProps(phase="liquid", conductivity_us_cm=50000, chlorides=True, temperature_c=t)
    assert "CORIOLIS_CHLORIDE_CRACKING" in codes(assess("coriolis", "304", brine(61)))
    assert "CORIOLIS_CHLORIDE_CRACKING" not in codes(assess("coriolis", "304", brine(60)))
    # Not austenitic: duplex 2205 keeps the chloride (pitting) finding but not the cracking one; alloy C-276 is
    # resistant (a note); nothing wetted on a clamp-on; no chlorides, no cracking however hot (caustic at 75 °C).
    duplex = codes(assess("coriolis", "duplex 2205", brine(80)))
    assert "CORIOLIS_CHLORIDES" in duplex and "CORIOLIS_CHLORIDE_CRACKING" not in duplex
    assert codes(assess("coriolis", "alloy C-276", brine(80))) == {"CORIOLIS_CHLORIDES_MITIGATED"}
    assert codes(assess("ultrasonic_clampon", "316L", brine(80))) == {"CLAMPON_CORROSIVE_OK"}
    caustic = FluidProps(phase="liquid", conductivity_us_cm=90000, temperature_c=75)
    assert codes(assess("coriolis", "316L", caustic)) == set()


def test_chlorides_on_stainless_without_temperature_ask_for_it():
    # Common practice: the cracking rule needs a temperature; without one, a note (factor 1.0) asks for it.
    out = assess("vortex", "316L", BRINE, min_flow_m3_h=5, diameter_mm=52.5)
    f = by_code(out, "VORTEX_CHLORIDE_TEMPERATURE_UNKNOWN")
    assert (f.severity, f.interval_factor) == ("low", FACTOR_NOTE)
    assert "VORTEX_CHLORIDE_TEMPERATURE_UNKNOWN" not in codes(assess("vortex", "titanium", BRINE))


@pytest.mark.parametrize("principle, code", [
    # Common practice: sticky fluid sets or coats in small-bore DP impulse lines, as in pitot ports.
    ("orifice", "ORIFICE_IMPULSE_LINE_BLOCKING"),
    ("venturi", "VENTURI_IMPULSE_LINE_BLOCKING"),
])
def test_sticky_fluid_blocks_dp_impulse_lines(principle, code):
    syrup = FluidProps(phase="liquid", conductivity_us_cm=30, sticky=True, temperature_c=40)
    f = by_code(assess(principle, "316", syrup), code)
    assert (f.severity, f.interval_factor) == ("medium", 0.75)
    assert "sticky deposits" in f.reason
    assert code not in codes(assess(principle, "316", TOWN_WATER))


def test_sticky_fluid_on_a_turbine():
    # Common practice: deposits drag the rotor and change its blades; medium (0.75) beats the 0.9 wear note,
    # so base 365 d × 0.75 = 273.75 d.
    syrup = FluidProps(phase="liquid", sticky=True, temperature_c=40)
    out = assess("turbine", "316", syrup)
    assert codes(out) == {"TURBINE_MOVING_PARTS", "TURBINE_STICKY"}
    assert 365 * interval_factor(out) == pytest.approx(273.75)
    assert codes(assess("turbine", "316", TOWN_WATER)) == {"TURBINE_MOVING_PARTS"}


@pytest.mark.parametrize("material, mitigated", [
    ("not titanium: 316L", False),  # free text is not on the list: not recorded, so not resistant
    ("alloy C-276", True),          # on the list as chloride resistant (common practice)
    ("316L", False),
    ("", False),                    # not recorded: the safe side
    ("PTFE", False),                # a liner material says nothing about the electrodes of a magmeter
])
def test_chloride_resistance_comes_from_the_fixed_list(material, mitigated):
    out = codes(assess("electromagnetic", material, BRINE))
    assert ("EM_CHLORIDES_MITIGATED" in out) is mitigated
    assert ("EM_CHLORIDES" in out) is not mitigated


def test_fixed_list_properties():
    # Common practice: 304/316 families are the austenitic grades; Ni-Cr-Mo alloys, Ti, Ta, Pt-Ir are resistant.
    austenitic = {m.code for m in materials.MATERIALS if m.austenitic}
    assert austenitic == {"304", "304L", "316", "316L"}
    assert {"alloy C-276", "alloy C-22", "titanium", "tantalum", "platinum-iridium"} <= {
        m.code for m in materials.MATERIALS if m.chloride_resistant}
    assert not ({"316L", "duplex 2205", "carbon steel"} & {m.code for m in materials.MATERIALS
                                                           if m.chloride_resistant})
    assert materials.lookup("not titanium: 316L") is None


FLUID_GRID = [
    FluidProps(phase=phase, conductivity_us_cm=cond, density_kg_m3=1000, viscosity_mpa_s=1.0, solids=flag,
               chlorides=flag, scaling=flag, biofouling=flag, sticky=flag, entrained_gas=flag, temperature_c=temp)
    for phase in ("liquid", "gas", "steam", "slurry") for cond in (None, 1, 500) for flag in (False, True)
    for temp in (None, 20, 80)
]


def test_every_code_has_plain_words():
    # The pages show titles; a code without one would fall back to the raw code.
    seen = set()
    for principle in PRINCIPLES:
        for material in ("316L", "alloy C-276", "", "PTFE"):
            for fluid in FLUID_GRID:
                for flow in (None, 0.01, 100):
                    seen |= codes(assess(principle, material, fluid, min_flow_m3_h=flow, diameter_mm=50))
    missing = sorted(seen - set(TITLES))
    assert not missing
    assert Finding("EM_CHLORIDES", "high", "", 0.5).title == "Chlorides attack the electrodes"


def test_misapplied_meter_gets_the_not_fit_recommendation():
    # Common practice: a magmeter on oil (or demineralised water, 1 µS/cm) cannot work: replace or re-engineer.
    oil = FluidProps(phase="liquid", conductivity_us_cm=0.0001, temperature_c=25)
    assert recommendation(assess("electromagnetic", "316L", oil)) == NOT_FIT
    assert recommendation(assess("electromagnetic", "316L", DEMIN_WATER)) == NOT_FIT
    assert NOT_FIT == "Not fit for this duty: replace or re-engineer"
    assert recommendation(assess("electromagnetic", "316L", TOWN_WATER)) == ""


# ---------------------------------------------------------------- issue 26: brine for every wetted principle
CHLORIDE_PRINCIPLES = {"turbine": "TURBINE", "positive_displacement": "PD", "orifice": "ORIFICE",
                       "venturi": "VENTURI", "pitot": "PITOT", "averaging_pitot": "AVG_PITOT", "vortex": "VORTEX"}


@pytest.mark.parametrize("principle, prefix", sorted(CHLORIDE_PRINCIPLES.items()))
def test_brine_at_ambient_is_a_finding_by_wetted_material_with_a_task(principle, prefix):
    """Issue 26 item 5 (common practice: chlorides pit and crevice-attack austenitic stainless, carbon steel and
    cast iron at any temperature; titanium, super duplex and nickel alloys resist). At 20 °C, below the cracking
    rule, a turbine, PD meter, DP primary or vortex meter on brine gets a medium finding that shortens (0.75) and
    calls for a maintenance task; on a resistant material a note that does not shorten (factor 1)."""
    from maintenance.tasks import derive_tasks

    brine = FluidProps(phase="liquid", conductivity_us_cm=50000, chlorides=True, temperature_c=20,
                       density_kg_m3=1100, viscosity_mpa_s=1.2)
    for material in ("316L", "cast iron", "carbon steel", ""):
        found = [f for f in assess(principle, material, brine, min_flow_m3_h=50, diameter_mm=100)
                 if f.code == f"{prefix}_CHLORIDES"]
        assert len(found) == 1 and found[0].severity == "medium" and found[0].interval_factor == 0.75, material
        assert found[0].severity_words == "medium risk"
        tasks = derive_tasks(principle, found)
        assert any(f"{prefix}_CHLORIDES" in t.because for t in tasks), (principle, material)
    for material in ("titanium", "alloy C-276", "super duplex 2507"):
        notes = [f for f in assess(principle, material, brine, min_flow_m3_h=50, diameter_mm=100)
                 if f.code.startswith(f"{prefix}_CHLORIDES")]
        assert [f.code for f in notes] == [f"{prefix}_CHLORIDES_MITIGATED"], material
        assert notes[0].interval_factor == FACTOR_NOTE == 1.0 and notes[0].severity_words == "note"
    clean = FluidProps(phase="liquid", conductivity_us_cm=500, temperature_c=20)
    assert not [f for f in assess(principle, "316L", clean) if "CHLORIDE" in f.code]


def test_a_note_never_shortens_and_a_shortening_low_finding_is_not_called_a_note():
    """Issue 26 item 5: every finding worded "note" has factor 1; a low finding that shortens (0.9) is "low risk"."""
    fluids = [FluidProps(phase=phase, conductivity_us_cm=c, chlorides=ch, sticky=st, temperature_c=t)
              for phase in ("liquid", "gas") for c in (None, 50000) for ch in (False, True) for st in (False, True)
              for t in (None, 20, 80)]
    seen = set()
    for principle in PRINCIPLES:
        for material in ("316L", "titanium", ""):
            for fluid in fluids:
                for f in assess(principle, material, fluid):
                    seen.add(f.severity_words)
                    if f.severity_words == "note":
                        assert f.interval_factor == 1.0, f.code
                    if f.interval_factor < 1.0:
                        assert f.severity_words != "note", f.code
    assert {"note", "low risk"} <= seen
