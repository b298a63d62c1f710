"""Whether a device's range suits a position's flows: pure, numbers in, sentences out.

These are warnings for the person choosing a spare, not refusals: a device whose range is far above the flow
it will see reads in the part of its range where its error, stated as % of reading or % of span, is least
trustworthy. The principle×fluid refusals (a device not fit for the duty) are plant/risk.py's misapplied findings.

The figures below are common practice (from memory; makers state their own turndown for each model): the lowest
flow, as a fraction of the calibrated range high, at which a principle's stated accuracy is usually still held.
"""
from __future__ import annotations

import math

# common practice: a process normally running below a tenth of the meter's range is a meter sized too large
LOW_NORMAL_FRACTION = 0.10

USABLE_MINIMUM_FRACTION = {
    "electromagnetic": 0.03,        # about 0.3 m/s of a 10 m/s range
    "coriolis": 0.05,
    "vortex": 0.10,                 # shedding stops at low Reynolds numbers (risk.py checks that where it can)
    "turbine": 0.10,
    "ultrasonic_transit": 0.03,
    "ultrasonic_clampon": 0.05,
    "orifice": 0.25,                # square law: 4:1 in flow is 16:1 in differential pressure
    "venturi": 0.25,
    "pitot": 0.25,
    "averaging_pitot": 0.25,
    "positive_displacement": 0.10,
    "thermal_mass": 0.02,
}


def _number(name: str, value) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ValueError(f"{name} must be a number, got {value!r}.")
    if not math.isfinite(value):
        raise ValueError(f"{name} must be finite, got {value!r}.")
    return float(value)


def range_fit_warnings(principle: str, range_max, normal_flow, min_flow, *, units_label: str = "") -> list[str]:
    """Sentences on how the position's flows sit in the device's range; flows already in the device's units.

    `normal_flow` or `min_flow` may be None (not recorded or not convertible): no sentence about them then."""
    if principle not in USABLE_MINIMUM_FRACTION:
        raise ValueError(f"principle must be one of {', '.join(USABLE_MINIMUM_FRACTION)}, got {principle!r}.")
    high = _number("range_max", range_max)
    if high is None or high <= 0:
        raise ValueError(f"range_max must be above zero, got {range_max!r}.")
    normal, minimum = _number("normal_flow", normal_flow), _number("min_flow", min_flow)
    unit = f" {units_label}" if units_label else ""
    warnings = []
    if normal is not None and 0 <= normal < LOW_NORMAL_FRACTION * high:
        warnings.append(f"Normal flow {normal:.3g}{unit} is {100 * normal / high:.1f} % of the range high "
                        f"({high:g}{unit}), below {100 * LOW_NORMAL_FRACTION:g} %: the device is sized too large "
                        "for this duty.")
    usable = USABLE_MINIMUM_FRACTION[principle] * high
    if minimum is not None and 0 < minimum < usable:
        warnings.append(f"Minimum flow {minimum:.3g}{unit} is below the usable minimum of this principle "
                        f"(about {usable:.3g}{unit}, {100 * USABLE_MINIMUM_FRACTION[principle]:g} % of the range high; "
                        "common practice): readings there are outside its stated accuracy.")
    return warnings
