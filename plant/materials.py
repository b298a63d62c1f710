"""The fixed list of wetted materials a meter can be recorded with, and what the risk rules need to know of each.

Pure Python: no Django, no ORM. The register stores the ``code``; pages show the ``label``.

For a magnetic meter the material recorded is that of the electrodes (the liner goes in the meter's material
details); for every other principle it is the material of the measuring element in contact with the fluid
(tubes, bluff body, rotor, plate, probe, sensor sheath).

Two properties per material feed :mod:`plant.risk`:

* ``austenitic`` - an austenitic stainless steel (304/316 families). Basis, common practice: these grades suffer
  chloride stress-corrosion cracking in warm chloride service, above about 60 °C.
* ``chloride_resistant`` - the material is a usual choice for brine / chloride service, so a chloride finding is
  turned into a note. Basis, common practice: nickel-chromium-molybdenum alloys (C-276, C-22), titanium, tantalum,
  platinum-iridium electrodes, super duplex (PREN 40 or more), fluoropolymers, other plastics, ceramics and glass.
  Standard austenitic stainless (304, 316, 316L), duplex 2205, carbon steel, cast iron, aluminium and brass are not.
* ``metal`` - whether it can be an electrode of a magnetic meter (a liner material cannot).
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Material:
    code: str
    label: str
    austenitic: bool = False
    chloride_resistant: bool = False
    metal: bool = True


MATERIALS = (
    Material("304", "Stainless steel 304", austenitic=True),
    Material("304L", "Stainless steel 304L", austenitic=True),
    Material("316", "Stainless steel 316", austenitic=True),
    Material("316L", "Stainless steel 316L", austenitic=True),
    Material("duplex 2205", "Duplex stainless 2205"),
    Material("super duplex 2507", "Super duplex stainless 2507", chloride_resistant=True),
    Material("alloy C-276", "Nickel alloy C-276", chloride_resistant=True),
    Material("alloy C-22", "Nickel alloy C-22", chloride_resistant=True),
    Material("titanium", "Titanium", chloride_resistant=True),
    Material("tantalum", "Tantalum", chloride_resistant=True),
    Material("platinum-iridium", "Platinum-iridium", chloride_resistant=True),
    Material("carbon steel", "Carbon steel"),
    Material("cast iron", "Cast iron"),
    Material("aluminium", "Aluminium"),
    Material("brass", "Brass or bronze"),
    Material("PTFE", "PTFE or PFA (fluoropolymer)", chloride_resistant=True, metal=False),
    Material("PVDF", "PVDF", chloride_resistant=True, metal=False),
    Material("polypropylene", "Polypropylene", chloride_resistant=True, metal=False),
    Material("PVC-U", "PVC-U", chloride_resistant=True, metal=False),
    Material("ceramic", "Ceramic (alumina or zirconia)", chloride_resistant=True, metal=False),
    Material("glass", "Borosilicate glass", chloride_resistant=True, metal=False),
)

BY_CODE = {m.code: m for m in MATERIALS}
CHOICES = [(m.code, m.label) for m in MATERIALS]


def lookup(code: str | None) -> Material | None:
    """The material recorded under ``code``; None when nothing is recorded or the code is not on the list."""
    return BY_CODE.get(code or "")
