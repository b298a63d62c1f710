"""Values a technician should look at again before they are saved: pure, numbers in, a sentence out.

A typo (150 typed for 1.50) turns a good meter into a failed calibration. A reading is *held* (not refused) when
it lies further from the reference than the meter could plausibly explain; the technician confirms it and it is
saved as typed. The thresholds are common practice (no published source): an error beyond ten times the MPE, or
an indication beyond 150 % of the range high (or as far below the range low).

The physical bounds of the conditions of a calibration are refusals: a value outside them cannot be true.
"""
from __future__ import annotations

import math

MPE_FACTOR = 10.0       # common practice: a meter more than 10 × its MPE out is more likely a typo than a drift
RANGE_FACTOR = 1.5      # common practice: an indication beyond 150 % of the range high is off the meter's scale

# (low, high, unit, why) — low/high inclusive
CONDITION_BOUNDS = {
    # common practice, from memory: the coldest and hottest air people calibrate in (record extremes are about
    # −68 °C and +57 °C); beyond these a sign or a unit is wrong
    "ambient_temp_c": (-60.0, 60.0, "°C", "the air temperature where people work"),
    # physical: nothing is colder than absolute zero; 1,000 °C is beyond any liquid or gas a flow meter serves
    "fluid_temp_c": (-273.15, 1000.0, "°C", "absolute zero up to 1,000 °C"),
    # physical: no fluid is denser than about 23,000 kg/m³ (osmium, a solid, is 22,590 kg/m³; mercury 13,534)
    "density_kg_m3": (0.0, 23000.0, "kg/m³", "above zero and no denser than the densest matter"),
}


def _finite(name: str, value) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"{name} must be a number, got {value!r}.")
    if not math.isfinite(value):
        raise ValueError(f"{name} must be finite, got {value!r}.")
    return float(value)


def condition_out_of_bounds(name: str, value) -> str:
    """The sentence refusing a condition outside its bounds, or "" when it is inside."""
    if name not in CONDITION_BOUNDS:
        raise ValueError(f"name must be one of {', '.join(CONDITION_BOUNDS)}, got {name!r}.")
    value = _finite("value", value)
    low, high, unit, why = CONDITION_BOUNDS[name]
    if name == "density_kg_m3" and value <= low:
        return f"A density must be above zero ({value:g} {unit} entered)."
    if value < low or value > high:
        return f"{value:g} {unit} cannot be right here: enter a value from {low:g} to {high:g} {unit} ({why})."
    return ""


def reading_to_check(reference: float, indicated: float, range_min: float, range_max: float,
                     mpe_flow: float, unit_label: str = "") -> str:
    """Why a reading should be looked at again ("" when it is plausible). All values in the meter's flow units;
    `mpe_flow` is the MPE at this reference in flow units (calibration.errors.mpe_in_flow_units)."""
    reference, indicated = _finite("reference", reference), _finite("indicated", indicated)
    low, high, mpe_flow = _finite("range_min", range_min), _finite("range_max", range_max), _finite("mpe_flow", mpe_flow)
    if not high > low:
        raise ValueError(f"range_max must be above range_min, got {range_min!r}–{range_max!r}.")
    if not mpe_flow > 0:
        raise ValueError(f"mpe_flow must be above zero, got {mpe_flow!r}.")
    unit = f" {unit_label}" if unit_label else ""
    span = high - low
    if indicated > RANGE_FACTOR * high or indicated < low - (RANGE_FACTOR - 1) * span:
        return (f"Check this value: an indication of {indicated:g}{unit} is off the meter's scale "
                f"({low:g}–{high:g}{unit}, more than {100 * (RANGE_FACTOR - 1):g} % beyond it).")
    error = indicated - reference
    if abs(error) > MPE_FACTOR * mpe_flow:
        return (f"Check this value: the indication {indicated:g}{unit} is {abs(error):.4g}{unit} from the reference "
                f"{reference:g}{unit}, {abs(error) / mpe_flow:.0f} times the MPE there (±{mpe_flow:.4g}{unit}).")
    return ""
