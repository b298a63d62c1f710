"""Map the free-text wetted materials recorded before the fixed list onto it.

The mapping is frozen here (not imported from plant.materials) so this migration means the same thing whenever it
runs. A value that names one material of the list in a usual way ("SS 316L", "Hastelloy C", "Ti Gr2") becomes that
material; anything else ("PTFE liner, 316 electrodes", "see datasheet") becomes "not recorded", which the risk rules
treat as not chloride resistant (the safe side). Whenever the stored code is not exactly what was written, the text
as written is kept in the new "material details" field, so nothing recorded is lost. "Hastelloy C" is read as
alloy C-276 (its successor grade): the text kept in the details lets a reviewer correct that.

The stored risk severity of each meter follows the new rules after the next `manage.py recompute_due_dates` (or a
save of the meter or its fluid).
"""
import re

from django.db import migrations

CODES = {  # code -> its label on the list
    "304": "Stainless steel 304", "304L": "Stainless steel 304L", "316": "Stainless steel 316",
    "316L": "Stainless steel 316L", "duplex 2205": "Duplex stainless 2205",
    "super duplex 2507": "Super duplex stainless 2507", "alloy C-276": "Nickel alloy C-276",
    "alloy C-22": "Nickel alloy C-22", "titanium": "Titanium", "tantalum": "Tantalum",
    "platinum-iridium": "Platinum-iridium", "carbon steel": "Carbon steel", "cast iron": "Cast iron",
    "aluminium": "Aluminium", "brass": "Brass or bronze", "PTFE": "PTFE or PFA (fluoropolymer)", "PVDF": "PVDF",
    "polypropylene": "Polypropylene", "PVC-U": "PVC-U", "ceramic": "Ceramic (alumina or zirconia)",
    "glass": "Borosilicate glass",
}
ALIASES = {  # squeezed text (letters and digits only, lower case, stainless prefixes removed) -> code
    "304": "304", "14301": "304", "304l": "304L", "14307": "304L", "316": "316", "14401": "316",
    "316l": "316L", "14404": "316L",
    "duplex": "duplex 2205", "2205": "duplex 2205", "duplex2205": "duplex 2205", "14462": "duplex 2205",
    "superduplex": "super duplex 2507", "2507": "super duplex 2507", "superduplex2507": "super duplex 2507",
    "hastelloy": "alloy C-276", "hastelloyc": "alloy C-276", "hastelloyc276": "alloy C-276", "c276": "alloy C-276",
    "alloyc276": "alloy C-276", "alloyc": "alloy C-276", "24819": "alloy C-276",
    "hastelloyc22": "alloy C-22", "c22": "alloy C-22", "alloyc22": "alloy C-22", "alloy22": "alloy C-22",
    "titanium": "titanium", "ti": "titanium", "titaniumgr2": "titanium", "titaniumgrade2": "titanium",
    "tigr2": "titanium", "tantalum": "tantalum", "ta": "tantalum",
    "platinum": "platinum-iridium", "pt": "platinum-iridium", "platinumiridium": "platinum-iridium",
    "ptir": "platinum-iridium",
    "carbonsteel": "carbon steel", "cs": "carbon steel", "mildsteel": "carbon steel",
    "castiron": "cast iron", "aluminium": "aluminium", "aluminum": "aluminium", "al": "aluminium",
    "brass": "brass", "bronze": "brass", "ptfe": "PTFE", "pfa": "PTFE", "pvdf": "PVDF",
    "polypropylene": "polypropylene", "pp": "polypropylene", "pvc": "PVC-U", "pvcu": "PVC-U", "upvc": "PVC-U",
    "ceramic": "ceramic", "alumina": "ceramic", "zirconia": "ceramic", "glass": "glass",
    "borosilicate": "glass", "borosilicateglass": "glass",
}
PREFIXES = ("stainlesssteel", "stainless", "aisi", "sst", "ss")


def squeeze(text):
    word = re.sub(r"[^a-z0-9]", "", text.lower())
    for prefix in PREFIXES:
        if word.startswith(prefix) and len(word) > len(prefix):
            word = word[len(prefix):]
            break
    return word


def code_for(text):
    """The list code a free-text material names, or None."""
    stripped = text.strip()
    for code, label in CODES.items():
        if stripped.lower() in (code.lower(), label.lower()):
            return code
    return ALIASES.get(squeeze(stripped))


def forwards(apps, schema_editor):
    Meter = apps.get_model("plant", "Meter")
    for meter in Meter.objects.exclude(wetted_material="").only("pk", "wetted_material", "material_details"):
        text = meter.wetted_material
        code = code_for(text)
        details = meter.material_details
        if code != text and not details:
            details = text.strip()[:120]
        Meter.objects.filter(pk=meter.pk).update(wetted_material=code or "", material_details=details)


def backwards(apps, schema_editor):
    Meter = apps.get_model("plant", "Meter")
    for meter in Meter.objects.exclude(material_details="").only("pk", "wetted_material", "material_details"):
        Meter.objects.filter(pk=meter.pk).update(wetted_material=meter.material_details[:60])


class Migration(migrations.Migration):

    dependencies = [
        ("plant", "0005_site_time_zone_wetted_material_list"),
    ]

    operations = [migrations.RunPython(forwards, backwards)]
