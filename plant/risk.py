"""Principle x fluid risk rules for installed flow meters.

Pure Python: no Django, no ORM. Other code calls :func:`assess`,
:func:`interval_factor` and :func:`reynolds_number`.

Each rule below is tagged with where its basis comes from:

* "common practice" - a rule of thumb of the trade, no specific source.
* "from memory"     - a number recalled from manufacturer literature /
  handbooks that has NOT been checked against a document here; verify
  before relying on it for anything contractual.

Severity -> interval factor (the factor shortens the calibration /
inspection interval; the smallest factor of all findings wins):

* ``misapplied`` 0.25 - the principle should not be used on this fluid.
* ``high``       0.5
* ``medium``     0.75
* ``low``        0.9 ("low risk": a finding, it shortens), or 1.0 for a note (informational: a note never
  shortens; ``Finding.severity_words`` says "note" only for those).

Wetted materials
----------------
``wetted_material`` is a code from the fixed list in :mod:`plant.materials` (blank when not recorded; an
unknown code is treated as not recorded). A chloride finding on a material of that list marked
``chloride_resistant`` becomes a ``low`` note with factor 1.0 (code suffix ``_MITIGATED``), so the technician
still sees that chlorides were considered and that the material is what makes the installation acceptable
(common practice: the material record may be wrong, so a visible note is cheap). For a magnetic meter the
material is that of the electrodes; a non-metal (a liner material) there says nothing about the electrodes, so
the chloride finding stands.

Rules that read the whole duty (each marked with its basis where it is applied):

* chlorides (brine, cooling-tower water, sea water) at any temperature pit and crevice-attack the wetted parts of turbines, positive-displacement
  meters, DP primaries (orifice plates, venturis, pitot and averaging pitot probes) and vortex bluff bodies made
  of austenitic stainless steel, carbon steel or cast iron, or of a material not recorded (a medium finding);
  titanium, super duplex, nickel alloys and the other materials marked chloride resistant turn it into a note
  (common practice);
* chlorides on austenitic stainless above about 60 °C: stress-corrosion cracking (common practice);
  with chlorides on austenitic stainless and no temperature recorded, a note asks for it;
* a magnetic meter on a liquid with no conductivity recorded: a finding asks for it (common practice);
* entrained gas in a liquid for magnetic, Coriolis and vortex meters (common practice);
* sticky fluids for pitot ports, DP impulse lines (orifice, venturi), turbines, PD meters, magnetic electrodes,
  vortex bluff bodies and thermal sensors (common practice).

Plain words
-----------
Every code has a short title in plain words (:data:`TITLES`, :attr:`Finding.title`) for the pages; exports keep
the codes. A ``misapplied`` finding carries the recommendation :data:`NOT_FIT` (:func:`recommendation`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from plant import checks, materials

PRINCIPLES = (
    "electromagnetic",
    "coriolis",
    "vortex",
    "turbine",
    "ultrasonic_transit",
    "ultrasonic_clampon",
    "orifice",
    "venturi",
    "pitot",
    "averaging_pitot",
    "positive_displacement",
    "thermal_mass",
)

PHASES = ("liquid", "gas", "steam", "slurry")

SEVERITIES = ("misapplied", "high", "medium", "low")

# Severity -> default interval factor (common practice scale for this tool).
FACTOR_MISAPPLIED = 0.25
FACTOR_HIGH = 0.5
FACTOR_MEDIUM = 0.75
FACTOR_LOW = 0.9
FACTOR_NOTE = 1.0

# Common practice: electromagnetic meters need a minimum fluid conductivity of
# about 5 uS/cm (many manufacturers quote 5 uS/cm standard, some down to
# ~0.05-1 uS/cm with special converters - from memory).
EM_MIN_CONDUCTIVITY_US_CM = 5.0

# From memory / common practice: manufacturers typically state a lower
# linearity limit for vortex meters of roughly Re 10,000-20,000. We use the
# conservative end, 20,000, for reliable linear vortex shedding measurement.
VORTEX_MIN_RE = 20_000.0

# Common practice: chloride stress-corrosion cracking of austenitic stainless steel is a risk above about 60 °C.
CHLORIDE_SCC_MIN_TEMPERATURE_C = 60.0

# The recommendation for a principle that should not be used on the fluid at all (issue: misapplied meters).
NOT_FIT = "Not fit for this duty: replace or re-engineer"


@dataclass(frozen=True)
class FluidProps:
    phase: str  # "liquid" | "gas" | "steam" | "slurry"
    conductivity_us_cm: float | None = None
    density_kg_m3: float | None = None
    viscosity_mpa_s: float | None = None  # dynamic viscosity in mPa·s (cP)
    solids: bool = False  # abrasive solids present
    chlorides: bool = False  # chlorides/brine or other corrosive content
    scaling: bool = False  # hardness / scaling
    biofouling: bool = False  # slime
    sticky: bool = False  # sticky / coating
    entrained_gas: bool = False
    temperature_c: float | None = None

    def __post_init__(self):
        """NaN, ±inf and out-of-domain properties are refused, naming the field (not silently "no finding")."""
        if self.phase not in PHASES:
            raise ValueError(f"phase must be one of {PHASES}, not {self.phase!r}")
        for name in ("conductivity_us_cm", "density_kg_m3", "viscosity_mpa_s"):
            value = getattr(self, name)
            if value is not None and checks.number(name, value) < 0:
                raise ValueError(f"{name} cannot be negative, not {value!r}")
        if self.temperature_c is not None and checks.number("temperature_c", self.temperature_c) < -273.15:
            raise ValueError(f"temperature_c cannot be below absolute zero, not {self.temperature_c!r}")


@dataclass(frozen=True)
class Finding:
    code: str  # e.g. "EM_LOW_CONDUCTIVITY"
    severity: str  # "misapplied" | "high" | "medium" | "low"
    reason: str  # plain-language reason shown to a technician
    interval_factor: float  # <1 shortens interval; misapplied uses ~0.25

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, not {self.severity!r}")
        checks.fraction("interval_factor", self.interval_factor, include_one=True)

    @property
    def title(self) -> str:
        """The finding in plain words, for pages (exports keep the code)."""
        return TITLES.get(self.code) or self.code.replace("_", " ").capitalize()

    @property
    def severity_words(self) -> str:
        """"note" only for a finding that does not shorten (factor 1); a low finding that shortens is "low risk"."""
        if self.interval_factor >= 1.0:
            return "note"
        return SEVERITY_WORDS.get(self.severity, self.severity)


def reynolds_number(density_kg_m3, viscosity_mpa_s, flow_m3_h, diameter_mm) -> float:
    """Pipe Reynolds number Re = rho * v * D / mu.

    v = Q / (pi * D^2 / 4). Units: density kg/m3, viscosity mPa·s (converted
    to Pa·s by /1000), flow m3/h (converted to m3/s by /3600), diameter mm
    (converted to m by /1000). Raises ValueError on missing or non-positive
    inputs.
    """
    values = {
        "density_kg_m3": density_kg_m3,
        "viscosity_mpa_s": viscosity_mpa_s,
        "flow_m3_h": flow_m3_h,
        "diameter_mm": diameter_mm,
    }
    for name, value in values.items():
        if value is None or isinstance(value, bool):
            raise ValueError(f"{name} is required, got {value!r}")
        try:
            f = float(value)
        except (TypeError, ValueError):
            raise ValueError(f"{name} must be a number, got {value!r}") from None
        if not math.isfinite(f) or f <= 0:
            raise ValueError(f"{name} must be positive, got {value!r}")

    rho = float(density_kg_m3)
    mu = float(viscosity_mpa_s) / 1000.0  # Pa·s
    q = float(flow_m3_h) / 3600.0  # m3/s
    d = float(diameter_mm) / 1000.0  # m
    area = math.pi * d * d / 4.0
    v = q / area
    return rho * v * d / mu


def worst_severity(findings) -> str:
    """The most serious severity among the findings ("" when there are none); an unknown severity is refused."""
    present = {f.severity for f in findings}
    unknown = present - set(SEVERITIES)
    if unknown:
        raise ValueError(f"findings: unknown severity {sorted(unknown)!r}; expected one of {SEVERITIES}")
    return next((s for s in SEVERITIES if s in present), "")


def whole_days(x: float) -> int:
    """The one rounding rule for intervals: nearest whole day, halves upward (not banker's rounding).

    Used by the staircase, the reliability interval, the risk factor and the drift shortening alike.
    """
    return int(math.floor(checks.number("x", x) + 0.5))


def interval_factor(findings) -> float:
    """Smallest interval factor among findings; 1.0 if there are none. A factor that is NaN, ±inf, <= 0 or
    above 1 is refused (ValueError naming the finding): a factor only ever shortens."""
    factors = [checks.fraction(f"findings[{i}].interval_factor", f.interval_factor, include_one=True)
               for i, f in enumerate(findings)]
    return min(factors) if factors else 1.0


def _chloride_resistant(wetted_material: str | None, electrode: bool = False) -> bool:
    """Whether the recorded material is on the list as chloride resistant (for electrodes: and is a metal)."""
    material = materials.lookup(wetted_material)
    if material is None or (electrode and not material.metal):
        return False
    return material.chloride_resistant


def _material_words(wetted_material: str | None) -> str:
    material = materials.lookup(wetted_material)
    return material.label if material else "not recorded"


def _chloride_finding(prefix: str, part: str, severity: str, factor: float,
                      reason: str, wetted_material: str) -> Finding:
    """Chloride finding, downgraded to a low note for a chloride-resistant material (common practice)."""
    if _chloride_resistant(wetted_material, electrode=(part == "electrode")):
        return Finding(
            f"{prefix}_CHLORIDES_MITIGATED",
            "low",
            f"Chlorides present, but the {part} material ({_material_words(wetted_material)}) "
            "is normally resistant to chloride attack. Check the material "
            "record is correct.",
            FACTOR_NOTE,
        )
    return Finding(f"{prefix}_CHLORIDES", severity, reason, factor)


def _chloride_cracking(prefix: str, mat: str, fl: FluidProps, severity: str = "high") -> list[Finding]:
    """Chloride stress-corrosion cracking of austenitic stainless above about 60 °C (common practice).

    Only for a material recorded as austenitic stainless in chloride service. Above
    CHLORIDE_SCC_MIN_TEMPERATURE_C: a finding of ``severity``; temperature not recorded: a note asking for it.
    """
    material = materials.lookup(mat)
    if not fl.chlorides or material is None or not material.austenitic:
        return []
    if fl.temperature_c is None:
        return [Finding(
            f"{prefix}_CHLORIDE_TEMPERATURE_UNKNOWN", "low",
            f"Chlorides on {material.label} and no process temperature recorded; above about "
            f"{CHLORIDE_SCC_MIN_TEMPERATURE_C:g} °C chlorides crack austenitic stainless steel. Record the "
            "fluid temperature.",
            FACTOR_NOTE)]
    if fl.temperature_c > CHLORIDE_SCC_MIN_TEMPERATURE_C:
        factor = FACTOR_MISAPPLIED if severity == "misapplied" else FACTOR_HIGH
        return [Finding(
            f"{prefix}_CHLORIDE_CRACKING", severity,
            f"Chlorides at {fl.temperature_c:g} °C, above about {CHLORIDE_SCC_MIN_TEMPERATURE_C:g} °C, cause "
            f"stress-corrosion cracking of {material.label}; cracks grow without warning and can breach the "
            "pressure boundary. Use a chloride-resistant material.",
            factor)]
    return []


def _chloride_pitting(prefix: str, part: str, mat: str, fl: FluidProps) -> list[Finding]:
    """Chlorides at any temperature pit and crevice-attack the wetted ``part`` (common practice: austenitic
    stainless, carbon steel and cast iron suffer; titanium, super duplex, nickel alloys and the materials marked
    chloride resistant in plant.materials resist it). A medium finding, a note for a resistant material."""
    if not fl.chlorides:
        return []
    material = materials.lookup(mat)
    what = material.label if material else "a material not recorded"
    return [_chloride_finding(
        prefix, part, "medium", FACTOR_MEDIUM,
        f"Chlorides in the fluid pit and crevice-attack the {part} ({what}); pits and attacked edges change the "
        "geometry the meter's calibration depends on. Inspect the wetted parts, or use a chloride-resistant "
        "material (titanium, super duplex, nickel alloy).", mat)]


def _entrained_gas(prefix: str, fl: FluidProps, severity: str, factor: float, reason: str) -> list[Finding]:
    """Gas bubbles carried in a liquid (common practice); not a question for a gas or steam duty."""
    if fl.entrained_gas and fl.phase in ("liquid", "slurry"):
        return [Finding(f"{prefix}_ENTRAINED_GAS", severity, reason, factor)]
    return []


# --------------------------------------------------------------------------
# Per-principle rules
# --------------------------------------------------------------------------

def _electromagnetic(mat, fl, **_):
    out = []
    # Common practice: a magmeter measures the voltage induced in a
    # conducting fluid, so it cannot work on gas or steam at all.
    if fl.phase in ("gas", "steam"):
        out.append(Finding(
            "EM_NOT_LIQUID", "misapplied",
            "A magnetic flow meter needs a conductive liquid between its "
            f"electrodes; it cannot measure {fl.phase}.",
            FACTOR_MISAPPLIED))
    # Common practice: minimum conductivity about 5 uS/cm.
    elif (fl.conductivity_us_cm is not None
          and fl.conductivity_us_cm < EM_MIN_CONDUCTIVITY_US_CM):
        out.append(Finding(
            "EM_LOW_CONDUCTIVITY", "misapplied",
            f"Conductivity {fl.conductivity_us_cm:g} µS/cm is below the "
            f"usual minimum of about {EM_MIN_CONDUCTIVITY_US_CM:g} µS/cm for a "
            "magnetic flow meter; the reading will be noisy or wrong "
            "(typical for demineralised water, condensate, hydrocarbons).",
            FACTOR_MISAPPLIED))
    # Common practice: without a recorded conductivity the minimum above cannot be checked, so ask for it.
    elif fl.conductivity_us_cm is None:
        out.append(Finding(
            "EM_CONDUCTIVITY_UNKNOWN", "low",
            "No conductivity is recorded for this liquid, so it cannot be checked against the usual minimum "
            f"of about {EM_MIN_CONDUCTIVITY_US_CM:g} µS/cm for a magnetic flow meter. Measure it and record "
            "it on the fluid.",
            FACTOR_LOW))
    # Common practice: chloride pitting of stainless (316L) electrodes.
    if fl.chlorides:
        out.append(_chloride_finding(
            "EM", "electrode", "high", FACTOR_HIGH,
            "Chlorides in the fluid pit stainless electrodes; the zero and span "
            "drift as the electrode surface changes.", mat))
    out += _chloride_cracking("EM", mat, fl)
    # Common practice: a magmeter measures the velocity of whatever fills the pipe; bubbles count as liquid
    # and, where they touch an electrode, break the signal.
    out += _entrained_gas(
        "EM", fl, "medium", FACTOR_MEDIUM,
        "Gas bubbles in the liquid are counted as liquid (the meter reads high by about the gas fraction), "
        "and bubbles passing the electrodes make the signal noisy.")
    # Common practice: coating insulates electrodes.
    if fl.sticky:
        out.append(Finding(
            "EM_ELECTRODE_COATING", "medium",
            "Sticky fluid coats the electrodes and insulates them from the "
            "liquid; the signal drifts and can drop out. Plan electrode "
            "cleaning.",
            FACTOR_MEDIUM))
    return out


def _coriolis(mat, fl, **_):
    out = []
    # Common practice: thin-walled stainless tubes under vibration stress
    # are prone to chloride stress corrosion cracking.
    if fl.chlorides:
        out.append(_chloride_finding(
            "CORIOLIS", "tube", "high", FACTOR_HIGH,
            "Chlorides cause stress corrosion cracking in thin stainless "
            "measuring tubes; wall thinning shifts density and flow "
            "calibration and a cracked tube can leak.", mat))
    # Common practice: thin measuring tubes under constant vibration crack first; above about 60 °C
    # austenitic stainless tubes are the wrong choice for chloride service.
    out += _chloride_cracking("CORIOLIS", mat, fl, severity="misapplied")
    # Common practice: bubbles decouple from the liquid in the vibrating tubes.
    out += _entrained_gas(
        "CORIOLIS", fl, "high", FACTOR_HIGH,
        "Gas bubbles move relative to the liquid in the vibrating tubes: the tubes are damped, the drive "
        "gain rises and both mass flow and density read wrong, at times grossly. Watch the drive gain.")
    # Common practice: abrasive solids erode tubes, especially at bends.
    if fl.solids or fl.phase == "slurry":
        out.append(Finding(
            "CORIOLIS_EROSION", "medium",
            "Abrasive solids wear the inside of the measuring tubes, "
            "especially at bends; the tube wall thins and the calibration "
            "shifts. Watch the density reading and tube health diagnostics.",
            FACTOR_MEDIUM))
    return out


def _mechanical_note(prefix):
    # Common practice: any meter with moving parts in the flow wears.
    return Finding(
        f"{prefix}_MOVING_PARTS", "low",
        "This meter has moving parts in the flow; bearings and rotor wear "
        "over time even on clean fluid.",
        FACTOR_LOW)


def _turbine(mat, fl, **_):
    out = [_mechanical_note("TURBINE")]
    # Common practice: solids wear bearings and rotor blades.
    if fl.solids or fl.phase == "slurry":
        out.append(Finding(
            "TURBINE_SOLIDS_WEAR", "high",
            "Solids in the fluid wear the turbine bearings and rotor blades; "
            "the meter slows down and reads low, then can seize.",
            FACTOR_HIGH))
    # Common practice: deposits on the rotor and bearings add drag and change the blade profile.
    if fl.sticky:
        out.append(Finding(
            "TURBINE_STICKY", "medium",
            "Sticky fluid coats the rotor and bearings; the drag slows the rotor and the deposits change the "
            "blade profile, so the meter factor shifts and the meter reads low. Plan cleaning.",
            FACTOR_MEDIUM))
    out += _chloride_pitting("TURBINE", "rotor and body", mat, fl)
    out += _chloride_cracking("TURBINE", mat, fl)
    return out


def _positive_displacement(mat, fl, **_):
    out = [_mechanical_note("PD")]
    # Common practice: sticky fluid builds up in close-clearance chambers.
    if fl.sticky:
        out.append(Finding(
            "PD_STICKY", "medium",
            "Sticky fluid builds up in the close clearances of the measuring "
            "chamber; the rotors drag or jam and the reading drifts.",
            FACTOR_MEDIUM))
    # Common practice: solids jam/wear close clearances.
    if fl.solids or fl.phase == "slurry":
        out.append(Finding(
            "PD_SOLIDS_WEAR", "high",
            "Solids wear or jam the close clearances of a positive "
            "displacement meter.",
            FACTOR_HIGH))
    out += _chloride_pitting("PD", "measuring chamber and rotors", mat, fl)
    out += _chloride_cracking("PD", mat, fl)
    return out


def _impulse_line_blocking(prefix, fl):
    # Common practice: small-bore impulse lines block with scale/slime/solids, and sticky fluid sets or
    # coats in them as it does in pitot ports.
    causes = []
    if fl.scaling:
        causes.append("scale")
    if fl.biofouling:
        causes.append("slime")
    if fl.solids or fl.phase == "slurry":
        causes.append("solids")
    if fl.sticky:
        causes.append("sticky deposits")
    if not causes:
        return []
    return [Finding(
        f"{prefix}_IMPULSE_LINE_BLOCKING", "medium",
        "Impulse lines can block with " + ", ".join(causes) + "; a blocked "
        "line gives a frozen or wrong differential pressure. Plan "
        "blow-down / rodding.",
        FACTOR_MEDIUM)]


def _orifice(mat, fl, **_):
    out = _impulse_line_blocking("ORIFICE", fl)
    # Common practice (ISO 5167 requires a sharp square edge): solids round
    # the edge and the meter then reads low.
    if fl.solids or fl.phase == "slurry":
        out.append(Finding(
            "ORIFICE_EDGE_WEAR", "high",
            "Solids wear the sharp edge of the orifice plate; a rounded edge "
            "makes the meter read low. Inspect the plate edge.",
            FACTOR_HIGH))
    out += _chloride_pitting("ORIFICE", "plate", mat, fl)
    out += _chloride_cracking("ORIFICE", mat, fl)
    return out


def _venturi(mat, fl, **_):
    return (_impulse_line_blocking("VENTURI", fl) + _chloride_pitting("VENTURI", "throat and tappings", mat, fl)
            + _chloride_cracking("VENTURI", mat, fl))


def _pitot_ports(prefix, fl):
    # Common practice: small sensing ports block with deposits.
    causes = []
    if fl.scaling:
        causes.append("scale")
    if fl.biofouling:
        causes.append("slime")
    if fl.solids or fl.phase == "slurry":
        causes.append("solids")
    if fl.sticky:
        causes.append("sticky deposits")
    if not causes:
        return []
    return [Finding(
        f"{prefix}_PORT_BLOCKING", "high",
        "The small sensing ports can block with " + ", ".join(causes) +
        "; a blocked port gives a false differential pressure. Plan purging "
        "or pull-and-clean.",
        FACTOR_HIGH)]


def _pitot(mat, fl, **_):
    return (_pitot_ports("PITOT", fl) + _chloride_pitting("PITOT", "probe", mat, fl)
            + _chloride_cracking("PITOT", mat, fl))


def _averaging_pitot(mat, fl, **_):
    return (_pitot_ports("AVG_PITOT", fl) + _chloride_pitting("AVG_PITOT", "probe", mat, fl)
            + _chloride_cracking("AVG_PITOT", mat, fl))


def _vortex(mat, fl, min_flow_m3_h=None, diameter_mm=None, **_):
    out = []
    # From memory / common practice: lower linearity limit Re ~10,000-20,000;
    # we use 20,000 (VORTEX_MIN_RE). Checked at MINIMUM flow, the worst case.
    inputs = (fl.density_kg_m3, fl.viscosity_mpa_s, min_flow_m3_h, diameter_mm)
    usable = all(x is not None and x > 0 for x in inputs)
    if not usable:
        out.append(Finding(
            "VORTEX_RE_UNKNOWN", "low",
            "Cannot check the Reynolds number at minimum flow (density, "
            "viscosity, minimum flow or pipe size missing); vortex meters "
            "stop reading reliably at low Reynolds number.",
            FACTOR_LOW))
    else:
        re = reynolds_number(fl.density_kg_m3, fl.viscosity_mpa_s,
                             min_flow_m3_h, diameter_mm)
        if re < VORTEX_MIN_RE:
            out.append(Finding(
                "VORTEX_LOW_RE", "high",
                f"At minimum flow the Reynolds number is about {re:,.0f}, "
                f"below about {VORTEX_MIN_RE:,.0f}; vortex shedding is not "
                "regular there, so the meter reads wrong or drops to zero at "
                "low flow.",
                FACTOR_HIGH))
    # Common practice: slurry erodes/clogs the bluff body and sensor.
    if fl.phase == "slurry" or fl.solids:
        out.append(Finding(
            "VORTEX_SLURRY", "medium",
            "Solids erode the bluff body and can clog the sensor; the "
            "calibration depends on the bluff body shape.",
            FACTOR_MEDIUM))
    # Common practice: buildup changes bluff-body geometry.
    if fl.sticky:
        out.append(Finding(
            "VORTEX_COATING", "medium",
            "Sticky deposits build up on the bluff body and change its shape; "
            "the meter factor shifts.",
            FACTOR_MEDIUM))
    # Common practice: bubbles in a liquid damp the vortices and disturb the shedding.
    out += _entrained_gas(
        "VORTEX", fl, "medium", FACTOR_MEDIUM,
        "Gas bubbles in the liquid damp the vortices and disturb the shedding frequency; the meter reads "
        "wrong or drops out.")
    out += _chloride_pitting("VORTEX", "bluff body", mat, fl)
    out += _chloride_cracking("VORTEX", mat, fl)
    return out


def _thermal_mass(mat, fl, **_):
    out = []
    # Common practice: thermal dispersion/mass meters are for gases.
    if fl.phase in ("liquid", "slurry"):
        out.append(Finding(
            "THERMAL_NOT_GAS", "misapplied",
            "A thermal mass flow meter is calibrated for gas; on a liquid the "
            "heat transfer is completely different and the reading is "
            "meaningless.",
            FACTOR_MISAPPLIED))
    # Common practice: any coating on the heated sensor changes heat transfer.
    causes = []
    if fl.sticky:
        causes.append("sticky deposits")
    if fl.biofouling:
        causes.append("slime")
    # FluidProps has no "wet gas" flag, so liquid droplets are inferred only
    # for steam (condensate); liquids are already flagged misapplied above.
    if fl.phase == "steam":
        causes.append("condensate droplets")
    if causes:
        out.append(Finding(
            "THERMAL_SENSOR_COATING", "medium",
            "The heated sensor gets coated or wetted by " + ", ".join(causes) +
            "; this changes the heat transfer and the meter reads wrong. Plan "
            "sensor cleaning.",
            FACTOR_MEDIUM))
    # Common practice: thin sensor sheaths corrode.
    if fl.chlorides:
        out.append(_chloride_finding(
            "THERMAL", "sensor", "medium", FACTOR_MEDIUM,
            "Chlorides or other corrosive gas corrode the thin sensor sheath; "
            "the heat transfer changes and the reading drifts.", mat))
    out += _chloride_cracking("THERMAL", mat, fl)
    return out


def _ultrasonic_transit(mat, fl, **_):
    out = []
    # Common practice: transit-time needs a clean acoustic path; solids and
    # bubbles scatter/attenuate the signal.
    if fl.phase in ("liquid", "slurry"):
        causes = []
        if fl.solids or fl.phase == "slurry":
            causes.append("heavy solids")
        if fl.entrained_gas:
            causes.append("entrained gas bubbles")
        if causes:
            out.append(Finding(
                "USONIC_SIGNAL_LOSS", "high",
                "Transit-time ultrasonic needs a clean liquid; "
                + " and ".join(causes) + " scatter the sound and the meter "
                "loses signal or reads wrong. Watch signal strength "
                "diagnostics.",
                FACTOR_HIGH))
    out += _chloride_cracking("USONIC", mat, fl)
    return out


def _ultrasonic_clampon(mat, fl, **_):
    out = []
    # Common practice: clamp-on sensors sit outside the pipe.
    if fl.chlorides:
        out.append(Finding(
            "CLAMPON_CORROSIVE_OK", "low",
            "Corrosive fluid, but a clamp-on ultrasonic meter has nothing "
            "wetted, so it is the low-risk choice here.",
            FACTOR_NOTE))
    # Same acoustic limitation as inline transit-time (common practice).
    if fl.phase in ("liquid", "slurry") and (
            fl.solids or fl.phase == "slurry" or fl.entrained_gas):
        out.append(Finding(
            "CLAMPON_SIGNAL_LOSS", "high",
            "Solids or gas bubbles scatter the sound; a transit-time clamp-on "
            "meter loses signal or reads wrong.",
            FACTOR_HIGH))
    return out


_RULES = {
    "electromagnetic": _electromagnetic,
    "coriolis": _coriolis,
    "vortex": _vortex,
    "turbine": _turbine,
    "ultrasonic_transit": _ultrasonic_transit,
    "ultrasonic_clampon": _ultrasonic_clampon,
    "orifice": _orifice,
    "venturi": _venturi,
    "pitot": _pitot,
    "averaging_pitot": _averaging_pitot,
    "positive_displacement": _positive_displacement,
    "thermal_mass": _thermal_mass,
}
assert set(_RULES) == set(PRINCIPLES)


def assess(principle: str, wetted_material: str, fluid: FluidProps,
           normal_flow_m3_h: float | None = None,
           min_flow_m3_h: float | None = None,
           diameter_mm: float | None = None) -> list[Finding]:
    """Return risk findings for a meter of ``principle`` on ``fluid``.

    Raises ValueError for an unknown principle or phase. ``normal_flow_m3_h``
    is accepted for API stability; the vortex Reynolds check deliberately
    uses ``min_flow_m3_h`` (the worst case).
    """
    if principle not in _RULES:
        raise ValueError(f"unknown principle {principle!r}; expected one of {PRINCIPLES}")
    if not isinstance(fluid, FluidProps):
        raise ValueError(f"fluid must be FluidProps, not {type(fluid).__name__}")
    if fluid.phase not in PHASES:
        raise ValueError(f"unknown phase {fluid.phase!r}; expected one of {PHASES}")
    for name, value in (("normal_flow_m3_h", normal_flow_m3_h), ("min_flow_m3_h", min_flow_m3_h),
                        ("diameter_mm", diameter_mm)):
        if value is not None and checks.number(name, value) < 0:
            raise ValueError(f"{name} cannot be negative, not {value!r}")
    return _RULES[principle](
        wetted_material or "", fluid,
        normal_flow_m3_h=normal_flow_m3_h,
        min_flow_m3_h=min_flow_m3_h,
        diameter_mm=diameter_mm,
    )


def assess_each_principle(wetted_material: str, fluid: FluidProps, **flows) -> list[tuple[str, list[Finding]]]:
    """(principle, findings) for a device of every principle on this duty, the least shortened first (then in
    the order of PRINCIPLES): what a position with no device installed would meet, since the findings depend on
    the principle of the device still to be chosen. ``flows`` as for :func:`assess`."""
    results = [(principle, assess(principle, wetted_material, fluid, **flows)) for principle in PRINCIPLES]
    return sorted(results, key=lambda pair: (-interval_factor(pair[1]), PRINCIPLES.index(pair[0])))


# --------------------------------------------------------------------------
# Plain words
# --------------------------------------------------------------------------

_PARTS = {  # code prefix -> the part the chloride findings are about, in plain words
    "EM": "electrodes", "CORIOLIS": "measuring tubes", "TURBINE": "rotor and body", "PD": "measuring chamber",
    "ORIFICE": "plate", "VENTURI": "throat", "PITOT": "probe", "AVG_PITOT": "probe", "VORTEX": "bluff body",
    "THERMAL": "sensor sheath", "USONIC": "meter body",
}

TITLES = {
    "MAINT_FOULED": "Found fouled at inspection after inspection",  # maintenance/loop.py
    "EM_NOT_LIQUID": "Magnetic meter on a gas or steam",
    "EM_LOW_CONDUCTIVITY": "Liquid too poorly conductive for a magnetic meter",
    "EM_CONDUCTIVITY_UNKNOWN": "Conductivity not recorded: measure it",
    "EM_ENTRAINED_GAS": "Gas bubbles in the liquid",
    "EM_ELECTRODE_COATING": "Coating on the electrodes",
    "CORIOLIS_EROSION": "Solids wear the measuring tubes",
    "CORIOLIS_ENTRAINED_GAS": "Gas bubbles in the vibrating tubes",
    "TURBINE_MOVING_PARTS": "Moving parts wear",
    "TURBINE_SOLIDS_WEAR": "Solids wear bearings and rotor",
    "TURBINE_STICKY": "Sticky deposits on rotor and bearings",
    "PD_MOVING_PARTS": "Moving parts wear",
    "PD_STICKY": "Sticky fluid in close clearances",
    "PD_SOLIDS_WEAR": "Solids wear or jam the clearances",
    "ORIFICE_IMPULSE_LINE_BLOCKING": "Impulse lines can block",
    "ORIFICE_EDGE_WEAR": "Solids round the plate edge",
    "VENTURI_IMPULSE_LINE_BLOCKING": "Impulse lines can block",
    "PITOT_PORT_BLOCKING": "Sensing ports can block",
    "AVG_PITOT_PORT_BLOCKING": "Sensing ports can block",
    "VORTEX_RE_UNKNOWN": "Reynolds number cannot be checked",
    "VORTEX_LOW_RE": "Flow too slow or viscous for vortex shedding",
    "VORTEX_SLURRY": "Solids erode the bluff body",
    "VORTEX_COATING": "Deposits on the bluff body",
    "VORTEX_ENTRAINED_GAS": "Gas bubbles disturb the vortices",
    "THERMAL_NOT_GAS": "Thermal mass meter on a liquid",
    "THERMAL_SENSOR_COATING": "Coating on the heated sensor",
    "USONIC_SIGNAL_LOSS": "Solids or bubbles block the sound",
    "CLAMPON_CORROSIVE_OK": "Corrosive fluid, nothing wetted",
    "CLAMPON_SIGNAL_LOSS": "Solids or bubbles block the sound",
}
for _prefix, _part in _PARTS.items():
    TITLES.setdefault(f"{_prefix}_CHLORIDES", f"Chlorides attack the {_part}")
    TITLES.setdefault(f"{_prefix}_CHLORIDES_MITIGATED", f"Chlorides, but the {_part} material resists them")
    TITLES.setdefault(f"{_prefix}_CHLORIDE_CRACKING", f"Hot chlorides crack stainless {_part}")
    TITLES.setdefault(f"{_prefix}_CHLORIDE_TEMPERATURE_UNKNOWN", "Chlorides on stainless: record the temperature")

SEVERITY_WORDS = {
    "misapplied": "not fit for this duty",
    "high": "high risk",
    "medium": "medium risk",
    "low": "low risk",  # a low finding that does not shorten (factor 1) is called a note (Finding.severity_words)
}


def recommendation(findings) -> str:
    """NOT_FIT when any finding says the principle should not be used on this fluid, else ""."""
    findings = list(findings)
    worst_severity(findings)  # refuses an unknown severity
    return NOT_FIT if any(f.severity == "misapplied" for f in findings) else ""
