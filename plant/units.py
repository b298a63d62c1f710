"""Flow units of the trade and conversions between them (pure: numbers and unit codes in, numbers out).

Quantities are handled by `pint`; this module fixes the list of units a flow meter or a reference
standard may be stated in, stores each as a short code, and says what extra fact a conversion needs:

* volume flow ↔ volume flow, mass flow ↔ mass flow: a fixed factor (NIST SP 811, 2008, appendix B.8
  for the US gallon and the avoirdupois pound; the litre and the tonne are SI-accepted units, BIPM
  SI Brochure, 9th ed., table 8);
* volume flow ↔ mass flow: the density of the fluid at the conditions of the measurement;
* gas volume at reference conditions ("normal" 0 °C / 101.325 kPa, "standard" 15 °C / 101.325 kPa)
  ↔ another reference: ideal-gas law, V2 = V1 · (p1 / p2) · (T2 / T1) (compressibility taken equal at
  both reference states, which holds for the near-ideal gases of plant service at atmospheric pressure);
* gas volume at reference conditions ↔ actual volume: ideal-gas law with the line's absolute pressure
  and temperature, and the compressibility factor Z if given (Z = 1 otherwise);
* gas volume at reference conditions ↔ mass: the density at the reference conditions.

Every refusal is a `UnitError` whose message says what is missing, so a form can show it at the field.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import pint

_ureg = pint.UnitRegistry()
Q_ = _ureg.Quantity

STANDARD_ATMOSPHERE_KPA = 101.325  # BIPM SI Brochure, 9th ed. (the standard atmosphere, exact)
ZERO_CELSIUS_K = 273.15            # BIPM SI Brochure, 9th ed. (definition of the degree Celsius)


class UnitError(ValueError):
    """A conversion that cannot be made, with the reason in words."""


@dataclass(frozen=True)
class FlowUnit:
    code: str
    label: str
    kind: str                 # "volume", "mass" or "reference_volume"
    pint_unit: str
    reference_c: float | None = None     # reference temperature of a gas volume unit
    reference_kpa: float | None = None   # reference absolute pressure of a gas volume unit
    reference_name: str = ""


FLOW_UNITS: dict[str, FlowUnit] = {u.code: u for u in (
    FlowUnit("m3/h", "m³/h", "volume", "meter**3/hour"),
    FlowUnit("L/s", "L/s", "volume", "liter/second"),
    FlowUnit("L/min", "L/min", "volume", "liter/minute"),
    FlowUnit("USgpm", "US gal/min", "volume", "gallon/minute"),
    FlowUnit("kg/h", "kg/h", "mass", "kilogram/hour"),
    FlowUnit("kg/s", "kg/s", "mass", "kilogram/second"),
    FlowUnit("t/h", "t/h", "mass", "metric_ton/hour"),
    FlowUnit("lb/h", "lb/h", "mass", "pound/hour"),
    FlowUnit("Nm3/h", "Nm³/h (0 °C, 101.325 kPa)", "reference_volume", "meter**3/hour",
             reference_c=0.0, reference_kpa=STANDARD_ATMOSPHERE_KPA, reference_name="normal"),
    FlowUnit("Sm3/h", "Sm³/h (15 °C, 101.325 kPa)", "reference_volume", "meter**3/hour",
             reference_c=15.0, reference_kpa=STANDARD_ATMOSPHERE_KPA, reference_name="standard"),
)}

UNIT_CHOICES = [(u.code, u.label) for u in FLOW_UNITS.values()]

# The message of a model field with UNIT_CHOICES for a value that is not a code (Django's invalid_choice).
UNKNOWN_UNIT = ('"%(value)s" is not one of the flow units in use; choose one of '
                + ", ".join(FLOW_UNITS) + " (e.g. m3/h for m³/h).")

# Free-text spellings found in registers before units were codes (for the data migration and imports).
LEGACY_SPELLINGS = {
    "m³/h": "m3/h", "m3/h": "m3/h", "m^3/h": "m3/h", "cu m/h": "m3/h",
    "l/s": "L/s", "L/s": "L/s", "l/min": "L/min", "L/min": "L/min", "lpm": "L/min",
    "gpm": "USgpm", "US gal/min": "USgpm", "usgpm": "USgpm",
    "kg/h": "kg/h", "kg/s": "kg/s", "t/h": "t/h", "lb/h": "lb/h", "lb/hr": "lb/h",
    "Nm³/h": "Nm3/h", "Nm3/h": "Nm3/h", "Sm³/h": "Sm3/h", "Sm3/h": "Sm3/h",
}


def unit(code: str) -> FlowUnit:
    try:
        return FLOW_UNITS[code]
    except KeyError:
        known = ", ".join(FLOW_UNITS)
        raise UnitError(f"'{code}' is not one of the flow units in use ({known}).") from None


def code_for(text: str) -> str:
    """The unit code for a code or a legacy spelling; UnitError when unknown."""
    text = (text or "").strip()
    if text in FLOW_UNITS:
        return text
    if text in LEGACY_SPELLINGS:
        return LEGACY_SPELLINGS[text]
    lowered = {k.lower(): v for k, v in LEGACY_SPELLINGS.items()}
    if text.lower() in lowered:
        return lowered[text.lower()]
    unit(text)  # raises with the list of known codes
    raise AssertionError("unreachable")


def label_for(text: str) -> str:
    """The label of a unit code or legacy spelling (m3/h -> m³/h), for pages; other text is shown as it is."""
    try:
        return FLOW_UNITS[code_for(text)].label
    except UnitError:
        return text or ""


def _factor(src: FlowUnit, dst: FlowUnit) -> float:
    return float(Q_(1.0, src.pint_unit).to(dst.pint_unit).magnitude)


def _to_si(value: float, u: FlowUnit) -> float:
    """m³/s for volume units, kg/s for mass units."""
    target = "kilogram/second" if u.kind == "mass" else "meter**3/second"
    return float(Q_(value, u.pint_unit).to(target).magnitude)


def _from_si(value: float, u: FlowUnit) -> float:
    source = "kilogram/second" if u.kind == "mass" else "meter**3/second"
    return float(Q_(value, source).to(u.pint_unit).magnitude)


def _finite_or_refuse(name: str, value) -> None:
    """NaN, ±inf or a non-number refused, naming the argument (UnitError is a ValueError)."""
    try:
        ok = value is not None and not isinstance(value, bool) and math.isfinite(float(value))
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise UnitError(f"{name} must be a finite number, not {value!r}")


def reference_to_actual_factor(u: FlowUnit, line_pressure_kpa_abs: float, line_temp_c: float,
                               compressibility: float = 1.0) -> float:
    """Actual volume per reference volume: (p_ref / p) · (T / T_ref) · Z (ideal gas at the reference)."""
    if line_pressure_kpa_abs is None or line_temp_c is None:
        raise UnitError(f"Converting {u.label} to actual volume needs the line's absolute pressure "
                        "and temperature at the calibration.")
    for name, given in (("line_pressure_kpa_abs", line_pressure_kpa_abs), ("line_temp_c", line_temp_c),
                        ("compressibility", compressibility)):
        _finite_or_refuse(name, given)
    if not line_pressure_kpa_abs > 0:
        raise UnitError("The line's absolute pressure must be above zero.")
    t = line_temp_c + ZERO_CELSIUS_K
    if not t > 0:
        raise UnitError("The line temperature must be above absolute zero.")
    if not compressibility > 0:
        raise UnitError("The compressibility factor Z must be above zero.")
    return (u.reference_kpa / line_pressure_kpa_abs) * (t / (u.reference_c + ZERO_CELSIUS_K)) * compressibility


def convert(value: float, from_code: str, to_code: str, *, density_kg_m3: float | None = None,
            reference_density_kg_m3: float | None = None, line_pressure_kpa_abs: float | None = None,
            line_temp_c: float | None = None, compressibility: float = 1.0) -> float:
    """Convert a flow `value` from one unit code to another.

    `density_kg_m3`: density at the conditions of the measurement (volume ↔ mass).
    `reference_density_kg_m3`: gas density at the reference conditions of the reference-volume unit
    involved (reference volume ↔ mass).
    `line_pressure_kpa_abs`, `line_temp_c`, `compressibility`: line conditions (reference volume ↔ actual
    volume). Raises UnitError naming what is missing.
    """
    src, dst = unit(from_code), unit(to_code)
    _finite_or_refuse("value", value)
    for name, given in (("density_kg_m3", density_kg_m3), ("reference_density_kg_m3", reference_density_kg_m3),
                        ("line_pressure_kpa_abs", line_pressure_kpa_abs), ("line_temp_c", line_temp_c),
                        ("compressibility", compressibility)):
        if given is not None:
            _finite_or_refuse(name, given)
    if src.code == dst.code:
        return float(value)
    kinds = (src.kind, dst.kind)
    if src.kind == dst.kind and src.kind in ("volume", "mass"):
        return float(value) * _factor(src, dst)
    if kinds in (("volume", "mass"), ("mass", "volume")):
        if density_kg_m3 is None:
            raise UnitError(f"Converting {src.label} to {dst.label} needs the fluid density at the "
                            "conditions of the calibration.")
        if not density_kg_m3 > 0:
            raise UnitError("The density must be above zero.")
        si = _to_si(value, src)
        si = si * density_kg_m3 if src.kind == "volume" else si / density_kg_m3
        return _from_si(si, dst)
    if kinds == ("reference_volume", "reference_volume"):
        # ideal gas between two reference states: V2 = V1 · (p1/p2) · (T2/T1)
        t1, t2 = src.reference_c + ZERO_CELSIUS_K, dst.reference_c + ZERO_CELSIUS_K
        return float(value) * (src.reference_kpa / dst.reference_kpa) * (t2 / t1)
    if "reference_volume" in kinds and "volume" in kinds:
        ref = src if src.kind == "reference_volume" else dst
        factor = reference_to_actual_factor(ref, line_pressure_kpa_abs, line_temp_c, compressibility)
        if src.kind == "reference_volume":
            return _from_si(_to_si(value, src) * factor, dst)
        return _from_si(_to_si(value, src) / factor, dst)
    if "reference_volume" in kinds and "mass" in kinds:
        ref = src if src.kind == "reference_volume" else dst
        if reference_density_kg_m3 is None:
            raise UnitError(f"Converting {src.label} to {dst.label} needs the gas density at the "
                            f"{ref.reference_name} conditions ({ref.reference_c:g} °C, {ref.reference_kpa:g} kPa).")
        if not reference_density_kg_m3 > 0:
            raise UnitError("The density must be above zero.")
        si = _to_si(value, src)
        si = si * reference_density_kg_m3 if src.kind == "reference_volume" else si / reference_density_kg_m3
        return _from_si(si, dst)
    raise UnitError(f"{src.label} cannot be converted to {dst.label}.")  # pragma: no cover - all kinds covered


def conversion_needs(from_code: str, to_code: str) -> set[str]:
    """What facts a conversion needs beyond the value: a subset of {"density", "reference_density",
    "line_conditions"}; empty for a fixed factor."""
    src, dst = unit(from_code), unit(to_code)
    kinds = {src.kind, dst.kind}
    if src.code == dst.code or len(kinds) == 1:
        return set()
    if kinds == {"volume", "mass"}:
        return {"density"}
    if kinds == {"reference_volume", "volume"}:
        return {"line_conditions"}
    return {"reference_density"}
