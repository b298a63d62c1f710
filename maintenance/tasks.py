"""Maintenance tasks called for by a meter's measuring principle and its risk findings (pure: no ORM).

`derive_tasks(principle, findings)` takes the principle and the findings of plant/risk.py (anything with
`code`, `severity` and `interval_factor`) and returns the tasks the duty calls for, each with a base
frequency in days, a reason in plain words and the basis of the rule.

Frequencies are shortened by severity the same way calibration intervals are (plant/risk.py): the base
frequency times the smallest interval factor among the findings that call for the task, rounded to whole
days (misapplied 0.25, high 0.5, medium 0.75, low 0.9; a note, factor 1.0, does not shorten). A task called
for by the principle alone keeps its base frequency (factor 1.0).

Every base frequency below is "common practice": a rule of thumb of the trade for installed process meters,
not a figure from a standard; the plant's own findings then move it (maintenance/loop.py). Finding codes this
module does not know (new rules added to plant/risk.py later) call for no task of their own; the principle's
tasks still apply.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from plant import checks

COMMON_PRACTICE = "common practice"


@dataclass(frozen=True)
class TaskKind:
    code: str
    title: str
    base_days: int
    reason: str
    basis: str = COMMON_PRACTICE


# The catalogue: code -> what is done, how often at most (days) before findings shorten it, and why.
CATALOGUE = {k.code: k for k in [
    # Common practice: a walk-by look at every installed meter once a year at least.
    TaskKind("VISUAL_INSPECTION", "Visual inspection for leaks and damage", 365,
             "Every installed meter: look for leaks at flanges and fittings, damage to the body, cable glands and "
             "covers, earthing and the display; catch trouble before it stops the measurement."),
    # Common practice: yearly built-in or external verification of the transmitter electronics where offered.
    TaskKind("TRANSMITTER_VERIFICATION", "In-situ verification of the transmitter", 365,
             "Run the transmitter's in-situ verification (electronics, coils or sensor self-test) and record the "
             "result; it shows a failing transmitter between calibrations without removing the meter."),
    # Common practice: electrodes cleaned/inspected twice a year when the fluid coats or corrodes them.
    TaskKind("ELECTRODE_CLEAN", "Clean and inspect the electrodes", 180,
             "Coating or corrosion of the electrodes makes a magnetic flow meter drift or drop out; remove the "
             "meter or use the cleaning fitting, clean the electrodes and look for pitting."),
    # Common practice: quarterly blow-down of DP impulse lines in fouling service.
    TaskKind("IMPULSE_BLOWDOWN", "Blow down the impulse lines and check the manifold", 90,
             "Scale, slime or solids block small-bore impulse lines and give a frozen or wrong differential "
             "pressure; blow the lines down, check the manifold valves and equalise, then check the zero."),
    # Common practice: a yearly manifold and zero check on every DP meter, fouling service or not.
    TaskKind("DP_ZERO_CHECK", "Check the DP transmitter zero and the manifold", 365,
             "A differential-pressure meter reads through its transmitter and manifold: equalise, check the zero "
             "and look for passing valves and leaking fittings."),
    # Common practice: pitot ports are small and block; pull and clean a few times a year in fouling service.
    TaskKind("PITOT_PULL_CLEAN", "Remove and clean the pitot or averaging pitot", 90,
             "The sensing ports of a pitot or averaging pitot are small and block with deposits; remove the probe "
             "(or purge it where a purge is fitted), clean the ports and check them open."),
    # Common practice: yearly rotor/bearing inspection of turbine meters, strainer ahead of it at the same visit.
    TaskKind("TURBINE_ROTOR_STRAINER", "Inspect the turbine rotor and bearings, clean the strainer", 365,
             "A turbine meter's rotor and bearings wear and a blocked or holed strainer ahead of it lets solids "
             "through or starves the meter; inspect the rotor for free spin and damage, clean the strainer."),
    # Common practice: yearly inspection of a PD meter's measuring chamber and rotors.
    TaskKind("PD_CHAMBER_INSPECTION", "Inspect the measuring chamber and rotors of the PD meter", 365,
             "Close clearances of a positive displacement meter wear or build up deposits; check the rotors turn "
             "freely, look for wear marks and clean the chamber and the strainer ahead of it."),
    # Common practice: twice-yearly zero check and tube-health diagnostics on Coriolis meters in harsh service.
    TaskKind("CORIOLIS_ZERO_TUBE", "Zero check and tube-health check of the Coriolis meter", 180,
             "Corrosion or erosion thins the measuring tubes and shifts the calibration; check the zero at no "
             "flow with the tubes full, and read the tube-health diagnostics (stiffness, drive gain, density)."),
    # Common practice: yearly check of clamp-on coupling and spacing.
    TaskKind("CLAMPON_COUPLING", "Check clamp-on transducer coupling and spacing", 365,
             "Clamp-on transducers lose their couplant and move on the pipe; check the coupling, the spacing "
             "against the set-up, the mounting straps and the signal strength."),
    # Common practice: check signal quality of inline ultrasonic meters when solids or gas scatter the sound.
    TaskKind("USONIC_SIGNAL_CHECK", "Check ultrasonic signal strength and transducer faces", 180,
             "Solids and bubbles scatter the sound; read the signal strength and gain diagnostics, and clean the "
             "transducer faces when they are coated."),
    # Common practice: yearly pull-and-inspect of orifice plates in abrasive service.
    TaskKind("ORIFICE_PLATE_INSPECTION", "Pull and inspect the orifice plate edge", 365,
             "Solids round the sharp edge of an orifice plate and the meter then reads low; pull the plate and "
             "check the edge is sharp and square, the plate flat and the bore undamaged."),
    # Common practice: inspect a vortex meter's bluff body where coating or solids change its shape.
    TaskKind("VORTEX_BLUFF_BODY", "Inspect and clean the vortex bluff body", 365,
             "Deposits or erosion change the bluff body's shape and so the meter factor; inspect and clean it "
             "and check the sensor is free."),
    # Common practice: a yearly look for chloride pitting and crevice attack of wetted parts in chloride service.
    TaskKind("CHLORIDE_PITTING_INSPECTION", "Inspect the wetted parts for chloride pitting and crevice attack", 365,
             "Chlorides (brine, cooling-tower water) pit and crevice-attack stainless steel, carbon steel and "
             "cast iron; remove or borescope the primary element, look for pits at the tappings, edges and "
             "gasket faces, and record what is found."),
    # Common practice: twice-yearly cleaning of thermal mass sensors in coating or wet service.
    TaskKind("THERMAL_SENSOR_CLEAN", "Clean and inspect the thermal sensor", 180,
             "A coating or corrosion on the heated sensor changes its heat transfer and the reading; remove the "
             "probe, clean it and look for damage to the sheath."),
]}

# Every principle is inspected; these principles also have a task of their own (common practice).
PRINCIPLE_TASKS = {
    "electromagnetic": ["TRANSMITTER_VERIFICATION"],
    "coriolis": ["TRANSMITTER_VERIFICATION"],
    "vortex": ["TRANSMITTER_VERIFICATION"],
    "ultrasonic_transit": ["TRANSMITTER_VERIFICATION"],
    "ultrasonic_clampon": ["CLAMPON_COUPLING"],
    "orifice": ["DP_ZERO_CHECK"],
    "venturi": ["DP_ZERO_CHECK"],
    "pitot": ["DP_ZERO_CHECK"],
    "averaging_pitot": ["DP_ZERO_CHECK"],
    "turbine": ["TURBINE_ROTOR_STRAINER"],
    "positive_displacement": ["PD_CHAMBER_INSPECTION"],
    "thermal_mass": [],
}
ALL_PRINCIPLES_TASK = "VISUAL_INSPECTION"

# Risk finding (plant/risk.py code) -> the task it calls for (common practice, each named in the catalogue).
FINDING_TASKS = {
    "EM_CHLORIDES": "ELECTRODE_CLEAN",
    "EM_ELECTRODE_COATING": "ELECTRODE_CLEAN",
    "CORIOLIS_CHLORIDES": "CORIOLIS_ZERO_TUBE",
    "CORIOLIS_CHLORIDE_CRACKING": "CORIOLIS_ZERO_TUBE",
    "EM_CHLORIDE_CRACKING": "ELECTRODE_CLEAN",
    "THERMAL_CHLORIDE_CRACKING": "THERMAL_SENSOR_CLEAN",
    "TURBINE_STICKY": "TURBINE_ROTOR_STRAINER",
    "CORIOLIS_EROSION": "CORIOLIS_ZERO_TUBE",
    "TURBINE_MOVING_PARTS": "TURBINE_ROTOR_STRAINER",
    "TURBINE_SOLIDS_WEAR": "TURBINE_ROTOR_STRAINER",
    "PD_MOVING_PARTS": "PD_CHAMBER_INSPECTION",
    "PD_STICKY": "PD_CHAMBER_INSPECTION",
    "PD_SOLIDS_WEAR": "PD_CHAMBER_INSPECTION",
    "ORIFICE_IMPULSE_LINE_BLOCKING": "IMPULSE_BLOWDOWN",
    "VENTURI_IMPULSE_LINE_BLOCKING": "IMPULSE_BLOWDOWN",
    "ORIFICE_EDGE_WEAR": "ORIFICE_PLATE_INSPECTION",
    "PITOT_PORT_BLOCKING": "PITOT_PULL_CLEAN",
    "AVG_PITOT_PORT_BLOCKING": "PITOT_PULL_CLEAN",
    "VORTEX_SLURRY": "VORTEX_BLUFF_BODY",
    "VORTEX_COATING": "VORTEX_BLUFF_BODY",
    "THERMAL_SENSOR_COATING": "THERMAL_SENSOR_CLEAN",
    "THERMAL_CHLORIDES": "THERMAL_SENSOR_CLEAN",
    "USONIC_SIGNAL_LOSS": "USONIC_SIGNAL_CHECK",
    "CLAMPON_SIGNAL_LOSS": "CLAMPON_COUPLING",
    # chlorides (brine) pit and crevice-attack the wetted parts (plant/risk.py _chloride_pitting; common practice)
    "TURBINE_CHLORIDES": "TURBINE_ROTOR_STRAINER",
    "PD_CHLORIDES": "PD_CHAMBER_INSPECTION",
    "ORIFICE_CHLORIDES": "ORIFICE_PLATE_INSPECTION",
    "VORTEX_CHLORIDES": "VORTEX_BLUFF_BODY",
    "VENTURI_CHLORIDES": "CHLORIDE_PITTING_INSPECTION",
    "PITOT_CHLORIDES": "PITOT_PULL_CLEAN",
    "AVG_PITOT_CHLORIDES": "PITOT_PULL_CLEAN",
    # hot chlorides crack austenitic stainless (plant/risk.py _chloride_cracking; common practice)
    "TURBINE_CHLORIDE_CRACKING": "TURBINE_ROTOR_STRAINER",
    "PD_CHLORIDE_CRACKING": "PD_CHAMBER_INSPECTION",
    "ORIFICE_CHLORIDE_CRACKING": "ORIFICE_PLATE_INSPECTION",
    "VORTEX_CHLORIDE_CRACKING": "VORTEX_BLUFF_BODY",
    "VENTURI_CHLORIDE_CRACKING": "CHLORIDE_PITTING_INSPECTION",
    "PITOT_CHLORIDE_CRACKING": "PITOT_PULL_CLEAN",
    "AVG_PITOT_CHLORIDE_CRACKING": "PITOT_PULL_CLEAN",
}


@dataclass(frozen=True)
class TaskSpec:
    code: str
    title: str
    base_days: int
    factor: float            # smallest interval factor of the findings calling for it; 1.0 for the principle alone
    frequency_days: int      # base_days × factor, rounded, at least one day
    reason: str
    basis: str
    because: tuple = field(default_factory=tuple)  # finding codes that call for it ("" = the principle itself)

    def explanation(self) -> str:
        """One sentence: why the task, and how its frequency follows."""
        why = ("called for by " + ", ".join(c for c in self.because if c) if any(self.because)
               else "called for by the measuring principle")
        return (f"{self.title}: {why}; base {self.base_days} d × severity factor {self.factor:.2f} = "
                f"{self.frequency_days} d ({self.basis}).")


def shortened(base_days: int, factor: float) -> int:
    """base_days × factor rounded half up to whole days, never below one day (as effective calibration intervals)."""
    base_days = checks.whole("base_days", base_days, minimum=1)
    factor = checks.fraction("factor", factor, include_one=True)
    return max(1, int(base_days * factor + 0.5))


def derive_tasks(principle: str, findings) -> list[TaskSpec]:
    """The tasks a meter of `principle` with these risk findings calls for, in catalogue order."""
    if principle not in PRINCIPLE_TASKS:
        raise ValueError(f"unknown principle {principle!r}")
    calls: dict[str, list] = {ALL_PRINCIPLES_TASK: [("", 1.0)]}
    for code in PRINCIPLE_TASKS[principle]:
        calls.setdefault(code, []).append(("", 1.0))
    for finding in findings:
        code = FINDING_TASKS.get(finding.code)
        if code is not None:
            factor = checks.fraction(f"findings ({finding.code}).interval_factor", finding.interval_factor,
                                     include_one=True)
            calls.setdefault(code, []).append((finding.code, factor))
    out = []
    for code, kind in CATALOGUE.items():
        if code not in calls:
            continue
        factor = min(f for _, f in calls[code])
        out.append(TaskSpec(code=code, title=kind.title, base_days=kind.base_days, factor=factor,
                            frequency_days=shortened(kind.base_days, factor), reason=kind.reason, basis=kind.basis,
                            because=tuple(sorted({c for c, _ in calls[code]}, key=lambda c: (c != "", c)))))
    return out
