"""What a reference standard's DCC says: issuer, certificate number, dates, and its results with their expanded
uncertainties (DCC 3.2.0 element names; D-SI 2.1.0 quantities). Pure: an lxml root element in, plain data out.

A result is any quantity under measurementResults that states a value (si:real, si:realListXMLList, or those
inside si:hybrid); its expanded uncertainty U, coverage factor k and coverage probability come from si:expandedUnc
(or the XMLList form). A result is a flow result when its unit is a volume or mass flow: dsiunits finds a scale
factor between it and m³/s or kg/s. The uncertainty offered for the standard (``suggested_uncertainty``) is the
largest relative U (in %) among the flow results' error quantities, or, with none in %, among all results in %:
the largest U over the range is the one that holds everywhere on it (common practice for a single-number U).
"""
from __future__ import annotations

import datetime as dt
import math
import warnings
from dataclasses import dataclass, field

DCC = "https://ptb.de/dcc"
SI = "https://ptb.de/si"
NS = {"dcc": DCC, "si": SI}
VOLUME_FLOW, MASS_FLOW = r"\metre\tothe{3}\second\tothe{-1}", r"\kilogram\second\tothe{-1}"
PERCENT = r"\percent"


@dataclass
class Result:
    name: str
    ref_type: str
    values: list[float]
    unit: str
    uncertainties: list[float] = field(default_factory=list)
    coverage_factors: list[float] = field(default_factory=list)
    probabilities: list[float] = field(default_factory=list)
    flow: bool = False

    @property
    def relative(self) -> bool:
        return self.unit == PERCENT


@dataclass
class DccSummary:
    certificate_number: str
    issuer: str
    calibration_date: dt.date | None
    issue_date: dt.date | None
    item: str
    item_ids: list[tuple[str, str]]
    results: list[Result]

    @property
    def flow_results(self) -> list[Result]:
        return [r for r in self.results if r.flow]

    def suggested_uncertainty(self) -> float | None:
        """The largest expanded uncertainty in % (see the module's note), or None when no result gives one."""
        if not self.flow_results:
            return None
        chosen = [u for r in self.results if r.relative and r.uncertainties for u in r.uncertainties]
        return max(chosen) if chosen else None


def round_up(value: float, digits: int = 2) -> float:
    """`value` rounded up to `digits` significant digits: U is stated with at most two significant digits
    (JCGM 100:2008 §7.2.6); rounding up rather than to the nearest keeps it from understating (common practice)."""
    if value <= 0 or not math.isfinite(value):
        return value
    scale = 10 ** (digits - 1 - math.floor(math.log10(value)))
    scaled = value * scale
    nearest = round(scaled)
    # a value already at `digits` digits stays as it is (binary noise below 1e-9 relative is ignored)
    up = nearest if abs(scaled - nearest) <= 1e-9 * scaled else math.ceil(scaled)
    return up / scale if scale >= 1 else up * (1 / scale)


def _text(element, path):
    found = element.find(path, NS)
    return " ".join(found.text.split()) if found is not None and found.text else ""


def _content(element, path):
    """The English content of a textType element, else its first content."""
    parent = element.find(path, NS)
    if parent is None:
        return ""
    contents = parent.findall("dcc:content", NS)
    for content in contents:
        if content.get("lang") == "en" and (content.text or "").strip():
            return " ".join(content.text.split())
    return " ".join(contents[0].text.split()) if contents and contents[0].text else ""


def _date(value):
    try:
        return dt.date.fromisoformat(value[:10]) if value else None
    except ValueError:
        return None


def _floats(text):
    out = []
    for token in (text or "").split():
        try:
            value = float(token)
        except ValueError:
            continue
        if math.isfinite(value):
            out.append(value)
    return out


def is_flow_unit(unit: str) -> bool:
    """Whether a D-SI unit is a volume or mass flow (dsiunits finds a scale factor to m³/s or kg/s)."""
    from dsi_unit import DsiUnit

    if not unit or unit.startswith("|"):
        return False
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        parsed = DsiUnit(unit)
        if not parsed.valid:
            return False
        for target in (VOLUME_FLOW, MASS_FLOW):
            try:
                if not math.isnan(parsed.get_scale_factor(DsiUnit(target))):
                    return True
            except Exception:  # noqa: BLE001 - dsiunits raises on units it cannot compare
                continue
    return False


def _results_of(quantity, name, ref_type) -> list[Result]:
    found = []
    holders = [quantity] + quantity.findall("si:hybrid", NS)
    for holder in holders:
        for real in holder.findall("si:real", NS):
            unit = _text(real, "si:unit")
            found.append(Result(name, ref_type, _floats(_text(real, "si:value")), unit,
                                _floats(_text(real, "si:expandedUnc/si:uncertainty")),
                                _floats(_text(real, "si:expandedUnc/si:coverageFactor")),
                                _floats(_text(real, "si:expandedUnc/si:coverageProbability"))))
        for listed in holder.findall("si:realListXMLList", NS):
            units = _text(listed, "si:unitXMLList").split()
            found.append(Result(name, ref_type, _floats(_text(listed, "si:valueXMLList")), units[0] if units else "",
                                _floats(_text(listed, "si:expandedUncXMLList/si:uncertaintyXMLList")),
                                _floats(_text(listed, "si:expandedUncXMLList/si:coverageFactorXMLList")),
                                _floats(_text(listed, "si:expandedUncXMLList/si:coverageProbabilityXMLList"))))
    return found


def _in_metadata(element) -> bool:
    return any(a.tag == f"{{{DCC}}}measurementMetaData" for a in element.iterancestors())


def summary(root) -> DccSummary:
    """What the DCC (an lxml root of a schema-valid document) states, for the reviewer to confirm."""
    core = root.find("dcc:administrativeData/dcc:coreData", NS)
    lab = root.find("dcc:administrativeData/dcc:calibrationLaboratory/dcc:contact", NS)
    item = root.find("dcc:administrativeData/dcc:items/dcc:item", NS)
    results = []
    for measurement in root.iterfind("dcc:measurementResults/dcc:measurementResult", NS):
        for quantity in measurement.iterfind(".//dcc:results//dcc:quantity", NS):
            parent = quantity.getparent()
            if parent.tag not in (f"{{{DCC}}}data", f"{{{DCC}}}list") or _in_metadata(quantity):
                continue  # acceptance limits and other metadata are not results
            name = _content(quantity, "dcc:name") or _content(measurement, "dcc:name")
            found = _results_of(quantity, name, quantity.get("refType") or "")
            # a quantity in % (an error of indication) in the same list as flow values is a flow result too
            siblings = parent.findall("dcc:quantity", NS) if parent.tag == f"{{{DCC}}}list" else [quantity]
            flow = any(is_flow_unit(r.unit) for q in siblings for r in _results_of(q, "", ""))
            for result in found:
                result.flow = flow
            results.extend(found)
    ids = []
    if item is not None:
        for ident in item.iterfind("dcc:identifications/dcc:identification", NS):
            ids.append((_content(ident, "dcc:name") or _text(ident, "dcc:issuer"), _text(ident, "dcc:value")))
    return DccSummary(
        certificate_number=_text(core, "dcc:uniqueIdentifier") if core is not None else "",
        issuer=_content(lab, "dcc:name") if lab is not None else "",
        calibration_date=_date(_text(core, "dcc:endPerformanceDate") or _text(core, "dcc:beginPerformanceDate"))
        if core is not None else None,
        issue_date=_date(_text(core, "dcc:issueDate")) if core is not None else None,
        item=_content(item, "dcc:name") if item is not None else "",
        item_ids=ids,
        results=results,
    )
